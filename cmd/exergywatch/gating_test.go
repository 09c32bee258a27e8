package main

// Steady-state gating through the daemon's evaluator, on a fake clock:
// snapshots are built by hand from the noise-free simulator (mapped to SI
// by the real tag map) and fed to the evaluator the pipeline uses.

import (
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/cmd/exergywatch/internal/plantsim"
	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/config"
	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/align"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
)

// gateRig evaluates one demo machine from noise-free simulator values.
type gateRig struct {
	t      *testing.T
	e      *evaluator
	mapper *tagmap.Mapper
	plant  *plantsim.Plant
	id     string
	start  time.Time
}

func newGateRig(t *testing.T, id string) *gateRig {
	cfg, err := config.Parse("demo.yaml", demoConfig)
	if err != nil {
		t.Fatal(err)
	}
	mapper, err := tagmap.Compile(cfg.TagMap)
	if err != nil {
		t.Fatal(err)
	}
	var m *config.Machine
	for i := range cfg.Machines {
		if cfg.Machines[i].ID == id {
			m = &cfg.Machines[i]
		}
	}
	e, err := newEvaluator(cfg, m, cfg.Keys()[id])
	if err != nil {
		t.Fatal(err)
	}
	start := time.Date(2026, 6, 1, 8, 0, 0, 0, time.UTC)
	plant := newPlant(t, plantsim.Options{Seed: 1, Start: start, Noiseless: true})
	return &gateRig{t: t, e: e, mapper: mapper, plant: plant, id: id, start: start}
}

// tick evaluates the machine at start+at; edit may change the SI values
// (key quantity@port) or delete them (a missing value is sent as Bad,
// no_data, as align does).
func (g *gateRig) tick(at time.Duration, edit func(map[string]float64)) compute.Record {
	g.t.Helper()
	now := g.start.Add(at)
	rs, err := g.plant.Step(now)
	if err != nil {
		g.t.Fatal(err)
	}
	vals := map[string]float64{}
	keys := map[string]tagmap.Key{}
	for _, r := range rs {
		sig, si, reason := g.mapper.Map(&ingest.Sample{Tag: r.Tag, Value: r.Value, ReceiveTime: now})
		if sig == nil || sig.Machine != g.id || reason != ingest.ReasonNone {
			continue
		}
		k := sig.Key.Quantity + "@" + sig.Key.Port
		vals[k], keys[k] = si, sig.Key
	}
	if edit != nil {
		edit(vals)
	}
	snap := &align.Snapshot{Machine: g.id, At: now, From: now.Add(-2 * time.Second), Values: map[tagmap.Key]align.Value{}}
	for k, key := range keys {
		v, ok := vals[k]
		if !ok {
			snap.Values[key] = align.Value{Quality: ingest.Bad, Reasons: ingest.Reasons(0).Add(ingest.ReasonNoData)}
			continue
		}
		snap.Values[key] = align.Value{SI: v, Quality: ingest.Good, Coverage: 1, Samples: 2, From: snap.From, To: now, Newest: now}
	}
	rec, _ := g.e.evaluate(snap)
	return rec
}

// TestSteadyVerdictDoesNotOutliveAStop: a machine that leaves the running
// mode (here its flow transmitter delivers nothing for three ticks, so the
// running condition fails) and comes back at another operating point must
// prove steady state again (warm-up samples plus dwell, demo.yaml: 10
// samples, 6 s) before a figure is published as good. The evaluator only
// updates the steady-state filters while running and keeps their old
// verdict otherwise; the first tick after the start-up time then reuses the
// "steady" of before the stop, and a single step of the key signals does
// not raise the R-statistic above its critical value (a step adds the same
// amount to the filtered variance and to the filtered squared difference,
// R = (2 - λ1) v²/d² = 1.8 < 2 with the default filter factors, Cao &
// Rhinehart 1995). Seen in the compressed demo scenario: the feed pump
// published a good figure in the middle of the load ramp.
func TestSteadyVerdictDoesNotOutliveAStop(t *testing.T) {
	g := newGateRig(t, "air-compressor")
	iv := 2 * time.Second // demo.yaml evaluation.interval
	at := time.Duration(0)
	var rec compute.Record
	for i := 0; i < 20; i++ { // start-up 10 s, warm-up 10 samples, dwell 6 s
		at += iv
		rec = g.tick(at, nil)
	}
	if rec.Quality != compute.QualityGood {
		t.Fatalf("precondition: after 40 s of steady running the record is %s %v", rec.Quality, rec.Reasons)
	}
	for i := 0; i < 3; i++ { // the flow transmitter fails: not running
		at += iv
		rec = g.tick(at, func(v map[string]float64) { delete(v, "flow@inlet") })
		if rec.Quality != compute.QualityBad {
			t.Fatalf("without flow the record is %s %v, want bad", rec.Quality, rec.Reasons)
		}
	}
	lower := func(v map[string]float64) { v["flow@inlet"] *= 0.8; v["p@outlet"] *= 0.97 }
	for i := 0; i < 5; i++ { // start-up time 10 s
		at += iv
		rec = g.tick(at, lower)
	}
	// Running again: the next 9 ticks cannot have passed a warm-up of 10
	// samples (demo.yaml steady: default warmup_samples 10).
	for i := 0; i < 9; i++ {
		at += iv
		rec = g.tick(at, lower)
		if rec.Quality == compute.QualityGood || rec.Quality == compute.QualityUncertain {
			t.Fatalf("tick %d after the restart: published as %s (reasons %v) before steady state was shown again", i+1, rec.Quality, rec.Reasons)
		}
	}
}
