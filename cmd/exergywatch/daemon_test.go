package main

// End-to-end tests of `exergywatch run`: the daemon in-process (runDaemon or
// cmdRun through dispatch) on a temporary configuration file, fed by the
// plant simulator over a real embedded NATS server that the test starts,
// writing to a real VictoriaMetrics (InfluxDB v2 write API), the embedded
// store and NATS. Times are scaled down: a 200 ms evaluation interval
// stands for the usual seconds, so a 25 s outage is 125 evaluations per
// machine.

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"github.com/exergywatch/exergywatch/cmd/exergywatch/internal/plantsim"
	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/config"
	"github.com/exergywatch/exergywatch/ingest"
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
	waitFor(t, 40*time.Second, "15 running records of every machine", func() bool {
		for _, m := range demoMachines {
			if d.countWhere(m, usable) < 15 {
				return false
			}
		}
		return true
	}, d.summary)
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

var (
	_ = context.Background
	_ = json.Marshal
	_ = errors.New
	_ = fmt.Sprint
	_ = net.Dial
	_ = http.Get
	_ = os.Getpid
	_ = sort.Strings
	_ = sync.Mutex{}
	_ = syscall.SIGTERM
	_ = nats.Connect
	_ plantsim.Options
	_ = ingest.ReasonStale
	_ sinks.Stats
)
