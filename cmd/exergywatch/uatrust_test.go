package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/ingest/opcuasrc"
	"github.com/exergywatch/exergywatch/ingest/opcuasrc/uatest"
)

// The daemon publishes every OPC UA source's server-certificate checks on
// /metrics: two sources whose servers (gopcua's in-process server with
// certificates made here) are not on the trust list are each refused, and
// each endpoint has its own refusal counter.
func TestDaemonReportsUntrustedOPCUAServers(t *testing.T) {
	dir := t.TempDir()
	other, _, err := opcuasrc.SelfSigned("urn:exergywatch:test:someone-else", []string{"localhost"})
	if err != nil {
		t.Fatal(err)
	}
	trusted := filepath.Join(dir, "trusted.der")
	if err := os.WriteFile(trusted, other, 0o600); err != nil {
		t.Fatal(err)
	}
	tr := fastTree(t, "nats://127.0.0.1:1", dir)
	tags := tr["tag_map"].(map[string]any)["tags"].([]any)
	var sources []any
	var endpoints []string
	for i, name := range []string{"ua-a", "ua-b"} {
		tag := tags[i].(map[string]any)["tag"].(string)
		der, key, err := opcuasrc.SelfSigned("urn:exergywatch:test:"+name, []string{"localhost"})
		if err != nil {
			t.Fatal(err)
		}
		srv := uatest.StartSecure(t, der, key, "PT10"+string(rune('1'+i)))
		endpoints = append(endpoints, srv.Endpoint())
		sources = append(sources, map[string]any{"name": name, "kind": "opcua", "opcua": map[string]any{
			"endpoint": srv.Endpoint(), "security_policy": "Basic256Sha256", "security_mode": "SignAndEncrypt",
			"trusted_server_certificates": []any{trusted}, "reconnect_wait": "200ms",
			"items": []any{map[string]any{"node_id": srv.NodeID("PT10" + string(rune('1'+i))), "tag": tag}},
		}})
	}
	tr["sources"] = sources
	d := startDaemon(t, tr.write(t, dir, "exergywatch.yaml"), nil, pipelineOptions{})
	defer d.stop()
	defer func() {
		// /status names each source's last refusal with the thumbprints.
		st := d.statusJSON()
		if len(st.Sources) != 2 {
			t.Fatalf("/status sources %+v, want 2", st.Sources)
		}
		for _, sv := range st.Sources {
			if sv.Kind != "opcua" || sv.Trust == nil || sv.Trust.Refusals < 1 || !strings.Contains(sv.LastRefusal, "SHA-256") {
				t.Errorf("/status source %+v: want an OPC UA source with a counted refusal and its thumbprint", sv)
			}
		}
	}()
	const family = "exergywatch_opcua_untrusted_server_refusals_total"
	waitFor(t, 30*time.Second, "a refusal counted for both OPC UA endpoints", func() bool {
		n := 0
		for k, v := range d.metrics() {
			if metricName(k) != family || v < 1 {
				continue
			}
			for _, ep := range endpoints {
				if strings.Contains(k, `"`+ep+`"`) {
					n++
				}
			}
		}
		return n == len(endpoints)
	}, func() string {
		var lines []string
		for k, v := range d.metrics() {
			if strings.HasPrefix(k, "exergywatch_opcua") {
				lines = append(lines, fmt.Sprint(k, " ", v))
			}
		}
		return strings.Join(lines, "\n")
	})
}
