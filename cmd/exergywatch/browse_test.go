package main

import (
	"bytes"
	"strings"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/ingest/opcuasrc/uatest"
	"github.com/gopcua/opcua/ua"
)

// TestBrowseInProcessServer lists the variables of gopcua's in-process
// server; the expected rows are the variables the test itself created.
func TestBrowseInProcessServer(t *testing.T) {
	srv := uatest.Start(t, "PT101", "TT101")
	srv.Set("PT101", 12.5, time.Now(), ua.StatusOK)
	srv.Set("TT101", int32(42), time.Now(), ua.StatusOK)
	var out, errb bytes.Buffer
	code := dispatch([]string{"browse", "--timeout", "20s", srv.Endpoint()}, &out, &errb)
	if code != 0 {
		t.Fatalf("exit %d, stderr %s", code, errb.String())
	}
	var pt, tt string
	for _, line := range strings.Split(out.String(), "\n") {
		if strings.Contains(line, srv.NodeID("PT101")) {
			pt = line
		}
		if strings.Contains(line, srv.NodeID("TT101")) {
			tt = line
		}
	}
	if !strings.Contains(pt, "PT101") || !strings.Contains(pt, "12.5") || !strings.Contains(pt, "Double") {
		t.Errorf("PT101 row %q, want browse name, Double and value 12.5\n%s", pt, out.String())
	}
	if !strings.Contains(tt, "42") || !strings.Contains(tt, "Int32") {
		t.Errorf("TT101 row %q, want Int32 value 42", tt)
	}
	if !strings.HasPrefix(out.String(), "NODEID") {
		t.Errorf("no header: %q", out.String())
	}
}

func TestBrowseUsage(t *testing.T) {
	for _, tc := range []struct {
		args []string
		code int
	}{
		{[]string{"browse"}, 2},
		{[]string{"browse", "--root", "nonsense;;", "opc.tcp://127.0.0.1:1"}, 2},
		{[]string{"browse", "--security-policy", "Basic128Rsa15", "opc.tcp://127.0.0.1:1"}, 2},
		{[]string{"browse", "--timeout", "2s", "opc.tcp://127.0.0.1:1"}, 1}, // nothing listens on port 1
		{[]string{"browse", "-h"}, 0},
	} {
		var out, errb bytes.Buffer
		if got := dispatch(tc.args, &out, &errb); got != tc.code {
			t.Errorf("%v: exit %d, want %d (stderr %s)", tc.args, got, tc.code, errb.String())
		}
	}
}
