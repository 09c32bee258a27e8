package main

import (
	"bytes"
	"math"
	"sort"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"github.com/exergywatch/exergywatch/cmd/exergywatch/internal/plantsim"
	"github.com/exergywatch/exergywatch/config"
	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/payload"
	"github.com/exergywatch/exergywatch/thermo/fluids"
)

// simulate against a real embedded NATS server: a subscriber on the prefix
// receives every tag of every machine of two plant copies, in the payload
// format the daemon decodes, on <prefix>.<machine>.
func TestSimulatePublishesEveryTag(t *testing.T) {
	ns, err := startEmbeddedNATS("")
	if err != nil {
		t.Fatal(err)
	}
	defer ns.Shutdown()
	nc, err := nats.Connect(ns.ClientURL())
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	var mu sync.Mutex
	seen := map[string]string{} // tag -> subject
	var decodeErrs []string
	dec := payload.NewDecoder(payload.Auto)
	sub, err := nc.Subscribe("load.test.>", func(m *nats.Msg) {
		mu.Lock()
		defer mu.Unlock()
		var errs []payload.Error
		var ss []ingest.Sample
		ss, errs = dec.Decode(m.Data, time.Now(), ss, errs)
		for _, e := range errs {
			decodeErrs = append(decodeErrs, e.Error())
		}
		for _, s := range ss {
			if s.SourceTime.IsZero() {
				decodeErrs = append(decodeErrs, "no source time for "+s.Tag)
			}
			seen[s.Tag] = m.Subject
		}
	})
	if err != nil {
		t.Fatal(err)
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	var out, errb bytes.Buffer
	code := dispatch([]string{"simulate", "--nats", ns.ClientURL(), "--rate", "200ms", "--copies", "2", "--duration", "1500ms",
		"--prefix", "load.test", "--scenario", "steady"}, &out, &errb)
	if code != 0 {
		t.Fatalf("exit %d\n%s\n%s", code, out.String(), errb.String())
	}
	_ = sub.Unsubscribe()
	t.Log(out.String())
	if !strings.Contains(out.String(), "12 machines, 68 tags") || !strings.Contains(out.String(), "msg/s") {
		t.Errorf("banner or per-second line missing:\n%s", out.String())
	}
	plant, err := plantsim.New(plantsim.Options{Copies: 2}, fluids.New)
	if err != nil {
		t.Fatal(err)
	}
	mu.Lock()
	defer mu.Unlock()
	if len(decodeErrs) > 0 {
		t.Errorf("decode errors: %v", decodeErrs[:min(5, len(decodeErrs))])
	}
	for _, tg := range plant.Tags() {
		subj, ok := seen[tg.Name]
		if !ok {
			t.Errorf("tag %s never received", tg.Name)
			continue
		}
		if subj != "load.test."+tg.Machine {
			t.Errorf("tag %s on subject %s, want load.test.%s", tg.Name, subj, tg.Machine)
		}
	}
	if len(seen) != 68 { // 2 copies x 34 tags (plantsim designs)
		t.Errorf("%d distinct tags received, want 68", len(seen))
	}
}

func TestSimulateErrors(t *testing.T) {
	for _, tc := range []struct {
		name string
		args []string
		code int
		msg  string
	}{
		{"no url", []string{}, 2, "--nats URL is required"},
		{"http url", []string{"--nats", "http://127.0.0.1:4222"}, 2, `scheme "http"`},
		{"bad port", []string{"--nats", "nats://127.0.0.1:99999"}, 2, "out of range"},
		{"no host", []string{"--nats", "nats://:4222"}, 2, "no host"},
		{"nobody listening", []string{"--nats", "nats://127.0.0.1:1"}, 1, "cannot connect to NATS at nats://127.0.0.1:1"},
		{"bad rate", []string{"--nats", "nats://127.0.0.1:1", "--rate", "0s"}, 2, "--rate"},
		{"bad copies", []string{"--nats", "nats://127.0.0.1:1", "--copies", "0"}, 2, "--copies"},
		{"bad prefix", []string{"--nats", "nats://127.0.0.1:1", "--prefix", "a.>"}, 2, "--prefix"},
		{"bad scenario", []string{"--nats", "nats://127.0.0.1:1", "--scenario", "chaos"}, 2, "--scenario"},
		{"out without duration", []string{"--out", "x.csv"}, 2, "--out needs --duration"},
		{"stray argument", []string{"--nats", "nats://127.0.0.1:1", "extra"}, 2, "unexpected argument"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var out, errb bytes.Buffer
			code := dispatch(append([]string{"simulate"}, tc.args...), &out, &errb)
			msg := errb.String()
			if code != tc.code || !strings.Contains(msg, tc.msg) {
				t.Fatalf("exit %d (want %d), stderr %q (want %q)", code, tc.code, msg, tc.msg)
			}
			if n := strings.Count(strings.TrimSpace(msg), "\n"); n != 0 {
				t.Errorf("error is %d lines, want one: %q", n+1, msg)
			}
		})
	}
}

// --print-config: a configuration the daemon accepts (config.Parse, the
// loader of `run`), with exactly the simulator's tags and machines for N
// copies, the NATS URL and subject given, and the demo's time settings
// scaled to the rate.
func TestSimulatePrintConfig(t *testing.T) {
	for _, tc := range []struct {
		copies   int
		rate, iv string
		wantIv   time.Duration
		wantDw   string
	}{
		{1, "1s", "", 2 * time.Second, "dwell: 6s"},
		{3, "1m", "1m", time.Minute, "dwell: 6m0s"},
	} {
		args := []string{"simulate", "--print-config", "--copies", string(rune('0' + tc.copies)), "--rate", tc.rate, "--prefix", "site.x", "--nats", "nats://10.0.0.5:4222"}
		if tc.iv != "" {
			args = append(args, "--interval", tc.iv)
		}
		var out, errb bytes.Buffer
		if code := dispatch(args, &out, &errb); code != 0 {
			t.Fatalf("exit %d: %s", code, errb.String())
		}
		cfg, err := config.Parse("printed.yaml", out.Bytes())
		if err != nil {
			t.Fatalf("copies %d: printed configuration does not load: %v\n%s", tc.copies, err, out.String())
		}
		plant, err := plantsim.New(plantsim.Options{Copies: tc.copies}, fluids.New)
		if err != nil {
			t.Fatal(err)
		}
		var simTags, cfgTags []string
		for _, tg := range plant.Tags() {
			simTags = append(simTags, tg.Name+"@"+tg.Machine)
		}
		for _, tg := range cfg.TagMap.Tags {
			cfgTags = append(cfgTags, tg.Tag+"@"+tg.Machine)
		}
		sort.Strings(simTags)
		sort.Strings(cfgTags)
		if strings.Join(simTags, " ") != strings.Join(cfgTags, " ") {
			t.Errorf("copies %d: tag map differs from the simulator's tags:\nconfig %v\nsim    %v", tc.copies, cfgTags, simTags)
		}
		if len(cfg.Machines) != 6*tc.copies || len(plant.Machines()) != 6*tc.copies {
			t.Errorf("copies %d: %d machines in config, %d simulated", tc.copies, len(cfg.Machines), len(plant.Machines()))
		}
		if got := cfg.Evaluation.Interval.D(); got != tc.wantIv {
			t.Errorf("copies %d: interval %v, want %v", tc.copies, got, tc.wantIv)
		}
		if cfg.Alignment.Window != tc.wantIv {
			t.Errorf("copies %d: window %v, want %v", tc.copies, cfg.Alignment.Window, tc.wantIv)
		}
		if !strings.Contains(out.String(), tc.wantDw) {
			t.Errorf("copies %d: steady dwell not scaled (want %q)", tc.copies, tc.wantDw)
		}
		n := cfg.Sources[0].NATS
		if len(n.URLs) != 1 || n.URLs[0] != "nats://10.0.0.5:4222" || len(n.Subjects) != 1 || n.Subjects[0] != "site.x.>" {
			t.Errorf("copies %d: source %v %v", tc.copies, n.URLs, n.Subjects)
		}
	}
}

// --out writes what replay reads: CSV and line protocol runs give the same
// rows (tag, time, quality), values equal within 10 noise standard
// deviations (plantsim's noise order is not reproducible between runs, see
// TestReplayTestdataIsTheSimulatorsOutput).
func TestSimulateOutFormats(t *testing.T) {
	dir := t.TempDir()
	for _, name := range []string{"a.csv", "a.lp"} {
		var out, errb bytes.Buffer
		code := dispatch([]string{"simulate", "--out", dir + "/" + name, "--duration", "10s", "--rate", "1s", "--start", "2026-06-01T00:00:00Z", "--scenario", "steady"}, &out, &errb)
		if code != 0 || !strings.Contains(out.String(), "wrote 374 readings") { // 11 steps x 34 tags
			t.Fatalf("%s: exit %d, %s %s", name, code, out.String(), errb.String())
		}
	}
	read := func(name string) []ingest.Sample {
		var rej rejects
		fs, err := openInputs([]string{dir + "/" + name}, "auto", time.Nanosecond, &rej)
		if err != nil {
			t.Fatal(err)
		}
		defer fs.Close()
		var ss []ingest.Sample
		for {
			s, ok, err := fs.next()
			if err != nil {
				t.Fatal(err)
			}
			if !ok {
				break
			}
			ss = append(ss, s)
		}
		if rej.Total != 0 {
			t.Fatalf("%s: %d rows rejected: %v", name, rej.Total, rej.First)
		}
		return ss
	}
	a, b := read("a.csv"), read("a.lp")
	if len(a) != 374 || len(b) != 374 {
		t.Fatalf("%d and %d samples, want 374", len(a), len(b))
	}
	key := func(s ingest.Sample) string { return s.Tag + s.SourceTime.String() }
	bm := map[string]ingest.Sample{}
	for _, s := range b {
		bm[key(s)] = s
	}
	plant, err := plantsim.New(plantsim.Options{}, fluids.New)
	if err != nil {
		t.Fatal(err)
	}
	noise := map[string]float64{}
	for _, tg := range plant.Tags() {
		noise[tg.Name] = tg.Noise
	}
	for i, s := range a {
		o, ok := bm[key(s)]
		if !ok || math.Abs(o.Value-s.Value) > 10*noise[s.Tag] || o.Quality != s.Quality {
			t.Fatalf("sample %d %+v: line protocol has %+v", i, s, o)
		}
		if i > 0 && s.SourceTime.Before(a[i-1].SourceTime) {
			t.Fatalf("samples out of time order at %d", i)
		}
	}
}
