package main

// `exergywatch check` promises that a file it accepts is one `exergywatch
// run` can start (short of unreachable servers and missing secrets). Each
// case below is a source setting that the source's own constructor refuses;
// check must refuse it too, or the operator learns about it only when the
// daemon fails to start (or, on a reload, when the old configuration is
// started again).

import (
	"path/filepath"
	"testing"

	"github.com/exergywatch/exergywatch/config"
)

func TestCheckRefusesWhatRunRefuses(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name string
		edit func(src map[string]any)
	}{
		{"nats mode typo", func(s map[string]any) { s["nats"].(map[string]any)["mode"] = "jetsream" }},
		{"nats jetstream without stream", func(s map[string]any) { s["nats"].(map[string]any)["mode"] = "jetstream" }},
		{"nats format typo", func(s map[string]any) { s["nats"].(map[string]any)["format"] = "jsn" }},
		{"nats ack policy typo", func(s map[string]any) { s["nats"].(map[string]any)["ack_policy"] = "some" }},
		{"opcua policy typo", func(s map[string]any) {
			delete(s, "nats")
			s["kind"] = "opcua"
			s["opcua"] = map[string]any{"endpoint": "opc.tcp://127.0.0.1:4840", "security_policy": "Basic256Sha265", "security_mode": "SignAndEncrypt"}
		}},
		{"opcua username without user", func(s map[string]any) {
			delete(s, "nats")
			s["kind"] = "opcua"
			s["opcua"] = map[string]any{"endpoint": "opc.tcp://127.0.0.1:4840", "auth": "username"}
		}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			tr := fastTree(t, "nats://127.0.0.1:1", dir)
			c.edit(tr.list(t, "sources")[0].(map[string]any))
			b := marshalTree(t, tr)
			path := filepath.Join(dir, "exergywatch.yaml")
			writeFile(t, path, b)
			cfg, loadErr := config.Load(path)
			if loadErr != nil {
				return // check refuses it: consistent
			}
			p, buildErr := buildPipeline(cfg, pipelineOptions{log: testLog(t)})
			if buildErr == nil {
				_ = p.close()
				t.Skip("both accept it; nothing to compare")
			}
			t.Errorf("`exergywatch check` accepts a source that `exergywatch run` refuses: %v", buildErr)
		})
	}
}
