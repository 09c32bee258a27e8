package vmtest

import (
	"net/http"
	"strings"
	"testing"
	"time"
)

// The helper starts a real server, which keeps what it acknowledged across
// a stop and a restart on the same port and data directory.
func TestStartStopRestart(t *testing.T) {
	s := StartServer(t)
	start := time.Now()
	post := func(body string) {
		t.Helper()
		resp, err := http.Post(s.URL+"/api/v2/write?precision=ms", "text/plain", strings.NewReader(body))
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != http.StatusNoContent {
			t.Fatalf("write: status %d", resp.StatusCode)
		}
	}
	post("vmtest_probe,site=a v=1.5 1764633600000\n")
	s.Stop()
	s.Stop() // idempotent
	s.Restart()
	t.Logf("stop and restart took %v", time.Since(start))
	post("vmtest_probe,site=a v=2.5 1764633601000\n")
	s.ForceFlush(t)
	got := s.Export(t, `{__name__="vmtest_probe_v"}`)
	if len(got) != 1 || got[0].Metric["site"] != "a" || len(got[0].Values) != 2 ||
		got[0].Values[0] != 1.5 || got[0].Values[1] != 2.5 || got[0].Timestamps[0] != 1764633600000 || got[0].Timestamps[1] != 1764633601000 {
		t.Errorf("export after restart: %v", got)
	}
}

func TestBinaryEnv(t *testing.T) {
	t.Setenv("VICTORIA_METRICS_BIN", "/nonexistent/victoria-metrics")
	if b := Binary(); b != "" {
		t.Errorf("Binary() = %q for a missing file, want \"\"", b)
	}
}
