package main

import (
	"errors"

	"github.com/exergywatch/exergywatch/compute/trend"
	"math"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/cmd/exergywatch/internal/plantsim"
	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/config"
	"github.com/exergywatch/exergywatch/config/units"
	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/align"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
	"github.com/exergywatch/exergywatch/thermo/fluids"
)

// snapshotFrom turns simulator readings into an aligned snapshot of one
// machine (every value good), as the align engine would after its window.
func snapshotFrom(t *testing.T, cfg *config.Config, plant *plantsim.Plant, machineID string, now time.Time) *align.Snapshot {
	t.Helper()
	rs, err := plant.Step(now)
	if err != nil {
		t.Fatal(err)
	}
	byTag := map[string]float64{}
	for _, r := range rs {
		byTag[r.Tag] = r.Value
	}
	s := &align.Snapshot{Machine: machineID, At: now, From: now.Add(-2 * time.Second), Values: map[tagmap.Key]align.Value{}}
	for _, tc := range cfg.TagMap.Tags {
		if tc.Machine != machineID {
			continue
		}
		u, err := units.Lookup(tc.Unit)
		if err != nil {
			t.Fatal(err)
		}
		v := byTag[tc.Tag]
		si := u.ToSIAbsolute(v, plantsim.BarometerPa)
		s.Values[tagmap.Key{Port: tc.Port, Quantity: tc.Quantity}] = align.Value{SI: si, Quality: ingest.Good, Coverage: 1, Samples: 2}
	}
	return s
}

func demoCfg(t *testing.T) *config.Config {
	t.Helper()
	cfg, err := config.Parse("demo.yaml", demoConfig)
	if err != nil {
		t.Fatal(err)
	}
	return cfg
}

func machineCfg(t *testing.T, cfg *config.Config, id string) *config.Machine {
	for i := range cfg.Machines {
		if cfg.Machines[i].ID == id {
			return &cfg.Machines[i]
		}
	}
	t.Fatalf("no machine %s", id)
	return nil
}

// During a load ramp no figure is published as good; at steady state the
// efficiency equals the simulator's true efficiency (noise-free plant, so the
// only difference is the model: it must agree to 1e-6, common practice for a
// self-consistency check).
func TestEvaluatorGatesTransients(t *testing.T) {
	cfg := demoCfg(t)
	start := time.Date(2026, 4, 1, 6, 0, 0, 0, time.UTC)
	o := plantsim.DemoOptions(start)
	o.Noiseless, o.StuckSensorAfter, o.SpikeProbability = true, 0, 0
	o.Noiseless = false // the R-statistic needs noise to tell steady from a ramp
	plant, err := plantsim.New(o, fluids.New)
	if err != nil {
		t.Fatal(err)
	}
	keys := cfg.Keys()
	e, err := newEvaluator(cfg, machineCfg(t, cfg, "hp-turbine"), keys["hp-turbine"])
	if err != nil {
		t.Fatal(err)
	}
	var goodBefore, goodDuringRamp, transientDuringRamp int
	for at := 2 * time.Second; at < o.LoadChangeAfter+o.LoadRamp; at += 2 * time.Second {
		rec, _ := e.evaluate(snapshotFrom(t, cfg, plant, "hp-turbine", start.Add(at)))
		if err := rec.Validate(); err != nil {
			t.Fatalf("at %v: %v", at, err)
		}
		// The detector sees a ramp from its second sample on (the first
		// step of 2.5 % load is inside one tick's detection delay).
		ramp := at > o.LoadChangeAfter+4*time.Second
		good := rec.Quality == compute.QualityGood
		switch {
		case ramp && good:
			goodDuringRamp++
		case ramp && rec.Quality == compute.QualityTransient:
			transientDuringRamp++
		case !ramp && good && at > 60*time.Second:
			goodBefore++
			eta, _ := figureValue(&rec, "isentropic_efficiency")
			want, _ := plant.TrueEfficiency("hp-turbine", at)
			if math.Abs(eta-want) > 0.01 { // noise of 0.3 K on 50 K of expansion temperature drop: about 1 point, 2 sigma (from the U95)
				t.Errorf("at %v: eta %.4f, simulated %.4f", at, eta, want)
			}
		}
	}
	if goodBefore < 10 {
		t.Errorf("only %d good records before the load change", goodBefore)
	}
	if goodDuringRamp > 0 {
		t.Errorf("%d records published as good during the load ramp", goodDuringRamp)
	}
	if transientDuringRamp < 5 {
		t.Errorf("only %d transient records during the ramp", transientDuringRamp)
	}
}

// Across a local midnight the evaluator emits one daily record with the
// steady coverage and the statistics of the steady efficiency.
func TestEvaluatorDailyAggregate(t *testing.T) {
	cfg := demoCfg(t)
	cfg.Evaluation.Interval = config.Duration(time.Minute)
	start := time.Date(2026, 4, 1, 22, 0, 0, 0, time.UTC)
	o := plantsim.Options{Seed: 3, Start: start}
	plant, err := plantsim.New(o, fluids.New)
	if err != nil {
		t.Fatal(err)
	}
	keys := cfg.Keys()
	e, err := newEvaluator(cfg, machineCfg(t, cfg, "air-compressor"), keys["air-compressor"])
	if err != nil {
		t.Fatal(err)
	}
	var daily []compute.Record
	for at := time.Minute; at <= 2*time.Hour+time.Minute; at += time.Minute {
		_, _ = e.evaluate(snapshotFrom(t, cfg, plant, "air-compressor", start.Add(at)))
		daily = append(daily, e.takeDaily()...)
	}
	if len(daily) != 1 {
		t.Fatalf("%d daily records, want 1", len(daily))
	}
	d := daily[0]
	if !d.Time.Equal(time.Date(2026, 4, 2, 0, 0, 0, 0, time.UTC)) {
		t.Errorf("daily record at %v, want midnight UTC", d.Time)
	}
	got := map[string]float64{}
	for _, f := range d.Figures {
		got[f.Name] = f.Value
	}
	// Steady for most of the 119 minutes before midnight, less the warm-up
	// (10 samples) and the R-statistic's false alarms on noise (each restarts
	// the dwell), out of the day's 1440 minutes.
	if c := got["steady_coverage_daily"]; c < 60.0/1440 || c > 119.0/1440 {
		t.Errorf("coverage %v (%.0f min), want between 60 and 119 minutes of the day", c, c*1440)
	}
	if m := got["isentropic_efficiency_daily_mean"]; math.Abs(m-0.84) > 0.005 {
		t.Errorf("daily mean %v, want about the simulated 0.84", m)
	}
}

// A fouled air compressor costs extra power: ΔP = P (1 − η/η_b)
// (compute/baseline), positive, and priced at the site's energy price.
func TestEvaluatorDegradationCost(t *testing.T) {
	cfg := demoCfg(t)
	start := time.Date(2026, 4, 1, 6, 0, 0, 0, time.UTC)
	o := plantsim.DemoOptions(start)
	o.LoadChangeAfter, o.StuckSensorAfter, o.SpikeProbability = 0, 0, 0
	plant, err := plantsim.New(o, fluids.New)
	if err != nil {
		t.Fatal(err)
	}
	keys := cfg.Keys()
	e, err := newEvaluator(cfg, machineCfg(t, cfg, "air-compressor"), keys["air-compressor"])
	if err != nil {
		t.Fatal(err)
	}
	var rec compute.Record
	for at := 2 * time.Second; at <= 3*time.Minute; at += 2 * time.Second {
		rec, _ = e.evaluate(snapshotFrom(t, cfg, plant, "air-compressor", start.Add(at)))
	}
	got := map[string]compute.Figure{}
	for _, f := range rec.Figures {
		got[f.Name] = f
	}
	eta, p, dp, cost := got["isentropic_efficiency"], got["power_w"], got[config.DegradationPowerFigure], got[config.DegradationCostFigure]
	if dp.Quality == compute.QualityBad || dp.Value <= 0 {
		t.Fatalf("degradation power %+v, want positive", dp)
	}
	want := p.Value * (1 - eta.Value/0.84)
	if math.Abs(dp.Value-want) > 1e-9*want {
		t.Errorf("ΔP = %v, want P(1-η/η_b) = %v", dp.Value, want)
	}
	// Price 60 per MWh from demo.yaml: cost per hour = ΔP/1e6 * 60.
	if math.Abs(cost.Value-dp.Value/1e6*60) > 1e-9 {
		t.Errorf("cost %v, want %v", cost.Value, dp.Value/1e6*60)
	}
}

// A daemon restart in mid-day (state saved and restored into a new
// evaluator, as runDaemon does through the state store) gives the same
// daily aggregate as an uninterrupted run: the evening before midnight is
// not lost. The simulated plant is deterministic for a seed, so both runs
// see the same readings.
func TestEvaluatorDailyAggregateSurvivesRestart(t *testing.T) {
	cfg := demoCfg(t)
	cfg.Evaluation.Interval = config.Duration(time.Minute)
	start := time.Date(2026, 4, 1, 22, 0, 0, 0, time.UTC)
	keys := cfg.Keys()
	run := func(restartAfter time.Duration) []compute.Record {
		plant, err := plantsim.New(plantsim.Options{Seed: 3, Start: start}, fluids.New)
		if err != nil {
			t.Fatal(err)
		}
		e, err := newEvaluator(cfg, machineCfg(t, cfg, "air-compressor"), keys["air-compressor"])
		if err != nil {
			t.Fatal(err)
		}
		var daily []compute.Record
		for at := time.Minute; at <= 2*time.Hour+time.Minute; at += time.Minute {
			if at == restartAfter {
				b, err := e.marshalState()
				if err != nil {
					t.Fatal(err)
				}
				if e, err = newEvaluator(cfg, machineCfg(t, cfg, "air-compressor"), keys["air-compressor"]); err != nil {
					t.Fatal(err)
				}
				if err := e.restoreState(b); err != nil {
					t.Fatal(err)
				}
			}
			_, _ = e.evaluate(snapshotFrom(t, cfg, plant, "air-compressor", start.Add(at)))
			daily = append(daily, e.takeDaily()...)
		}
		return daily
	}
	want := run(-1)
	got := run(90 * time.Minute)
	if len(want) != 1 || len(got) != 1 {
		t.Fatalf("daily records: %d uninterrupted, %d with a restart; want 1 each", len(want), len(got))
	}
	wf, gf := map[string]float64{}, map[string]float64{}
	for _, f := range want[0].Figures {
		wf[f.Name] = f.Value
	}
	for _, f := range got[0].Figures {
		gf[f.Name] = f.Value
	}
	if len(wf) == 0 {
		t.Fatal("the daily record has no figures")
	}
	for name, v := range wf {
		if g, ok := gf[name]; !ok || g != v {
			t.Errorf("%s = %v after a restart, %v uninterrupted", name, g, v)
		}
	}
}

// A saved day from another time zone (the site's timezone was changed
// between runs) is refused with a clear error and the rest of the state is
// still applied.
func TestEvaluatorRestoreDailyOtherZone(t *testing.T) {
	cfg := demoCfg(t)
	cfg.Site.Timezone = "UTC"
	keys := cfg.Keys()
	start := time.Date(2026, 4, 1, 23, 0, 0, 0, time.UTC)
	plant, err := plantsim.New(plantsim.Options{Seed: 3, Start: start}, fluids.New)
	if err != nil {
		t.Fatal(err)
	}
	e, err := newEvaluator(cfg, machineCfg(t, cfg, "air-compressor"), keys["air-compressor"])
	if err != nil {
		t.Fatal(err)
	}
	for at := time.Minute; at <= 20*time.Minute; at += time.Minute {
		e.evaluate(snapshotFrom(t, cfg, plant, "air-compressor", start.Add(at)))
	}
	b, err := e.marshalState()
	if err != nil {
		t.Fatal(err)
	}
	cfg.Site.Timezone = "Asia/Tokyo" // 23:20 UTC is the next morning there
	e2, err := newEvaluator(cfg, machineCfg(t, cfg, "air-compressor"), keys["air-compressor"])
	if err != nil {
		t.Fatal(err)
	}
	err = e2.restoreState(b)
	if !errors.Is(err, trend.ErrStateMismatch) {
		t.Fatalf("restore into another zone: err = %v, want trend.ErrStateMismatch", err)
	}
	if e2.mode.S != e.mode.S {
		t.Errorf("mode state not restored alongside the refused day: %+v, want %+v", e2.mode.S, e.mode.S)
	}
}
