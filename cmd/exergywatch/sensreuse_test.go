package main

import (
	"maps"
	"math"
	"slices"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/cmd/exergywatch/internal/plantsim"
	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/ingest/align"
	"github.com/exergywatch/exergywatch/thermo/fluids"
)

// sensReuseU95Bound is the largest relative deviation of a record's U95
// with reused sensitivities from the fresh one: the bound of
// compute/machine's trajectory test for the default reuse fraction (5 %;
// common practice, no source, reasoning in that test).
const sensReuseU95Bound = 0.05

// The daemon's evaluator reuses the machine model's uncertainty
// sensitivities from tick to tick on the demo plant (noise, a load ramp
// down and back), and its records are those of an evaluator that computes
// them afresh every tick (machine.Sensitivities.ReuseFraction < 0): the
// same figures, values bitwise, quality and reasons, U95 within
// sensReuseU95Bound. Reference: the fresh evaluator.
func TestEvaluatorReusesSensitivities(t *testing.T) {
	cfg := demoCfg(t)
	start := time.Date(2026, 4, 1, 6, 0, 0, 0, time.UTC)
	o := plantsim.DemoOptions(start)
	o.StuckSensorAfter, o.SpikeProbability = 0, 0
	plant, err := plantsim.New(o, fluids.New)
	if err != nil {
		t.Fatal(err)
	}
	keys := cfg.Keys()
	type pair struct{ reuse, fresh *evaluator }
	evs := map[string]pair{}
	for i := range cfg.Machines {
		m := &cfg.Machines[i]
		a, err := newEvaluator(cfg, m, keys[m.ID])
		if err != nil {
			t.Fatal(err)
		}
		b, err := newEvaluator(cfg, m, keys[m.ID])
		if err != nil {
			t.Fatal(err)
		}
		if f, r := a.sens.Counts(); f != 0 || r != 0 {
			t.Fatalf("%s: a new evaluator starts with %d fresh and %d reused evaluations", m.ID, f, r)
		}
		b.sens.ReuseFraction = -1
		evs[m.ID] = pair{a, b}
	}
	maxDev := map[string]float64{}
	for at := 2 * time.Second; at <= 360*time.Second; at += 2 * time.Second {
		for i := range cfg.Machines {
			id := cfg.Machines[i].ID
			s := snapshotFrom(t, cfg, plant, id, start.Add(at))
			got, _ := evs[id].reuse.evaluate(s)
			want, _ := evs[id].fresh.evaluate(s)
			if got.Quality != want.Quality || !slices.Equal(got.Reasons, want.Reasons) || len(got.Figures) != len(want.Figures) {
				t.Fatalf("%s at %v: record %v %v (%d figures), fresh %v %v (%d)", id, at, got.Quality, got.Reasons, len(got.Figures), want.Quality, want.Reasons, len(want.Figures))
			}
			for k, g := range got.Figures {
				w := want.Figures[k]
				if g.Name != w.Name || g.Quality != w.Quality || g.HasU95 != w.HasU95 ||
					(math.Float64bits(g.Value) != math.Float64bits(w.Value) && !(math.IsNaN(g.Value) && math.IsNaN(w.Value))) {
					t.Fatalf("%s at %v: %+v, fresh %+v", id, at, g, w)
				}
				if g.HasU95 && w.U95 > 0 {
					d := math.Abs(g.U95-w.U95) / w.U95
					if d > sensReuseU95Bound {
						t.Errorf("%s at %v %s: U95 %v, fresh %v", id, at, g.Name, g.U95, w.U95)
					}
					if d > maxDev[id] {
						maxDev[id] = d
					}
				}
				if g.HasU95 && math.IsNaN(g.U95) {
					t.Errorf("%s at %v %s: NaN U95", id, at, g.Name)
				}
			}
		}
	}
	total := 0
	for _, m := range cfg.Machines {
		f, r := evs[m.ID].reuse.sens.Counts()
		ff, fr := evs[m.ID].fresh.sens.Counts()
		t.Logf("%s: %d fresh, %d reused sensitivities; max |dU95|/U95 %.2e", m.ID, f, r, maxDev[m.ID])
		if fr != 0 || ff != f+r {
			t.Errorf("%s: the fresh evaluator reused %d times (%d fresh, reuse evaluator %d)", m.ID, fr, ff, f+r)
		}
		total += r
	}
	if total == 0 {
		t.Error("no evaluator reused its sensitivities")
	}
}

// A stop forgets the sensitivities: the first evaluation after a restart
// computes them afresh even at the same operating point.
func TestEvaluatorStopForgetsSensitivities(t *testing.T) {
	cfg := demoCfg(t)
	start := time.Date(2026, 4, 1, 6, 0, 0, 0, time.UTC)
	o := plantsim.DemoOptions(start)
	o.Noiseless, o.StuckSensorAfter, o.SpikeProbability = true, 0, 0
	plant, err := plantsim.New(o, fluids.New)
	if err != nil {
		t.Fatal(err)
	}
	const id = "hp-turbine"
	e, err := newEvaluator(cfg, machineCfg(t, cfg, id), cfg.Keys()[id])
	if err != nil {
		t.Fatal(err)
	}
	at := 2 * time.Second
	s := snapshotFrom(t, cfg, plant, id, start.Add(at))
	tick := func(s *align.Snapshot) compute.Record {
		t.Helper()
		at += 2 * time.Second
		snap := &align.Snapshot{Machine: s.Machine, At: start.Add(at), From: start.Add(at - 2*time.Second), Values: s.Values}
		rec, _ := e.evaluate(snap)
		return rec
	}
	// Past the start-up time (10 s in demo.yaml), the same inputs every tick.
	for range 10 {
		tick(s)
	}
	f0, r0 := e.sens.Counts()
	if f0 != 1 || r0 < 3 {
		t.Fatalf("running at constant inputs: %d fresh, %d reused (want 1 fresh, the rest reused)", f0, r0)
	}
	stopped := &align.Snapshot{Machine: s.Machine, Values: maps.Clone(s.Values)}
	for k, v := range stopped.Values {
		if k.Quantity == "flow" {
			v.SI = 1 // kg/s, below the running condition (20 kg/s)
			stopped.Values[k] = v
		}
	}
	if rec := tick(stopped); !slices.Contains(rec.Reasons, reasonNotRunning) {
		t.Fatalf("not stopped: %v", rec.Reasons)
	}
	for range 8 { // start-up again
		tick(s)
	}
	f1, _ := e.sens.Counts()
	if f1 != f0+1 {
		t.Errorf("after a stop: %d fresh evaluations, want %d", f1, f0+1)
	}
}

// BenchmarkEvaluateMachineSensReuse is BenchmarkEvaluateMachine (the
// daemon's per-tick evaluation of each demo machine on 1-minute snapshots
// of the synthetic year data) with the sensitivity cache off (fresh: every
// evaluation runs the central differences) and on (reuse, the daemon's
// default), in one run so the two can be compared on a shared machine.
// reused/op is the share of evaluations that reused sensitivities.
//
//	go test -run XXX -bench EvaluateMachineSensReuse -benchtime 2000x -count 5 ./cmd/exergywatch/
func BenchmarkEvaluateMachineSensReuse(b *testing.B) {
	cfg, p, snaps := evaluationBench(b)
	defer p.close()
	keys := cfg.Keys()
	for _, id := range p.order {
		for _, mode := range []string{"fresh", "reuse"} {
			b.Run(id+"/"+mode, func(b *testing.B) {
				ss := snaps[id]
				m := &cfg.Machines[slicesIndex(cfg, id)]
				var e *evaluator
				var fresh, reused int
				renew := func() {
					if e != nil {
						f, r := e.sens.Counts()
						fresh, reused = fresh+f, reused+r
					}
					var err error
					if e, err = newEvaluator(cfg, m, keys[id]); err != nil {
						b.Fatal(err)
					}
					if mode == "fresh" {
						e.sens.ReuseFraction = -1
					}
				}
				renew()
				i := 0
				for b.Loop() {
					if i == len(ss) {
						b.StopTimer()
						renew()
						i = 0
						b.StartTimer()
					}
					e.evaluate(ss[i])
					i++
				}
				f, r := e.sens.Counts()
				fresh, reused = fresh+f, reused+r
				if fresh+reused > 0 {
					b.ReportMetric(float64(reused)/float64(fresh+reused), "reused/op")
				}
			})
		}
	}
}
