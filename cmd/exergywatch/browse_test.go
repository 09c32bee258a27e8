package main

import (
	"bytes"
	"crypto/sha1"
	"crypto/sha256"
	"encoding/hex"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/ingest/opcuasrc"
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
		// A trust list without a secure mode, and a trust list with the opt-out.
		{[]string{"browse", "--trust", "x.der", "opc.tcp://127.0.0.1:1"}, 2},
		{[]string{"browse", "--security-policy", "Basic256Sha256", "--security-mode", "SignAndEncrypt", "--trust", "x.der",
			"--accept-any-server-certificate", "opc.tcp://127.0.0.1:1"}, 2},
		{[]string{"browse", "-h"}, 0},
	} {
		var out, errb bytes.Buffer
		if got := dispatch(tc.args, &out, &errb); got != tc.code {
			t.Errorf("%v: exit %d, want %d (stderr %s)", tc.args, got, tc.code, errb.String())
		}
	}
}

// TestBrowseServerCertificate runs browse against gopcua's in-process
// server with a certificate made here: without --trust it prints the
// certificate's subject and thumbprints (computed here with crypto/sha1 and
// crypto/sha256) and saves it; with the saved file as --trust it lists the
// variables; with another certificate as --trust it is refused and again
// shows the thumbprints.
func TestBrowseServerCertificate(t *testing.T) {
	der, key, err := opcuasrc.SelfSigned("urn:exergywatch:test:browse-server", []string{"localhost"})
	if err != nil {
		t.Fatal(err)
	}
	srv := uatest.StartSecure(t, der, key, "PT101")
	srv.Set("PT101", 3.5, time.Now(), ua.StatusOK)
	s1, s256 := sha1.Sum(der), sha256.Sum256(der)
	thumbs := []string{strings.ToUpper(hex.EncodeToString(s1[:])), strings.ToUpper(hex.EncodeToString(s256[:]))}
	secure := []string{"browse", "--timeout", "20s", "--security-policy", "Basic256Sha256", "--security-mode", "SignAndEncrypt"}
	dir := t.TempDir()
	saved := filepath.Join(dir, "server.der")

	run := func(extra ...string) (int, string, string) {
		var out, errb bytes.Buffer
		code := dispatch(append(append(append([]string{}, secure...), extra...), srv.Endpoint()), &out, &errb)
		return code, out.String(), errb.String()
	}
	code, out, errs := run("--save-server-certificate", saved)
	if code != 1 || out != "" {
		t.Fatalf("without --trust: exit %d, stdout %q; want 1 and no listing", code, out)
	}
	for _, want := range append(thumbs, "exergywatch", "urn:exergywatch:test:browse-server", "not connected") {
		if !strings.Contains(errs, want) {
			t.Errorf("stderr lacks %q:\n%s", want, errs)
		}
	}
	got, err := os.ReadFile(saved)
	if err != nil || !bytes.Equal(got, der) {
		t.Fatalf("saved certificate: %v (equal %v)", err, bytes.Equal(got, der))
	}
	// Never overwrites a file.
	if _, _, errs := run("--save-server-certificate", saved); !strings.Contains(errs, "exists") {
		t.Errorf("second save did not refuse to overwrite:\n%s", errs)
	}

	code, out, errs = run("--trust", saved)
	if code != 0 || !strings.Contains(out, srv.NodeID("PT101")) || !strings.Contains(out, "3.5") {
		t.Fatalf("with --trust: exit %d\nstdout %s\nstderr %s", code, out, errs)
	}

	otherDER, _, err := opcuasrc.SelfSigned("urn:exergywatch:test:browse-server", []string{"localhost"})
	if err != nil {
		t.Fatal(err)
	}
	other := filepath.Join(dir, "other.der")
	if err := os.WriteFile(other, otherDER, 0o600); err != nil {
		t.Fatal(err)
	}
	code, out, errs = run("--trust", other)
	if code != 1 || out != "" || !strings.Contains(errs, "refused") || !strings.Contains(errs, thumbs[0]) || !strings.Contains(errs, thumbs[1]) {
		t.Fatalf("untrusted: exit %d\nstdout %s\nstderr %s", code, out, errs)
	}

	code, out, errs = run("--accept-any-server-certificate")
	if code != 0 || !strings.Contains(out, srv.NodeID("PT101")) || !strings.Contains(errs, "not checked") {
		t.Fatalf("accept any: exit %d\nstdout %s\nstderr %s", code, out, errs)
	}
}
