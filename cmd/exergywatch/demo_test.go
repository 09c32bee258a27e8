package main

// Tests of `exergywatch demo`: the command itself (a short smoke run and
// --print-config through `exergywatch check`), and the demo scenario with
// its own building blocks (embedded NATS, the plant simulator, publishPlant,
// the demo configuration, runDaemon, the console summary) compressed in
// time: what takes four minutes in the demo takes under 30 s here.

import (
	"bytes"
	"context"
	"math"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"github.com/exergywatch/exergywatch/cmd/exergywatch/internal/plantsim"
	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/config"
)

// TestDemoPrintConfigPassesCheck: the configuration the demo prints is
// one `exergywatch check` accepts as it is.
func TestDemoPrintConfigPassesCheck(t *testing.T) {
	t.Parallel()
	var out, errb bytes.Buffer
	if code := dispatch([]string{"demo", "--print-config"}, &out, &errb); code != 0 {
		t.Fatalf("demo --print-config: exit %d: %s", code, errb.String())
	}
	if !bytes.Equal(out.Bytes(), demoConfig) {
		t.Error("--print-config does not print the embedded demo configuration")
	}
	path := filepath.Join(t.TempDir(), "demo.yaml")
	if err := os.WriteFile(path, out.Bytes(), 0o600); err != nil {
		t.Fatal(err)
	}
	out.Reset()
	errb.Reset()
	if code := dispatch([]string{"check", "-c", path}, &out, &errb); code != 0 {
		t.Fatalf("check on the printed demo configuration: exit %d: %s", code, errb.String())
	}
	// 6 machines and 34 tags: demo.yaml and plantsim/designs.go.
	if want := "configuration is valid: site quillmoor, 6 machines, 34 tags, 1 sources, 1 sinks"; !strings.Contains(out.String(), want) {
		t.Errorf("check output %q lacks %q", out.String(), want)
	}
	// And check does refuse a broken copy (the check can fail).
	if err := os.WriteFile(path, append(out.Bytes(), []byte("\nmachnes: []\n")...), 0o600); err != nil {
		t.Fatal(err)
	}
	if code := dispatch([]string{"check", "-c", path}, &out, &errb); code != 2 {
		t.Errorf("check on a broken file: exit %d, want 2", code)
	}
}

// TestDemoCommandSmoke runs the real command for 3 s: banner with the
// advisory note, the status API address, a console table with every
// machine, a clean stop, and the embedded store kept in --data-dir.
func TestDemoCommandSmoke(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	var out, errb syncBuffer
	code := dispatch([]string{"demo", "--duration", "3s", "--print-every", "1s", "--status", "127.0.0.1:0", "--data-dir", dir}, &out, &errb)
	if code != 0 {
		t.Fatalf("demo exit %d\nstdout:\n%s\nstderr:\n%s", code, out.String(), errb.String())
	}
	o := out.String()
	for _, want := range append([]string{"Quillmoor demonstration works", "not a protection or trip system",
		"Status API: http://127.0.0.1:", "eta_s %", "demo stopped; everything written was flushed"}, demoMachines...) {
		if !strings.Contains(o, want) {
			t.Errorf("demo output lacks %q:\n%s", want, o)
		}
	}
	stored, _ := readStore(t, filepath.Join(dir, "history.db"))
	for _, m := range demoMachines {
		if len(stored[m]) == 0 {
			t.Errorf("no record of %s in the demo's store", m)
		}
	}
}

// compressedDemo is the demo scenario in fast motion (elapsed time from
// the simulator's start): fouling of the air compressor from 4 s at 30
// points of efficiency per minute (the simulator's rate 0.3, capped at 6
// points; the HP turbine loses a tenth of that), the gas compressor's
// discharge thermocouple stuck from 5 s for 6 s, the load down to 75 %
// from 20 s over a 5 s ramp and back from 32 s.
func compressedDemo(start time.Time) plantsim.Options {
	o := plantsim.DemoOptions(start)
	o.DegradeAfter, o.DegradeRate, o.DegradeMax = 4*time.Second, 0.3, 0.06
	o.StuckSensorAfter, o.StuckFor = 5*time.Second, 6*time.Second
	o.LoadChangeAfter, o.LoadRestoreAfter, o.LoadRamp = 20*time.Second, 32*time.Second, 5*time.Second
	return o
}

// demoInterval is the evaluation interval and window of the compressed
// demo: a quarter of demo.yaml's 2 s, with five samples per window (the
// simulator publishes every 100 ms), so that a late sample on a busy test
// machine does not make the R-statistic see a held value as a change.
const demoInterval = 500 * time.Millisecond

// TestDemoScenarioCompressed runs the demo's parts on the compressed
// scenario: startEmbeddedNATS, plantsim, publishPlant, the demo
// configuration with its times divided by four to ten (evaluation 500 ms,
// start-up 1 s, dwell 1 s, warm-up 5 samples, alert hold 2 s, stuck period
// 2 s), runDaemon, printSummary; about 38 s.
//
//   - During the load ramp (after at most 3 evaluations, "within a few
//     samples") no record of any machine is good or uncertain; figures are
//     published with quality transient; no machine is reported as stopped.
//   - Every figure published as good or uncertain agrees with the
//     simulator's true isentropic efficiency within its U95 plus 0.5 points
//     (judgement: the window average and the sensor noise; no source).
//   - The fouling of the air compressor raises exactly one performance
//     alert, which explains itself (machine, figure, value, limit, advice);
//     the stuck thermocouple raises a data-quality alert, a separate class.
//   - The console shows the alert and the deviation from the baseline.
func TestDemoScenarioCompressed(t *testing.T) {
	t.Parallel()
	ns, err := startEmbeddedNATS("")
	if err != nil {
		t.Fatal(err)
	}
	defer func() { ns.Shutdown(); ns.WaitForShutdown() }()
	dir := t.TempDir()
	tr := fastTree(t, ns.ClientURL(), dir)
	tr.set(t, "evaluation.interval", demoInterval.String())
	tr.set(t, "alignment.window", demoInterval.String())
	for _, m := range tr.list(t, "machines") {
		m.(map[string]any)["startup_time"] = "1s"
		m.(map[string]any)["steady"] = map[string]any{"dwell": "1s", "warmup_samples": 5}
	}
	for _, id := range []string{"hp-turbine", "air-compressor", "gas-compressor"} {
		for _, a := range tr.machine(t, id)["alerts"].([]any) {
			a.(map[string]any)["pending_for"], a.(map[string]any)["clear_for"] = "2s", "2s"
		}
	}
	tr.tag(t, "QM.GC1.TT502")["checks"].(map[string]any)["stuck_period"] = "2s"
	cfgPath := tr.write(t, dir, "demo-fast.yaml")

	start := time.Now().UTC()
	opts := compressedDemo(start)
	plant := newPlant(t, opts)
	nc, err := nats.Connect(ns.ClientURL())
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	ctx, cancel := context.WithCancel(context.Background())
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		_ = publishPlant(ctx, nc, plant, "quillmoor.tags", 100*time.Millisecond, testLog(t))
	}()
	defer func() { cancel(); wg.Wait() }()

	d := startDaemon(t, cfgPath, nil, pipelineOptions{})
	end := start.Add(38 * time.Second)
	time.Sleep(time.Until(end))
	var console bytes.Buffer
	printSummary(&console, d.st.cur.Load().status(), time.Since(start), plant.Load(time.Since(start)), "EUR", nil)
	if err := d.stop(); err != nil {
		t.Fatal(err)
	}
	recs, evs := d.snapshot()

	// 1. The load change is transient, never good.
	const grace = 3 // evaluations
	rampStart, rampEnd := start.Add(opts.LoadChangeAfter), start.Add(opts.LoadChangeAfter+opts.LoadRamp)
	transient := map[string]int{}
	firstTransient := map[string]time.Time{}
	for _, r := range recs {
		if r.Time.Before(rampStart) || r.Time.After(rampEnd) {
			continue
		}
		if r.Quality == compute.QualityTransient {
			transient[r.Machine]++
			if _, ok := firstTransient[r.Machine]; !ok {
				firstTransient[r.Machine] = r.Time
			}
			if !usable(r) {
				t.Errorf("%s: transient record without figures (transient: mark publishes them)", describeRecord(r))
			}
		}
		// The machines keep running through a load change.
		for _, why := range r.Reasons {
			if why == reasonNotRunning || why == reasonStarting {
				t.Errorf("%s: the load ramp is reported as a stop", describeRecord(r))
			}
		}
		if r.Time.Before(rampStart.Add(grace*demoInterval)) || r.Quality == compute.QualityBad {
			continue
		}
		if r.Quality == compute.QualityGood || r.Quality == compute.QualityUncertain {
			t.Errorf("%s: published as %s during the load ramp", describeRecord(r), r.Quality)
		}
		for _, fg := range r.Figures {
			if fg.Quality == compute.QualityGood || fg.Quality == compute.QualityUncertain {
				t.Errorf("%s: figure %s %s during the load ramp", describeRecord(r), fg.Name, fg.Quality)
				break
			}
		}
	}
	for _, m := range demoMachines {
		if transient[m] < 7 {
			t.Errorf("%s: %d transient records during the 5 s ramp, want most of its 10", m, transient[m])
		}
		t.Logf("%s: ramp seen as transient %v after it began; %d transient records", m, firstTransient[m].Sub(rampStart), transient[m])
	}

	// 2. No garbage published as good, and an honest U95: a good or
	// uncertain efficiency whose inputs raised no doubt lies within its U95
	// of the simulator's truth in at least 90 % of the ticks of each
	// machine... loosely: at most 30 % outside (U95 promises about 5 %; a
	// few dozen samples per machine cannot tell 5 % from 15 %, so this only
	// catches a grossly understated U95; judgement, no source), and never
	// beyond twice its U95 plus 0.005 (judgement: window average and sensor
	// noise).
	checked, outside := map[string]int{}, map[string]int{}
	for _, r := range recs {
		if strings.Contains(strings.Join(r.Reasons, " "), "input:") {
			continue // a flagged input (stuck, spike): the figure says it is in doubt
		}
		for _, fg := range r.Figures {
			if fg.Name != "isentropic_efficiency" || (fg.Quality != compute.QualityGood && fg.Quality != compute.QualityUncertain) {
				continue
			}
			truth, ok := plant.TrueEfficiency(r.Machine, r.Time.Add(-demoInterval/2).Sub(start))
			if !ok {
				t.Fatalf("no true efficiency for %s", r.Machine)
			}
			checked[r.Machine]++
			err := math.Abs(fg.Value - truth)
			if err > fg.U95 {
				outside[r.Machine]++
			}
			if err > 2*fg.U95+0.005 {
				t.Errorf("%s: isentropic efficiency %.4f ± %.4f published as %s, true %.4f", describeRecord(r), fg.Value, fg.U95, fg.Quality, truth)
			}
		}
	}
	all := 0
	for _, m := range demoMachines {
		all += checked[m]
		t.Logf("%s: %d of %d efficiencies outside U95", m, outside[m], checked[m])
		if checked[m] < 10 {
			continue // too few steady ticks on a busy machine to judge
		}
		if share := float64(outside[m]) / float64(checked[m]); share > 0.30 {
			t.Errorf("%s: %d of %d good/uncertain efficiencies (%.0f %%) lie outside their U95 around the true value", m, outside[m], checked[m], 100*share)
		}
	}
	if all < 60 {
		t.Errorf("only %d good or uncertain efficiencies in the run; the check proves little", all)
	}

	// 3. Exactly one performance alert, from the fouling; it explains itself.
	var perf, dq []compute.Event
	for _, e := range evs {
		if e.To != compute.AlertFiring {
			continue
		}
		if e.Class == compute.AlertPerformance {
			perf = append(perf, e)
		} else {
			dq = append(dq, e)
		}
	}
	if len(perf) != 1 {
		t.Fatalf("%d performance alerts fired, want exactly 1: %+v", len(perf), perf)
	}
	a := perf[0]
	if a.Machine != "air-compressor" || a.Rule != "efficiency-drop" || a.Figure != "isentropic_efficiency" || !(a.Value < a.Limit) || a.U95 <= 0 {
		t.Errorf("the alert is not the fouling alert: %+v", a)
	}
	for _, want := range []string{"air-compressor", "isentropic_efficiency", "fouling", "Advisory"} {
		if !strings.Contains(a.Reason, want) {
			t.Errorf("alert reason %q lacks %q", a.Reason, want)
		}
	}
	if a.Time.Before(start.Add(opts.DegradeAfter)) {
		t.Errorf("alert at %v, before the fouling began", a.Time.Sub(start))
	}
	t.Logf("alert after %v: %s", a.Time.Sub(start).Round(100*time.Millisecond), a.Reason)
	if len(dq) == 0 || dq[0].Machine != "gas-compressor" || dq[0].Class != compute.AlertDataQuality {
		t.Errorf("the stuck thermocouple raised no data-quality alert on the gas compressor: %+v", dq)
	}

	// 4. The console makes it obvious.
	c := console.String()
	if !strings.Contains(c, "ALERT firing  air-compressor efficiency-drop (performance)") {
		t.Errorf("console lacks the firing alert:\n%s", c)
	}
	for _, line := range strings.Split(c, "\n") {
		if strings.HasPrefix(line, "air-compressor") && !strings.Contains(line, " -") {
			t.Errorf("console line of the air compressor shows no negative deviation: %q", line)
		}
	}
	t.Logf("console at the end:\n%s", c)
	_ = config.LostWorkCostFigure
}
