package main

// End-to-end tests of `exergywatch run`: the daemon in-process (runDaemon or
// cmdRun through dispatch) on a temporary configuration file, fed by the
// plant simulator over a real embedded NATS server that the test starts,
// writing to a real VictoriaMetrics (InfluxDB v2 write API), the embedded
// store and NATS. Times are scaled down: a 200 ms evaluation interval
// stands for the usual seconds, so a 25 s outage is 125 evaluations per
// machine.

import (
	"encoding/json"
	"io"
	"log/slog"
	"math"
	"net"
	"net/http"
	"os"
	"os/signal"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"go.uber.org/goleak"

	"github.com/exergywatch/exergywatch/cmd/exergywatch/internal/plantsim"
	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/config"
	"github.com/exergywatch/exergywatch/sinks"
	"github.com/exergywatch/exergywatch/sinks/vmtest"
)

// derivedByKind lists the series the issue asks for (isentropic and
// polytropic efficiency, entropy generation rate, lost work rate,
// second-law efficiency, power; each with U95 and quality) plus the cost
// of lost work, per machine kind: a pump has no polytropic figures
// (compute/machine/figures.go).
var derivedByKind = map[string][]string{
	"turbine":    {"isentropic_efficiency", "polytropic_efficiency", "entropy_generation_rate_w_per_k", "lost_work_rate_w", "second_law_efficiency", "power_w", config.LostWorkCostFigure},
	"compressor": {"isentropic_efficiency", "polytropic_efficiency", "entropy_generation_rate_w_per_k", "lost_work_rate_w", "second_law_efficiency", "power_w", config.LostWorkCostFigure},
	"pump":       {"isentropic_efficiency", "entropy_generation_rate_w_per_k", "lost_work_rate_w", "second_law_efficiency", "power_w", config.LostWorkCostFigure},
}

// TestRunToVictoriaMetrics (a): the daemon reads the simulated plant from an
// external NATS server and writes every derived figure to a real
// VictoriaMetrics through the InfluxDB sink and to the embedded store. The
// store is the reference: every record in it appears in VictoriaMetrics
// with site, machine, kind and quality labels, every figure value equal,
// and a Bad figure present only as its quality code (3), never as a value.
// The gas compressor's efficiency U95 limit is set to 0.1 % so that its
// efficiencies are always Bad (uncertainty_above_limit) while its other
// figures are published.
func TestRunToVictoriaMetrics(t *testing.T) {
	t.Parallel()
	vm := vmtest.StartServer(t)
	ns := startNATS(t, false)
	defer stopNATS(ns)
	dir := t.TempDir()
	tr := fastTree(t, ns.ClientURL(), dir)
	tr.addSink(influxSink(vm.URL, filepath.Join(dir, "spool")))
	tr.machine(t, "gas-compressor")["efficiency_u95_limit"] = "0.1%"
	cfgPath := tr.write(t, dir, "exergywatch.yaml")

	f := startFeeder(t, ns.ClientURL(), steadyPlant(t), 100*time.Millisecond, nil)
	defer f.stop()
	d := startDaemon(t, cfgPath, nil, pipelineOptions{})
	d.waitEveryMachine(40*time.Second, 15)
	if err := d.stop(); err != nil {
		t.Fatalf("daemon stopped with %v", err)
	}
	if n := len(d.st.cur.Load().multi.Stats()); n != 2 {
		t.Fatalf("%d sinks, want 2", n)
	}
	for _, s := range d.st.cur.Load().multi.Stats() {
		if s.Dropped != 0 || s.Rejected != 0 || s.SpooledItems != 0 || s.Queued != 0 {
			t.Errorf("sink %s: %+v: want nothing dropped, rejected, spooled or queued after stop", s.Name, s)
		}
	}

	seen, _ := d.snapshot()
	stored, _ := readStore(t, filepath.Join(dir, "history.db"))
	var total int
	for _, rs := range stored {
		total += len(rs)
	}
	ix := indexVM(exportSettled(t, vm, `{__name__=~"exw_.*"}`, total))

	// The store holds exactly the records the pipeline produced.
	perMachine := map[string]int{}
	for _, r := range seen {
		perMachine[r.Machine]++
	}
	for _, m := range demoMachines {
		if len(stored[m]) != perMachine[m] {
			t.Errorf("%s: store has %d records, the pipeline produced %d", m, len(stored[m]), perMachine[m])
		}
	}

	// Every stored record is in VictoriaMetrics, figure by figure.
	present := map[string]map[string]bool{} // machine -> series with a value
	badFigures := 0
	mismatch := 0
	fail := func(format string, args ...any) {
		if mismatch++; mismatch <= 15 {
			t.Errorf(format, args...)
		}
	}
	for m, rs := range stored {
		present[m] = map[string]bool{}
		for _, r := range rs {
			ms := msOf(r.Time)
			s, n := ix.one("exw_machine_quality_code", m, ms)
			if n != 1 {
				fail("%s: %d exw_machine_quality_code points, want 1", describeRecord(r), n)
				continue
			}
			want := map[string]string{"site": "quillmoor", "machine": m, "kind": r.MachineKind, "quality": r.Quality.String()}
			for k, v := range want {
				if s.labels[k] != v {
					fail("%s: label %s=%q, want %q", describeRecord(r), k, s.labels[k], v)
				}
			}
			if s.v != float64(r.Quality) {
				fail("%s: quality_code %v, want %d", describeRecord(r), s.v, r.Quality)
			}
			for _, fg := range r.Figures {
				base := "exw_machine_" + fg.Name
				qc, n := ix.one(base+"_quality_code", m, ms)
				if n != 1 || qc.v != float64(fg.Quality) {
					fail("%s: %s_quality_code = %v (%d points), want %d", describeRecord(r), base, qc.v, n, fg.Quality)
				}
				v, nv := ix.one(base, m, ms)
				if fg.Quality == compute.QualityBad {
					badFigures++
					if nv != 0 {
						fail("%s: Bad figure %s has a value %v in VictoriaMetrics", describeRecord(r), fg.Name, v.v)
					}
					if _, nu := ix.one(base+"_u95", m, ms); nu != 0 {
						fail("%s: Bad figure %s has a U95 in VictoriaMetrics", describeRecord(r), fg.Name)
					}
					continue
				}
				if nv != 1 || !sameFloat(v.v, fg.Value) {
					fail("%s: %s = %v (%d points), want %v", describeRecord(r), base, v.v, nv, fg.Value)
					continue
				}
				present[m][fg.Name] = true
				if fg.HasU95 {
					u, nu := ix.one(base+"_u95", m, ms)
					if nu != 1 || !sameFloat(u.v, fg.U95) {
						fail("%s: %s_u95 = %v (%d points), want %v", describeRecord(r), base, u.v, nu, fg.U95)
					} else {
						present[m][fg.Name+"_u95"] = true
					}
				}
			}
		}
	}
	// Nothing in VictoriaMetrics that the store does not have, never NaN.
	storedAt := map[string]map[int64]bool{}
	for m, rs := range stored {
		storedAt[m] = map[int64]bool{}
		for _, r := range rs {
			storedAt[m][msOf(r.Time)] = true
		}
	}
	for name, byM := range ix {
		if !strings.HasPrefix(name, "exw_machine") && !strings.HasPrefix(name, "exw_reason") {
			continue
		}
		for m, byT := range byM {
			for ms, ss := range byT {
				if !storedAt[m][ms] {
					fail("VictoriaMetrics has %s{machine=%q} at %d ms, the store has no such record", name, m, ms)
				}
				for _, s := range ss {
					if math.IsNaN(s.v) || math.IsInf(s.v, 0) {
						fail("VictoriaMetrics has a non-finite %s{machine=%q} = %v", name, m, s.v)
					}
					if s.labels["site"] != "quillmoor" || s.labels["machine"] == "" {
						fail("series %s without site/machine labels: %v", name, s.labels)
					}
				}
			}
		}
	}
	// Every derived series of the issue appears, for every machine.
	for _, m := range demoMachines {
		kind := stored[m][0].MachineKind
		for _, fig := range derivedByKind[kind] {
			gasEff := m == "gas-compressor" && strings.Contains(fig, "efficiency")
			if gasEff {
				if present[m][fig] {
					t.Errorf("%s: %s forced Bad but has values in VictoriaMetrics", m, fig)
				}
				continue
			}
			if !present[m][fig] {
				t.Errorf("%s: series exw_machine_%s never written with a value", m, fig)
			}
			if fig != config.LostWorkCostFigure && !present[m][fig+"_u95"] {
				t.Errorf("%s: series exw_machine_%s_u95 never written", m, fig)
			}
		}
	}
	if badFigures == 0 {
		t.Error("no Bad figure was produced; the test of 'Bad figures absent as values' did not run")
	}
	if len(ix["exw_reason_active"]) == 0 {
		t.Error("no exw_reason_active series: reason codes are not reaching the TSDB")
	}
	t.Logf("%d records (%d Bad figures) compared point by point with VictoriaMetrics", total, badFigures)
}

// TestTSDBOutageNoLoss (b): VictoriaMetrics is stopped (SIGTERM, which
// flushes what it acknowledged) while the daemon runs, stays down for 25 s
// (125 evaluations per machine at 200 ms, standing for minutes), and is
// started again. Every record of every machine, including the ones written
// during the outage, must arrive exactly once: the record times in the
// store equal the point times of exw_machine_quality_code in
// VictoriaMetrics, and a recording proxy in front of the server counts no
// point acknowledged twice.
func TestTSDBOutageNoLoss(t *testing.T) {
	t.Parallel()
	const outage = 25 * time.Second
	vm := vmtest.StartServer(t)
	rec, proxyURL := newWriteRecorder(t, vm.URL)
	ns := startNATS(t, false)
	defer stopNATS(ns)
	dir := t.TempDir()
	tr := fastTree(t, ns.ClientURL(), dir)
	tr.addSink(influxSink(proxyURL, filepath.Join(dir, "spool")))
	cfgPath := tr.write(t, dir, "exergywatch.yaml")
	f := startFeeder(t, ns.ClientURL(), steadyPlant(t), 100*time.Millisecond, nil)
	defer f.stop()
	d := startDaemon(t, cfgPath, nil, pipelineOptions{})

	const spooled = `exergywatch_sink_spooled_items{sink="tsdb"}`
	const written = `exergywatch_sink_written_total{sink="tsdb"}`
	waitFor(t, 30*time.Second, "points written to VictoriaMetrics", func() bool { return d.metrics()[written] > 100 })

	vm.Stop()
	down := time.Now()
	var maxSpool float64
	for time.Since(down) < outage {
		time.Sleep(time.Second)
		maxSpool = max(maxSpool, d.metrics()[spooled])
	}
	up := time.Now()
	vm.Restart()
	if maxSpool == 0 {
		t.Fatal("the spool stayed empty during the outage: the test did not exercise it")
	}
	waitFor(t, 60*time.Second, "the spool to drain", func() bool {
		m := d.metrics()
		return m[spooled] == 0 && m[`exergywatch_sink_queued_items{sink="tsdb"}`] == 0
	})
	time.Sleep(time.Second)
	if err := d.stop(); err != nil {
		t.Fatalf("daemon stopped with %v", err)
	}
	for _, s := range d.st.cur.Load().multi.Stats() {
		if s.Dropped != 0 || s.Rejected != 0 || s.SpooledItems != 0 {
			t.Errorf("sink %s: %+v: want nothing dropped, rejected or left in the spool", s.Name, s)
		}
	}

	stored, _ := readStore(t, filepath.Join(dir, "history.db"))
	var total int
	for _, rs := range stored {
		total += len(rs)
	}
	got := map[string][]int64{}
	for _, s := range exportSettled(t, vm, `{__name__="exw_machine_quality_code"}`, total) {
		got[s.Metric["machine"]] = append(got[s.Metric["machine"]], s.Timestamps...)
	}
	acked := rec.machineLines(t)
	for _, m := range demoMachines {
		var want []int64
		during := 0
		for _, r := range stored[m] {
			want = append(want, msOf(r.Time))
			if r.Time.After(down) && r.Time.Before(up) {
				during++
			}
		}
		g := got[m]
		slices.Sort(g)
		if during < 100 {
			t.Errorf("%s: only %d records fell into the %v outage; want over 100", m, during, outage)
		}
		if len(g) != len(want) || acked[m] != len(want) {
			t.Errorf("%s: store %d records, VictoriaMetrics %d points, acknowledged %d lines", m, len(want), len(g), acked[m])
		}
		if !slices.Equal(g, want) {
			missing, extra := diffMS(want, g)
			t.Errorf("%s: point times differ: %d missing in VictoriaMetrics (first %v), %d extra (first %v)", m, len(missing), head(missing), len(extra), head(extra))
		}
		t.Logf("%s: %d records, %d during the outage, all in VictoriaMetrics once", m, len(want), during)
	}
	t.Logf("outage %v, largest spool %v points", up.Sub(down).Round(time.Millisecond), maxSpool)
}

func diffMS(want, got []int64) (missing, extra []int64) {
	w := map[int64]int{}
	for _, x := range want {
		w[x]++
	}
	for _, x := range got {
		if w[x] > 0 {
			w[x]--
		} else {
			extra = append(extra, x)
		}
	}
	for x, n := range w {
		for ; n > 0; n-- {
			missing = append(missing, x)
		}
	}
	slices.Sort(missing)
	return missing, extra
}

func head(x []int64) []int64 { return x[:min(3, len(x))] }

// firingTree is fastTree with alwaysFiringRule on the air compressor.
func firingTree(t testing.TB, natsURL, dir string) tree {
	tr := fastTree(t, natsURL, dir)
	ac := tr.machine(t, "air-compressor")
	ac["alerts"] = append(ac["alerts"].([]any), alwaysFiringRule())
	return tr
}

func (d *daemon) firstFiring(machine, rule string) (compute.Event, bool) {
	_, evs := d.snapshot()
	f := firings(evs, machine, rule)
	if len(f) == 0 {
		return compute.Event{}, false
	}
	return f[0], true
}

// activeAlert returns the active alert of machine/rule from /status.
func activeAlert(s statusDoc, machine, rule string) (state string, since time.Time, ok bool) {
	for _, a := range s.Alerts {
		if a.Machine == machine && a.Rule == rule {
			return a.State, a.Since, true
		}
	}
	return "", time.Time{}, false
}

const reloadOK = "exergywatch_config_last_reload_successful"

// TestReloadAllOrNothing (c): reloads through runDaemon's reload channel,
// with a load function that re-reads the file. valid -> invalid YAML (an
// unknown key) -> valid YAML that cannot start (an InfluxDB token variable
// that is not set) -> a change of a setting that needs a restart
// (state.path) -> valid with one machine fewer. The reload gauge goes
// 1 -> 0 -> 0 -> 0 -> 1; after each refusal the running configuration keeps
// evaluating; the firing alert keeps its state and its start time through
// every pipeline restart and fires only once.
func TestReloadAllOrNothing(t *testing.T) {
	t.Parallel()
	ns := startNATS(t, false)
	defer stopNATS(ns)
	dir := t.TempDir()
	cfgPath := firingTree(t, ns.ClientURL(), dir).write(t, dir, "exergywatch.yaml")
	valid1, err := os.ReadFile(cfgPath)
	if err != nil {
		t.Fatal(err)
	}
	f := startFeeder(t, ns.ClientURL(), steadyPlant(t), 100*time.Millisecond, nil)
	defer f.stop()
	logs := newLogCapture()
	reload := make(chan struct{}) // unbuffered: a send returns once runDaemon took it
	d := startDaemon(t, cfgPath, reload, pipelineOptions{log: slog.New(logs)})
	defer d.stop()

	waitFor(t, 30*time.Second, "the test rule to fire", func() bool { _, ok := d.firstFiring("air-compressor", "below-95"); return ok }, d.summary)
	fired, _ := d.firstFiring("air-compressor", "below-95")
	if g := d.metrics()[reloadOK]; g != 1 {
		t.Fatalf("%s = %v after start, want 1", reloadOK, g)
	}
	okTime := d.metrics()["exergywatch_config_last_reload_success_timestamp_seconds"]

	evaluations := func() float64 { return d.metrics()["exergywatch_compute_evaluations_total"] }
	stillRunning := func(step string, machines int) {
		t.Helper()
		e0 := evaluations()
		waitFor(t, 10*time.Second, step+": evaluations continue", func() bool { return evaluations() >= e0+float64(3*machines) })
		if code, _ := d.get("/readyz"); code != http.StatusOK {
			t.Errorf("%s: /readyz %d", step, code)
		}
		s := d.statusJSON()
		if len(s.Machines) != machines {
			t.Errorf("%s: /status lists %d machines, want %d", step, len(s.Machines), machines)
		}
		state, since, ok := activeAlert(s, "air-compressor", "below-95")
		if !ok || state != "firing" || !since.Equal(fired.Since) {
			t.Errorf("%s: alert below-95 is %q since %v (listed %v), want firing since %v", step, state, since, ok, fired.Since)
		}
	}
	stillRunning("before any reload", 6)

	// 1. Invalid YAML: refused, the running pipeline is untouched.
	p0 := d.st.cur.Load()
	bad := append(append([]byte(nil), valid1...), []byte("\nunknown_section: {x: 1}\n")...)
	if err := os.WriteFile(cfgPath, bad, 0o600); err != nil {
		t.Fatal(err)
	}
	if _, err := config.Load(cfgPath); err == nil {
		t.Fatal("the invalid file loads; the test is wrong")
	}
	reload <- struct{}{}
	waitFor(t, 10*time.Second, "reload gauge 0 after invalid YAML", func() bool { return d.metrics()[reloadOK] == 0 })
	if d.st.cur.Load() != p0 {
		t.Error("an invalid file replaced the running pipeline")
	}
	stillRunning("after invalid YAML", 6)

	// 2. Valid file whose sink cannot open: the old configuration starts again.
	os.Unsetenv("EXW_TEST_TOKEN_NOT_SET")
	tr := firingTree(t, ns.ClientURL(), dir)
	sink := influxSink("http://127.0.0.1:9", filepath.Join(dir, "spool"))
	sink["influxdb"].(map[string]any)["token"] = "env:EXW_TEST_TOKEN_NOT_SET"
	tr.addSink(sink)
	tr.write(t, dir, "exergywatch.yaml")
	reload <- struct{}{}
	waitFor(t, 15*time.Second, "the previous configuration to be started again", func() bool { return d.st.cur.Load() != p0 })
	if g := d.metrics()[reloadOK]; g != 0 {
		t.Errorf("%s = %v after a configuration that cannot start, want 0", reloadOK, g)
	}
	if n := logs.count("new configuration could not start; the previous one is started again"); n != 1 {
		t.Errorf("%d log lines report the failed start, want 1", n)
	}
	stillRunning("after a configuration that cannot start", 6)

	// 3. A setting that needs a restart: refused.
	p1 := d.st.cur.Load()
	tr = firingTree(t, ns.ClientURL(), dir)
	tr.set(t, "state.path", filepath.Join(dir, "other-state.db"))
	tr.write(t, dir, "exergywatch.yaml")
	refused := logs.count("configuration reload refused")
	reload <- struct{}{}
	waitFor(t, 10*time.Second, "the refusal of a state.path change", func() bool { return logs.count("configuration reload refused") == refused+1 })
	if !strings.Contains(logs.all(), "state.path cannot change while running") {
		t.Error("the refusal does not name state.path")
	}
	if d.st.cur.Load() != p1 {
		t.Error("a refused change replaced the running pipeline")
	}
	stillRunning("after a refused state.path change", 6)

	// 4. Valid, one machine fewer: applied.
	tr = firingTree(t, ns.ClientURL(), dir)
	tr.dropMachine(t, "lp-turbine")
	tr.write(t, dir, "exergywatch.yaml")
	reloadAt := time.Now()
	reload <- struct{}{}
	waitFor(t, 15*time.Second, "reload gauge 1 after a valid file", func() bool { return d.metrics()[reloadOK] == 1 })
	if ts := d.metrics()["exergywatch_config_last_reload_success_timestamp_seconds"]; ts <= okTime {
		t.Errorf("reload success timestamp %v did not advance past %v", ts, okTime)
	}
	stillRunning("after a valid reload", 5)
	waitFor(t, 15*time.Second, "steady air-compressor records after the reload", func() bool {
		return d.countWhere("air-compressor", func(r compute.Record) bool {
			return r.Time.After(reloadAt) && (r.Quality == compute.QualityGood || r.Quality == compute.QualityUncertain)
		}) >= 5
	})
	if n := d.countWhere("lp-turbine", func(r compute.Record) bool { return r.Time.After(reloadAt.Add(time.Second)) }); n != 0 {
		t.Errorf("%d lp-turbine records after it was removed", n)
	}
	if err := d.stop(); err != nil {
		t.Fatalf("daemon stopped with %v", err)
	}
	_, evs := d.snapshot()
	if n := len(firings(evs, "air-compressor", "below-95")); n != 1 {
		t.Errorf("the rule fired %d times across four reloads, want once", n)
	}
	_, stored := readStore(t, filepath.Join(dir, "history.db"))
	if n := len(firings(stored, "air-compressor", "below-95")); n != 1 {
		t.Errorf("the store holds %d firing events, want 1", n)
	}
}

// TestRestartKeepsAlertState (d): a rule fires, the daemon stops, a new
// daemon starts on the same state file: the rule is firing from the first
// status answer on, with its original start time, and no second firing
// event is raised while it keeps seeing the condition.
func TestRestartKeepsAlertState(t *testing.T) {
	t.Parallel()
	ns := startNATS(t, false)
	defer stopNATS(ns)
	dir := t.TempDir()
	cfgPath := firingTree(t, ns.ClientURL(), dir).write(t, dir, "exergywatch.yaml")
	f := startFeeder(t, ns.ClientURL(), steadyPlant(t), 100*time.Millisecond, nil)
	defer f.stop()

	d1 := startDaemon(t, cfgPath, nil, pipelineOptions{})
	waitFor(t, 30*time.Second, "the test rule to fire", func() bool { _, ok := d1.firstFiring("air-compressor", "below-95"); return ok }, d1.summary)
	fired, _ := d1.firstFiring("air-compressor", "below-95")
	time.Sleep(time.Second)
	if err := d1.stop(); err != nil {
		t.Fatal(err)
	}

	d2 := startDaemon(t, cfgPath, nil, pipelineOptions{})
	defer d2.stop()
	waitFor(t, 10*time.Second, "/status", func() bool { code, _ := d2.get("/status"); return code == http.StatusOK })
	state, since, ok := activeAlert(d2.statusJSON(), "air-compressor", "below-95")
	if !ok || state != "firing" || !since.Equal(fired.Since) {
		t.Errorf("after restart the alert is %q since %v (listed %v), want firing since %v", state, since, ok, fired.Since)
	}
	start2 := time.Now()
	waitFor(t, 20*time.Second, "10 steady air-compressor records after the restart", func() bool {
		return d2.countWhere("air-compressor", func(r compute.Record) bool {
			return r.Quality == compute.QualityGood || r.Quality == compute.QualityUncertain
		}) >= 10
	}, d2.summary)
	// The rule kept seeing its condition (efficiency below 0.95) in run 2.
	recs2, _ := d2.snapshot()
	if v, ok := figureValue(&recs2[len(recs2)-1], "isentropic_efficiency"); ok && v >= 0.95 {
		t.Fatalf("efficiency %v: the condition no longer holds, the test proves nothing", v)
	}
	if err := d2.stop(); err != nil {
		t.Fatal(err)
	}
	_, ev2 := d2.snapshot()
	for _, e := range ev2 {
		if e.Rule == "below-95" {
			t.Errorf("run 2 raised %s -> %s at %v (%s)", e.From, e.To, e.Time, e.Reason)
		}
	}
	_, stored := readStore(t, filepath.Join(dir, "history.db"))
	if n := len(firings(stored, "air-compressor", "below-95")); n != 1 {
		t.Errorf("the store holds %d firing events over both runs, want 1", n)
	}
	t.Logf("fired at %v; restarted at %v; still firing, no second event", fired.Time.Format("15:04:05.000"), start2.Format("15:04:05.000"))
}

// TestStatusEndpoints (e): /healthz, /readyz, /metrics (every family of
// ours named exergywatch_*, the Go runtime and process collectors aside),
// /status JSON (machines, active_alerts, the advisory note),
// /status/alerts, and the listener bound to 127.0.0.1 — the default
// address is loopback too.
func TestStatusEndpoints(t *testing.T) {
	t.Parallel()
	ns := startNATS(t, false)
	defer stopNATS(ns)
	dir := t.TempDir()
	cfgPath := firingTree(t, ns.ClientURL(), dir).write(t, dir, "exergywatch.yaml")
	f := startFeeder(t, ns.ClientURL(), steadyPlant(t), 100*time.Millisecond, nil)
	defer f.stop()
	d := startDaemon(t, cfgPath, nil, pipelineOptions{})
	defer d.stop()

	host, port, err := net.SplitHostPort(d.addr)
	if err != nil || host != "127.0.0.1" {
		t.Fatalf("status listens on %q, want 127.0.0.1", d.addr)
	}
	// The default, when the file says nothing, is loopback as well.
	tr := firingTree(t, ns.ClientURL(), dir)
	delete(tr, "status")
	def, err := config.Load(tr.write(t, dir, "nostatus.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	if h, _, _ := net.SplitHostPort(def.Status.Listen); h != "127.0.0.1" {
		t.Errorf("default status.listen %q is not loopback", def.Status.Listen)
	}
	// Not reachable on any other address of this machine.
	addrs, _ := net.InterfaceAddrs()
	for _, a := range addrs {
		ipn, ok := a.(*net.IPNet)
		if !ok || ipn.IP.IsLoopback() {
			continue
		}
		c, err := net.DialTimeout("tcp", net.JoinHostPort(ipn.IP.String(), port), time.Second)
		if err == nil {
			c.Close()
			t.Errorf("status port reachable on %s", ipn.IP)
		}
	}

	if code, body := d.get("/healthz"); code != http.StatusOK || body != "ok\n" {
		t.Errorf("/healthz: %d %q", code, body)
	}
	waitFor(t, 10*time.Second, "/readyz 200", func() bool { code, _ := d.get("/readyz"); return code == http.StatusOK })
	waitFor(t, 30*time.Second, "the test rule to fire", func() bool { _, ok := d.firstFiring("air-compressor", "below-95"); return ok }, d.summary)

	m := d.metrics()
	for k := range m {
		n := metricName(k)
		if !strings.HasPrefix(n, "exergywatch_") && !strings.HasPrefix(n, "go_") && !strings.HasPrefix(n, "process_") && !strings.HasPrefix(n, "promhttp_") {
			t.Errorf("metric %s is not named exergywatch_*", n)
		}
	}
	for _, want := range []struct {
		key string
		min float64
	}{
		{reloadOK, 1},
		{"exergywatch_config_last_reload_success_timestamp_seconds", float64(time.Now().Add(-time.Minute).Unix())},
		{"exergywatch_compute_evaluations_total", 6},
		{"exergywatch_compute_alert_events_total", 1},
		{"exergywatch_compute_last_tick_timestamp_seconds", float64(time.Now().Add(-time.Minute).Unix())},
		{"exergywatch_ingest_received_samples_total", 34},
		{"exergywatch_ingest_accepted_samples_total", 34},
		{"exergywatch_ingest_snapshots_total", 6},
		{`exergywatch_sink_written_total{sink="history"}`, 6},
		{`exergywatch_sink_dropped_total{sink="history"}`, 0},
	} {
		v, ok := m[want.key]
		if !ok || v < want.min {
			t.Errorf("%s = %v (present %v), want >= %v", want.key, v, ok, want.min)
		}
	}
	if v := m[`exergywatch_sink_dropped_total{sink="history"}`]; v != 0 {
		t.Errorf("history sink dropped %v items", v)
	}

	s := d.statusJSON()
	if s.Site != "quillmoor" || !strings.Contains(s.Advisory, "not a protection") {
		t.Errorf("/status site %q advisory %q", s.Site, s.Advisory)
	}
	var ids []string
	for _, mv := range s.Machines {
		ids = append(ids, mv.ID)
		if mv.Mode != "running" {
			t.Errorf("machine %s mode %q, want running", mv.ID, mv.Mode)
		}
		f, ok := mv.Figures["isentropic_efficiency"]
		if !ok || f.Value == nil || *f.Value <= 0.5 || *f.Value >= 1 {
			t.Errorf("machine %s isentropic_efficiency %+v", mv.ID, f)
		}
		if len(mv.Inputs) == 0 {
			t.Errorf("machine %s: no inputs_si", mv.ID)
		}
		if mv.SensitivityAge == nil || *mv.SensitivityAge < 0 || *mv.SensitivityAge > 60 {
			t.Errorf("machine %s: u95_sensitivity_age %v, want 0..60 (machine.DefaultMaxAge)", mv.ID, mv.SensitivityAge)
		}
	}
	if len(s.Sources) != 1 || s.Sources[0].Kind != "nats" || s.Sources[0].Trust != nil {
		t.Errorf("/status sources %+v, want the one NATS source", s.Sources)
	}
	if !slices.Equal(ids, demoMachines) {
		t.Errorf("/status machines %v, want %v", ids, demoMachines)
	}
	if state, _, ok := activeAlert(s, "air-compressor", "below-95"); !ok || state != "firing" {
		t.Errorf("/status active_alerts %+v: want below-95 firing", s.Alerts)
	}
	code, body := d.get("/status/alerts")
	var av struct {
		Advisory string `json:"advisory"`
		Active   []struct {
			Rule, State string
		} `json:"active"`
		// recent_events use the wire form of sinks.EventJSON.
		Recent []struct {
			Rule   string `json:"rule"`
			Reason string `json:"reason"`
			To     string `json:"to"`
		} `json:"recent_events"`
	}
	if code != http.StatusOK || json.Unmarshal([]byte(body), &av) != nil {
		t.Fatalf("/status/alerts: %d %s", code, body)
	}
	found := false
	for _, e := range av.Recent {
		if e.Rule == "below-95" && e.To == "firing" && strings.Contains(e.Reason, "always below 0.95") {
			found = true
		}
	}
	if !found || len(av.Active) == 0 || !strings.Contains(av.Advisory, "not a protection") {
		t.Errorf("/status/alerts lacks the firing event with its reason and advice: %s", body)
	}
	if code, _ := d.get("/nothing-here"); code != http.StatusNotFound {
		t.Errorf("unknown path: %d, want 404", code)
	}
	resp, err := d.http.Post("http://"+d.addr+"/status", "application/json", strings.NewReader("{}"))
	if err == nil {
		resp.Body.Close()
		if resp.StatusCode != http.StatusMethodNotAllowed {
			t.Errorf("POST /status: %d, want 405", resp.StatusCode)
		}
	}
	if err := d.stop(); err != nil {
		t.Fatal(err)
	}
	if _, err := d.http.Get("http://" + d.addr + "/healthz"); err == nil {
		t.Error("status endpoint still answers after stop")
	}
}

// freePort returns a loopback address that was free a moment ago (for
// cmdRun, whose status address must be known before it starts).
func freePort(t testing.TB) string {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().String()
}

// natsWitness subscribes to the NATS sink's record subjects and keeps the
// (machine, time) of every record it sees, decoded and validated with the
// wire decoder.
type natsWitness struct {
	nc  *nats.Conn
	sub *nats.Subscription
	mu  sync.Mutex
	got map[string]map[int64]bool
	n   int
	bad []string
}

func newNATSWitness(t testing.TB, url string) *natsWitness {
	t.Helper()
	nc, err := nats.Connect(url)
	if err != nil {
		t.Fatal(err)
	}
	w := &natsWitness{nc: nc, got: map[string]map[int64]bool{}}
	w.sub, err = nc.Subscribe("exergywatch.*.derived.>", func(m *nats.Msg) {
		r, err := sinks.UnmarshalRecord(m.Data)
		w.mu.Lock()
		defer w.mu.Unlock()
		if err != nil {
			w.bad = append(w.bad, err.Error())
			return
		}
		if w.got[r.Machine] == nil {
			w.got[r.Machine] = map[int64]bool{}
		}
		w.got[r.Machine][r.Time.UnixNano()] = true
		w.n++
	})
	if err != nil {
		t.Fatal(err)
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	return w
}

func (w *natsWitness) count() int {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.n
}

func (w *natsWitness) close() {
	_ = w.sub.Unsubscribe()
	w.nc.Close()
}

// TestRunStopsCleanly (f): around two full run/stop cycles no goroutine is
// left behind (go.uber.org/goleak), and stopping drains and flushes: no
// record is missing from the store afterwards.
//
//   - runDaemon stopped by cancelling its context: every record the
//     pipeline produced (seen through the onRecord hook) is in the store.
//   - `exergywatch run -c FILE` through dispatch, reloaded with a real
//     SIGHUP (invalid file: reload gauge 0; valid again: 1) and stopped with
//     a real SIGTERM: exit status 0, and every record the NATS sink
//     published is in the store.
//
// Not parallel: it sends signals to the test process and counts goroutines.
func TestRunStopsCleanly(t *testing.T) {
	vm := vmtest.StartServer(t) // its process watcher lives until the test's cleanup
	// os/signal starts its watcher goroutine once per process; start it
	// before the leak baseline.
	c := make(chan os.Signal, 1)
	signal.Notify(c, syscall.SIGUSR2)
	signal.Stop(c)
	defer goleak.VerifyNone(t, goleak.IgnoreCurrent())

	ns := startNATS(t, false)
	defer stopNATS(ns)
	dir := t.TempDir()
	tr := fastTree(t, ns.ClientURL(), dir)
	tr.addSink(influxSink(vm.URL, filepath.Join(dir, "spool")))
	tr.addSink(map[string]any{"name": "bus", "kind": "nats", "nats": map[string]any{"urls": []string{ns.ClientURL()}}})
	listen := freePort(t)
	tr.set(t, "status.listen", listen)
	cfgPath := tr.write(t, dir, "exergywatch.yaml")
	valid, _ := os.ReadFile(cfgPath)
	f := startFeeder(t, ns.ClientURL(), steadyPlant(t), 100*time.Millisecond, nil)
	defer f.stop()
	storePath := filepath.Join(dir, "history.db")

	// Cycle 1: runDaemon, context cancelled.
	d := startDaemon(t, cfgPath, nil, pipelineOptions{})
	d.waitEveryMachine(30*time.Second, 10)
	if err := d.stop(); err != nil {
		t.Fatalf("runDaemon returned %v", err)
	}
	d.http.CloseIdleConnections()
	seen, _ := d.snapshot()
	stored, _ := readStore(t, storePath)
	inStore := map[string]map[int64]bool{}
	nStored := 0
	for m, rs := range stored {
		inStore[m] = map[int64]bool{}
		for _, r := range rs {
			inStore[m][r.Time.UnixNano()] = true
			nStored++
		}
	}
	var end1 time.Time
	for _, r := range seen {
		if !inStore[r.Machine][r.Time.UnixNano()] {
			t.Errorf("cycle 1: record %s missing from the store after stop", describeRecord(r))
		}
		if r.Time.After(end1) {
			end1 = r.Time
		}
	}
	if nStored != len(seen) {
		t.Errorf("cycle 1: store holds %d records, the pipeline produced %d", nStored, len(seen))
	}
	t.Logf("cycle 1: %d records produced, all in the store", len(seen))

	// Cycle 2: exergywatch run, SIGHUP, SIGTERM.
	w := newNATSWitness(t, ns.ClientURL())
	var out, errOut syncBuffer
	exit := make(chan int, 1)
	go func() { exit <- dispatch([]string{"run", "-c", cfgPath, "--log-format", "json"}, &out, &errOut) }()
	hc := &http.Client{Timeout: 5 * time.Second, Transport: &http.Transport{DisableKeepAlives: true}}
	get := func(path string) (int, string) {
		resp, err := hc.Get("http://" + listen + path)
		if err != nil {
			return 0, ""
		}
		defer resp.Body.Close()
		b, _ := io.ReadAll(resp.Body)
		return resp.StatusCode, string(b)
	}
	waitFor(t, 20*time.Second, "exergywatch run to answer /healthz", func() bool {
		select {
		case code := <-exit:
			t.Fatalf("exergywatch run exited with %d: %s", code, errOut.String())
		default:
		}
		code, body := get("/healthz")
		return code == http.StatusOK && body == "ok\n"
	})
	// The signal handlers are installed before the status server starts.
	gauge := func() float64 {
		_, body := get("/metrics")
		return parseMetrics(t, body)[reloadOK]
	}
	waitFor(t, 20*time.Second, "records on the NATS sink", func() bool { return w.count() >= 30 })
	if err := os.WriteFile(cfgPath, append(append([]byte(nil), valid...), "\nsurplus: 1\n"...), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := syscall.Kill(os.Getpid(), syscall.SIGHUP); err != nil {
		t.Fatal(err)
	}
	waitFor(t, 10*time.Second, "reload gauge 0 after SIGHUP with an invalid file", func() bool { return gauge() == 0 })
	if err := os.WriteFile(cfgPath, valid, 0o600); err != nil {
		t.Fatal(err)
	}
	if err := syscall.Kill(os.Getpid(), syscall.SIGHUP); err != nil {
		t.Fatal(err)
	}
	waitFor(t, 15*time.Second, "reload gauge 1 after SIGHUP with the valid file", func() bool { return gauge() == 1 })
	n0 := w.count()
	waitFor(t, 20*time.Second, "records after the reload", func() bool { return w.count() >= n0+30 })
	if err := syscall.Kill(os.Getpid(), syscall.SIGTERM); err != nil {
		t.Fatal(err)
	}
	select {
	case code := <-exit:
		if code != 0 {
			t.Errorf("exergywatch run exited with %d after SIGTERM: %s", code, errOut.String())
		}
	case <-time.After(60 * time.Second):
		t.Fatal("exergywatch run did not exit within 60 s of SIGTERM")
	}
	hc.CloseIdleConnections()
	// Let the last NATS messages reach the witness.
	_ = w.nc.Flush()
	time.Sleep(200 * time.Millisecond)
	w.close()
	if len(w.bad) > 0 {
		t.Errorf("NATS sink published %d undecodable records, first: %s", len(w.bad), w.bad[0])
	}
	stored, _ = readStore(t, storePath)
	n2 := 0
	for m, rs := range stored {
		inStore[m] = map[int64]bool{}
		for _, r := range rs {
			inStore[m][r.Time.UnixNano()] = true
			if r.Time.After(end1) {
				n2++
			}
		}
	}
	missing := 0
	for m, ts := range w.got {
		for ns := range ts {
			if !inStore[m][ns] {
				missing++
			}
		}
	}
	if missing > 0 || n2 != w.count() {
		t.Errorf("cycle 2: %d records published on NATS, %d stored, %d published but not stored", w.count(), n2, missing)
	}
	for _, want := range []string{`"msg":"configuration reload refused; the running configuration is kept"`, `"msg":"configuration reloaded"`, `"msg":"exergywatch stopped; sinks flushed"`} {
		if !strings.Contains(errOut.String(), want) {
			t.Errorf("log lacks %s", want)
		}
	}
	t.Logf("cycle 2: %d records published on NATS, all in the store after SIGTERM", w.count())
	f.stop()
}

// syncBuffer is a bytes.Buffer safe for the daemon's log writer and the test.
type syncBuffer struct {
	mu sync.Mutex
	b  strings.Builder
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// scriptClock returns scripted times (offsets from base), then keeps
// stepping by step.
type scriptClock struct {
	mu     sync.Mutex
	base   time.Time
	script []time.Duration
	step   time.Duration
	i      int
}

func (c *scriptClock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	i := c.i
	c.i++
	if i < len(c.script) {
		return c.base.Add(c.script[i])
	}
	last := c.script[len(c.script)-1]
	return c.base.Add(last + time.Duration(i-len(c.script)+1)*c.step)
}

// TestTickTimesStrictlyIncrease: the evaluation ticker stamps each tick
// with clock.Now().Truncate(interval). When the ticker's phase lies just
// before an interval boundary, scheduling delay spreads successive wake-ups
// across the boundary and two ticks truncate to the same time: the clock
// below reads 0.196 s, 0.405 s, 0.596 s (one 9 ms late wake-up), which
// gives ticks at 0.0, 0.4, 0.4. Two records of one machine then carry the
// same time: the store keeps one (same key), the TSDB gets both, the
// steady-state filter and the alert hold times see a zero time step. Each
// tick time must be later than the previous one.
func TestTickTimesStrictlyIncrease(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	tr := fastTree(t, "nats://127.0.0.1:1", dir)
	tr["sources"] = []any{}
	cfgPath := tr.write(t, dir, "exergywatch.yaml")
	base := time.Now().Truncate(time.Second).Add(-time.Minute)
	clk := &scriptClock{base: base, step: 200 * time.Millisecond,
		script: []time.Duration{196 * time.Millisecond, 405 * time.Millisecond, 596 * time.Millisecond, 796 * time.Millisecond}}
	d := startDaemon(t, cfgPath, nil, pipelineOptions{clock: clk})
	waitFor(t, 10*time.Second, "6 ticks", func() bool { return d.countWhere("air-compressor", func(compute.Record) bool { return true }) >= 6 })
	if err := d.stop(); err != nil {
		t.Fatal(err)
	}
	recs, _ := d.snapshot()
	last := map[string]time.Time{}
	for _, r := range recs {
		if p, ok := last[r.Machine]; ok && !r.Time.After(p) {
			t.Errorf("%s: record at %v follows one at %v: tick times must increase", r.Machine, r.Time.Sub(base), p.Sub(base))
		}
		last[r.Machine] = r.Time
	}
}

// malformed are payloads the plant bus might carry by mistake. Each must
// be counted as a decode error (or a dropped sample) and nothing else.
var malformed = [][]byte{
	nil,
	[]byte("{"),
	[]byte("["),
	[]byte("null"),
	[]byte(`{"samples": 5}`),
	[]byte(`{"tag": 5, "value": 1}`),
	[]byte(`{"tag": "QM.RC1.PT601", "value": "abc"}`),
	[]byte(`{"tag": "QM.RC1.PT601", "value": NaN}`),
	[]byte(`{"tag": "QM.RC1.PT601", "value": 1, "ts": "yesterday"}`),
	[]byte(`{"tag": "QM.RC1.PT601", "value": 1, "quality": "splendid"}`),
	[]byte(`{"tag": "QM.RC1.PT601", "value": 1, "status": -3}`),
	[]byte(`[{"tag": "QM.RC1.PT601", "value": {}}, {"tag": "QM.RC1.PT601"}]`),
	[]byte(strings.Repeat("[", 100000)),
	[]byte("\xff\xfe\x00garbage"),
	[]byte(`{"tag": "QM.RC1.PT601", "value": 1e400}`),
	[]byte(`{"tag": "QM.RC1.PT601", "value": 1e308}`),
	[]byte(`{"tag": "QM.RC1.PT601", "value": 300, "ts": "2199-01-01T00:00:00Z"}`),
	[]byte(`{"tag": "QM.RC1.PT601", "value": 300, "ts": "1990-01-01T00:00:00Z"}`),
	[]byte(`{"tag": "QM.NOT.MAPPED", "value": 1}`),
	[]byte("QM.RC1.PT601 value=+Inf"),
	[]byte("QM.RC1.PT601 value="),
	[]byte("QM.RC1.PT601,tag= value=1 notatime"),
}

// TestBadInputThroughDaemon (g): faulty data on the bus, through the whole
// daemon, into three sinks (store, NATS, InfluxDB API on VictoriaMetrics):
//
//	hp-turbine     outlet temperature arrives only as NaN / +Inf (line protocol) and 1e400 (JSON)
//	feed-pump      outlet temperature with quality "bad"
//	lp-turbine     outlet pressure stops after 2 s (stale_after 600ms)
//	gas-compressor outlet pressure never published (missing tag)
//	air-compressor discharge gauge pressure (barg) with a barometer tag that never reports
//	nh3-compressor good data, plus every payload of malformed on its subject
//
// No panic, no sink rejects anything as non-finite, no NaN or Inf in any
// sink, every record that is not good says why, and each fault is named
// in the records of its machine.
func TestBadInputThroughDaemon(t *testing.T) {
	t.Parallel()
	vm := vmtest.StartServer(t)
	ns := startNATS(t, false)
	defer stopNATS(ns)
	dir := t.TempDir()
	tr := fastTree(t, ns.ClientURL(), dir)
	tr.addSink(influxSink(vm.URL, filepath.Join(dir, "spool")))
	tr.addSink(map[string]any{"name": "bus", "kind": "nats", "nats": map[string]any{"urls": []string{ns.ClientURL()}}})
	tm := tr["tag_map"].(map[string]any)
	delete(tm, "site_pressure")
	tm["tags"] = append(tm["tags"].([]any), map[string]any{"tag": "QM.SITE.PB01", "quantity": "p", "unit": "kPa"})
	tr.tag(t, "QM.AC1.PT402")["barometer_tag"] = "QM.SITE.PB01"
	tr.tag(t, "QM.LP1.PT202")["checks"] = map[string]any{"stale_after": "600ms"}
	cfgPath := tr.write(t, dir, "exergywatch.yaml")

	w := newNATSWitness(t, ns.ClientURL())
	defer w.close()
	raw, err := nats.Connect(ns.ClientURL()) // the faulty publishers
	if err != nil {
		t.Fatal(err)
	}
	defer raw.Close()
	inf := 0
	mutate := func(e time.Duration, rs []plantsim.Reading) []plantsim.Reading {
		out := rs[:0]
		for _, r := range rs {
			switch {
			case r.Tag == "QM.HP1.TT102":
				inf++
				switch inf % 3 {
				case 0:
					_ = raw.Publish("quillmoor.tags.hp-turbine", []byte("QM.HP1.TT102 value=NaN"))
				case 1:
					_ = raw.Publish("quillmoor.tags.hp-turbine", []byte("QM.HP1.TT102 value=+Inf"))
				default:
					_ = raw.Publish("quillmoor.tags.hp-turbine", []byte(`{"tag": "QM.HP1.TT102", "value": 1e400}`))
				}
				continue
			case r.Tag == "QM.FP1.TT302":
				r.Quality = "bad"
			case r.Tag == "QM.LP1.PT202" && e > 2*time.Second:
				continue
			case r.Tag == "QM.GC1.PT502":
				continue
			case r.Tag == "QM.RC1.PT601":
				for _, p := range malformed {
					_ = raw.Publish("quillmoor.tags.nh3-compressor", p)
				}
			}
			out = append(out, r)
		}
		return out
	}
	d := startDaemon(t, cfgPath, nil, pipelineOptions{})
	f := startFeeder(t, ns.ClientURL(), steadyPlant(t), 100*time.Millisecond, mutate)
	defer f.stop()
	waitFor(t, 30*time.Second, "20 usable nh3-compressor records and 4 s of lp-turbine", func() bool {
		return d.countWhere("nh3-compressor", usable) >= 20 && time.Since(f.start) > 4*time.Second
	}, d.summary)
	m := d.metrics()
	if err := d.stop(); err != nil {
		t.Fatalf("daemon stopped with %v", err)
	}
	f.stop()

	for _, s := range d.st.cur.Load().multi.Stats() {
		if s.Rejected != 0 || s.Dropped != 0 {
			t.Errorf("sink %s rejected %d and dropped %d items (last error %q): a record broke the contract", s.Name, s.Rejected, s.Dropped, s.LastError)
		}
	}
	for _, want := range []string{"exergywatch_ingest_decode_errors_total",
		`exergywatch_ingest_flagged_samples_total{reason="non_finite"}`,
		`exergywatch_ingest_flagged_samples_total{reason="status_bad"}`,
		`exergywatch_ingest_flagged_samples_total{reason="no_barometer"}`,
		`exergywatch_ingest_flagged_samples_total{reason="time_future"}`,
		`exergywatch_ingest_flagged_samples_total{reason="unmapped"}`} {
		if m[want] <= 0 {
			t.Errorf("%s = %v, want > 0", want, m[want])
		}
	}

	recs, _ := d.snapshot()
	faults := map[string]string{"hp-turbine": "T@outlet", "feed-pump": "T@outlet", "lp-turbine": "p@outlet",
		"gas-compressor": "p@outlet", "air-compressor": "p@outlet"}
	named := map[string]int{}
	total := map[string]int{}
	// The feed pump's outlet thermometer reports with quality bad: its
	// records say so. When the loaded test machine delays the feeder past a
	// whole evaluation window, the window holds no sample of the tag and
	// the record names the same input as no_data or stale instead; most
	// records must still name status_bad.
	statusBad := 0
	for _, r := range recs {
		if err := r.Validate(); err != nil {
			t.Errorf("record breaks the contract: %v", err)
		}
		if r.Quality != compute.QualityGood && len(r.Reasons) == 0 {
			t.Errorf("%s: quality %s without a reason", describeRecord(r), r.Quality)
		}
		for _, fg := range r.Figures {
			if fg.Quality == compute.QualityBad && len(fg.Reasons) == 0 && len(r.Reasons) == 0 {
				t.Errorf("%s: Bad figure %s without a reason", describeRecord(r), fg.Name)
			}
			if fg.Quality != compute.QualityBad && (math.IsNaN(fg.Value) || math.IsInf(fg.Value, 0)) {
				t.Errorf("%s: figure %s = %v with quality %s", describeRecord(r), fg.Name, fg.Value, fg.Quality)
			}
		}
		want, ok := faults[r.Machine]
		if !ok || r.Time.Before(f.start.Add(time.Second)) || (r.Machine == "lp-turbine" && r.Time.Before(f.start.Add(3*time.Second))) {
			continue
		}
		total[r.Machine]++
		if r.Quality == compute.QualityGood {
			t.Errorf("%s: good despite the fault on %s", describeRecord(r), want)
		}
		if r.Machine == "feed-pump" && strings.Contains(strings.Join(r.Reasons, " "), "T@outlet:status_bad") {
			statusBad++
		}
		if strings.Contains(strings.Join(r.Reasons, " "), want) {
			if named[r.Machine] == 0 {
				t.Logf("example: %s", describeRecord(r))
			}
			named[r.Machine]++
		} else if named[r.Machine] == 0 && total[r.Machine] < 3 {
			t.Logf("%s does not name %s", describeRecord(r), want)
		}
	}
	for mach, want := range faults {
		if total[mach] == 0 || named[mach] != total[mach] {
			t.Errorf("%s: %d of %d records name the fault %q", mach, named[mach], total[mach], want)
		}
	}
	if 2*statusBad <= total["feed-pump"] {
		t.Errorf("feed-pump: %d of %d records name T@outlet:status_bad, want most", statusBad, total["feed-pump"])
	}
	for _, r := range recs {
		if r.Machine == "nh3-compressor" && r.Time.After(f.start.Add(3*time.Second)) && r.Quality == compute.QualityBad {
			t.Errorf("malformed payloads spoilt the good data: %s", describeRecord(r))
		}
	}
	// What the sinks hold: no NaN, nothing undecodable, every record there.
	stored, _ := readStore(t, filepath.Join(dir, "history.db"))
	n := 0
	for _, rs := range stored {
		for _, r := range rs {
			n++
			if err := r.Validate(); err != nil {
				t.Errorf("store: %v", err)
			}
		}
	}
	if n != len(recs) {
		t.Errorf("store holds %d records, the pipeline produced %d", n, len(recs))
	}
	time.Sleep(200 * time.Millisecond)
	if len(w.bad) > 0 || w.count() != len(recs) {
		t.Errorf("NATS sink: %d records decoded, %d undecodable (%v), want %d", w.count(), len(w.bad), w.bad, len(recs))
	}
	for _, s := range exportSettled(t, vm, `{__name__=~"exw_.*"}`, len(recs)) {
		for _, v := range s.Values {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Errorf("VictoriaMetrics: %s holds %v", s.Key(), v)
				break
			}
		}
	}
	t.Logf("%d records; faults named: %v of %v; decode errors %v", len(recs), named, total, m["exergywatch_ingest_decode_errors_total"])
}
