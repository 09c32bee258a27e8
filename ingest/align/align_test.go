package align

import (
	"math"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
	"go.uber.org/goleak"
)

func TestMain(m *testing.M) { goleak.VerifyTestMain(m) }

var t0 = time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC)

func at(s float64) time.Time { return t0.Add(time.Duration(s * float64(time.Second))) }

func newEngine(t *testing.T, cfg Config, tm tagmap.Config) (*Engine, *ingest.Metrics) {
	t.Helper()
	m, err := tagmap.Compile(tm)
	if err != nil {
		t.Fatal(err)
	}
	met := &ingest.Metrics{}
	e, err := New(cfg, m, met, nil)
	if err != nil {
		t.Fatal(err)
	}
	return e, met
}

func smp(tag string, ts float64, v float64) ingest.Sample {
	return ingest.Sample{Tag: tag, SourceTime: at(ts), ReceiveTime: at(ts), Value: v}
}

func TestTimeWeightedAverageZeroOrderHold(t *testing.T) {
	// Window [0, 60] s. Value 10 from before the window (t=-5) holds to t=10,
	// 20 holds 10..40, 40 holds 40..60: (10*10 + 20*30 + 40*20)/60 = 25
	// (zero-order hold time weighting, computed by hand). A sample-count
	// mean of the in-window samples would be 30.
	e, _ := newEngine(t, Config{Window: time.Minute, LateHorizon: 2 * time.Minute}, tagmap.Config{Tags: []tagmap.TagConfig{
		{Tag: "pt", Machine: "m1", Port: "inlet", Quantity: "p", Unit: "bar"},
	}})
	e.Ingest([]ingest.Sample{smp("pt", -5, 10), smp("pt", 10, 20), smp("pt", 40, 40)}, at(41))
	snaps := e.Evaluate(at(60))
	v := snaps[0].Values[tagmap.Key{Port: "inlet", Quantity: "p"}]
	if want := 25e5; math.Abs(v.SI-want) > 1e-6 || v.Quality != ingest.Good || v.Coverage != 1 || v.Samples != 2 {
		t.Fatalf("got %+v, want SI %g Pa, good, coverage 1, 2 samples", v, want)
	}
}

func TestGapFromBadSampleAndCoverage(t *testing.T) {
	// 100 K at 0..20, a bad-status sample at 20 opens a gap to 50, 110 K at
	// 50..60: average (100*20 + 110*10)/30 = 103.333 K over coverage 30/60
	// = 0.5 (hand computed). Min coverage 0.6 -> low_coverage, uncertain.
	e, _ := newEngine(t, Config{Window: time.Minute, MinCoverage: 0.6}, tagmap.Config{Tags: []tagmap.TagConfig{
		{Tag: "tt", Machine: "m1", Port: "inlet", Quantity: "T", Range: &tagmap.RangeConfig{Min: "1K", Max: "1000K"}},
	}})
	bad := smp("tt", 20, 500)
	bad.Quality = ingest.Bad
	e.Ingest([]ingest.Sample{smp("tt", 0, 100), bad, smp("tt", 50, 110)}, at(55))
	v := e.Evaluate(at(60))[0].Values[tagmap.Key{Port: "inlet", Quantity: "T"}]
	if math.Abs(v.SI-310.0/3) > 1e-9 || v.Coverage != 0.5 || v.Quality != ingest.Uncertain ||
		!v.Reasons.Has(ingest.ReasonLowCoverage) || !v.Reasons.Has(ingest.ReasonStatusBad) {
		t.Fatalf("got %+v reasons %v", v, v.Reasons)
	}
}

func TestBadInputCounted(t *testing.T) {
	e, met := newEngine(t, Config{Window: time.Minute, LateHorizon: 30 * time.Second, MaxFuture: 5 * time.Second}, tagmap.Config{Tags: []tagmap.TagConfig{
		{Tag: "pt", Machine: "m1", Port: "inlet", Quantity: "p"},
	}})
	now := at(100)
	acked := 0
	ack := ingest.NewAck(9, func() { acked++ })
	batch := []ingest.Sample{
		{Tag: "pt", SourceTime: at(99), Value: math.NaN()},
		{Tag: "pt", SourceTime: at(99), Value: math.Inf(1)},
		{Tag: "pt", SourceTime: time.Date(1999, 12, 31, 23, 0, 0, 0, time.UTC), Value: 1},
		{Tag: "pt", SourceTime: time.Date(9999, 1, 1, 0, 0, 0, 0, time.UTC), Value: 1},
		{Tag: "pt", SourceTime: at(50), Value: 1}, // 50 s old > 30 s horizon
		{Tag: "nope", SourceTime: at(99), Value: 1},
		{Tag: "pt", SourceTime: at(98), Value: 1e5},
		{Tag: "pt", SourceTime: at(98), Value: 1e5}, // duplicate
		{Tag: "pt", SourceTime: at(90), Value: 1e5}, // out of order, within horizon: kept
	}
	for i := range batch {
		batch[i].Ack = ack
	}
	e.Ingest(batch, now)
	for r, want := range map[ingest.Reason]uint64{ingest.ReasonNonFinite: 2, ingest.ReasonTimeTooOld: 1, ingest.ReasonTimeFuture: 1,
		ingest.ReasonLate: 1, ingest.ReasonUnmapped: 1, ingest.ReasonDuplicate: 1, ingest.ReasonOutOfOrder: 1} {
		if got := met.Reason(r); got != want {
			t.Errorf("reason %v counted %d, want %d", r, got, want)
		}
	}
	if got := met.Accepted.Load(); got != 2 {
		t.Errorf("accepted %d, want 2", got)
	}
	if acked != 0 || ack.Pending() != 2 {
		t.Fatalf("ack pending %d (acked %d), want 2 kept for the snapshot", ack.Pending(), acked)
	}
	snaps := e.Evaluate(at(101))
	if snaps[0].PendingAcks() != 2 {
		t.Fatalf("snapshot holds %d acks", snaps[0].PendingAcks())
	}
	snaps[0].Release()
	snaps[0].Release()
	if acked != 1 {
		t.Fatalf("message acked %d times, want once after release", acked)
	}
}

func TestGaugeScaleAndRedundancy(t *testing.T) {
	tm := tagmap.Config{SitePressure: "101.325kPa", Tags: []tagmap.TagConfig{
		{Tag: "baro", Quantity: "p", Unit: "hPa"},
		{Tag: "pg", Machine: "pump", Port: "discharge", Quantity: "p", Unit: "barg", BarometerTag: "baro"},
		{Tag: "ps", Machine: "pump", Port: "suction", Quantity: "p", Unit: "kPag"}, // site pressure
		// 4..20 mA -> 0..100 degC.
		{Tag: "ta", Machine: "pump", Port: "suction", Quantity: "T", Unit: "degC", Scale: &tagmap.ScaleConfig{RawMin: 4, RawMax: 20, EngMin: 0, EngMax: 100}},
		{Tag: "tb", Machine: "pump", Port: "suction", Quantity: "T", Unit: "degC", Scale: &tagmap.ScaleConfig{RawMin: 4, RawMax: 20, EngMin: 0, EngMax: 100}},
		{Tag: "f1", Machine: "pump", Port: "suction", Quantity: "flow", Unit: "t/h"},
		{Tag: "f2", Machine: "pump", Port: "suction", Quantity: "flow", Unit: "t/h"},
		{Tag: "f3", Machine: "pump", Port: "suction", Quantity: "flow", Unit: "t/h"},
		{Tag: "w1", Machine: "pump", Port: "shaft", Quantity: "power", Unit: "kW"},
		{Tag: "w2", Machine: "pump", Port: "shaft", Quantity: "power", Unit: "kW"},
	}, Groups: []tagmap.GroupConfig{
		{Name: "T", Mode: tagmap.AB, Tags: []string{"ta", "tb"}, Divergence: "1K"},
		{Name: "flow", Mode: tagmap.Median3, Tags: []string{"f1", "f2", "f3"}},
		{Name: "power", Mode: tagmap.Preferred, Tags: []string{"w1", "w2"}},
	}}
	e, _ := newEngine(t, Config{Window: 10 * time.Second}, tm)
	var b []ingest.Sample
	for _, s := range [][2]any{{"baro", 1000.0}, {"pg", 5.0}, {"ps", 20.0}, {"ta", 12.0}, {"tb", 12.32}, {"f1", 360.0}, {"f2", 365.0}, {"f3", 900.0}, {"w2", 750.0}} {
		b = append(b, smp(s[0].(string), 0, s[1].(float64)))
	}
	e.Ingest(b, at(1))
	snaps := e.Evaluate(at(10))
	if len(snaps) != 1 || snaps[0].Machine != "pump" {
		t.Fatalf("snapshots %+v", snaps)
	}
	vals := snaps[0].Values
	check := func(k tagmap.Key, want float64, q ingest.Quality, reasons ...ingest.Reason) {
		t.Helper()
		v := vals[k]
		if math.Abs(v.SI-want) > 1e-9*math.Abs(want) || v.Quality != q {
			t.Errorf("%v: got %g %v (%v), want %g %v", k, v.SI, v.Quality, v.Reasons, want, q)
		}
		for _, r := range reasons {
			if !v.Reasons.Has(r) {
				t.Errorf("%v: reason %v missing in %v", k, r, v.Reasons)
			}
		}
	}
	// 5 barg + barometer 1000 hPa = 600000 Pa (hand computed).
	check(tagmap.Key{Port: "discharge", Quantity: "p"}, 600000, ingest.Good)
	// 20 kPag + declared 101.325 kPa = 121325 Pa.
	check(tagmap.Key{Port: "suction", Quantity: "p"}, 121325, ingest.Good)
	// 12 mA -> 50 degC; 12.32 mA -> 52 degC; A/B mean 51 degC = 324.15 K,
	// divergence 2 K > 1 K flagged.
	check(tagmap.Key{Port: "suction", Quantity: "T"}, 324.15, ingest.Uncertain, ingest.ReasonDivergence)
	// Median of 360, 365, 900 t/h = 365 t/h = 101.3888... kg/s.
	check(tagmap.Key{Port: "suction", Quantity: "flow"}, 365000.0/3600, ingest.Good)
	// Preferred w1 missing -> w2 750 kW substituted.
	check(tagmap.Key{Port: "shaft", Quantity: "power"}, 750e3, ingest.Uncertain, ingest.ReasonSubstituted)
}

func TestSkewAndStale(t *testing.T) {
	e, _ := newEngine(t, Config{Window: time.Minute, MaxSkew: 5 * time.Second}, tagmap.Config{Tags: []tagmap.TagConfig{
		{Tag: "a", Machine: "m", Port: "inlet", Quantity: "p", Checks: tagmap.CheckConfig{StaleAfter: 30 * time.Second}},
		{Tag: "b", Machine: "m", Port: "outlet", Quantity: "p"},
	}})
	e.Ingest([]ingest.Sample{smp("a", 0, 1e5), smp("b", 0, 2e5), smp("b", 50, 2e5)}, at(51))
	s := e.Evaluate(at(60))[0]
	a := s.Values[tagmap.Key{Port: "inlet", Quantity: "p"}]
	// a's newest sample is 60 s old > 30 s: stale, bad; held only 30 s of the
	// window: coverage 0.5. Skew 50 s > 5 s.
	if a.Quality != ingest.Bad || !a.Reasons.Has(ingest.ReasonStale) || a.Coverage != 0.5 || !a.Reasons.Has(ingest.ReasonSkew) {
		t.Errorf("a: %+v %v", a, a.Reasons)
	}
	if s.Skew != 50*time.Second || !s.Reasons.Has(ingest.ReasonSkew) || s.Quality != ingest.Bad {
		t.Errorf("snapshot skew %v reasons %v quality %v", s.Skew, s.Reasons, s.Quality)
	}
}

// FuzzEngineIngest feeds arbitrary values, times and qualities: never a
// panic, never a silent NaN (a NaN value is always marked bad), and every
// sample either accepted or counted with a reason.
func FuzzEngineIngest(f *testing.F) {
	f.Add(uint8(0), 1e5, int64(0), uint8(0), uint8(0), 2e5, int64(1e9))
	f.Add(uint8(1), math.NaN(), int64(-1<<62), uint8(2), uint8(1), math.Inf(-1), int64(1<<62))
	f.Add(uint8(2), -1e308, int64(-3e9), uint8(1), uint8(2), 1e308, int64(-3e9))
	f.Fuzz(func(t *testing.T, tag uint8, v1 float64, dt1 int64, q1 uint8, tag2 uint8, v2 float64, dt2 int64) {
		e, met := newEngine(t, Config{Window: time.Minute, MaxSkew: time.Second}, tagmap.Config{SitePressure: "1bar", Tags: []tagmap.TagConfig{
			{Tag: "t0", Machine: "m", Port: "inlet", Quantity: "p", Unit: "barg", Checks: tagmap.CheckConfig{SpikeWindow: 3, MaxRatePerS: "1bar", StuckPeriod: time.Second}},
			{Tag: "t1", Machine: "m", Port: "outlet", Quantity: "T", Unit: "degF", Checks: tagmap.CheckConfig{StaleAfter: time.Second}},
			{Tag: "t2", Machine: "m", Port: "shaft", Quantity: "power", Scale: &tagmap.ScaleConfig{RawMin: 0, RawMax: 1, EngMin: 0, EngMax: 1e300}},
		}})
		now := at(100)
		names := []string{"t0", "t1", "t2", "tx"}
		mk := func(tag uint8, v float64, dt int64, q uint8) ingest.Sample {
			return ingest.Sample{Tag: names[int(tag)%4], SourceTime: now.Add(time.Duration(dt)), ReceiveTime: now, Value: v, Quality: ingest.Quality(q % 3)}
		}
		batch := []ingest.Sample{mk(tag, v1, dt1, q1), mk(tag2, v2, dt2, 0), mk(tag, v1, dt1, q1)}
		e.Ingest(batch, now)
		var dropped uint64
		for _, r := range []ingest.Reason{ingest.ReasonNonFinite, ingest.ReasonTimeTooOld, ingest.ReasonTimeFuture, ingest.ReasonUnmapped,
			ingest.ReasonDuplicate, ingest.ReasonLate, ingest.ReasonNoBarometer} {
			dropped += met.Reason(r)
		}
		if met.Accepted.Load()+dropped != 3 {
			t.Fatalf("accepted %d + dropped %d != 3", met.Accepted.Load(), dropped)
		}
		for _, s := range e.Evaluate(now.Add(time.Second)) {
			for k, v := range s.Values {
				if (math.IsNaN(v.SI) || math.IsInf(v.SI, 0)) && v.Quality != ingest.Bad {
					t.Fatalf("%v: non-finite %v with quality %v", k, v.SI, v.Quality)
				}
			}
		}
	})
}

func TestGapMarker(t *testing.T) {
	// The OPC UA source marks a lost session with a BadNoCommunication
	// sample: the hold stops there and the value says "gap". 5 bar held
	// 0..30 s, gap 30..50 s, 6 bar 50..60 s: (5*30 + 6*10)/40 = 5.25 bar
	// over coverage 40/60 (hand computed).
	e, met := newEngine(t, Config{Window: time.Minute}, tagmap.Config{Tags: []tagmap.TagConfig{
		{Tag: "pt", Machine: "m", Port: "inlet", Quantity: "p", Unit: "bar"}}})
	marker := smp("pt", 30, 0)
	marker.Quality, marker.HasStatus, marker.StatusCode = ingest.Bad, true, StatusBadNoCommunication
	e.Ingest([]ingest.Sample{smp("pt", 0, 5), marker, smp("pt", 50, 6)}, at(55))
	v := e.Evaluate(at(60))[0].Values[tagmap.Key{Port: "inlet", Quantity: "p"}]
	if math.Abs(v.SI-5.25e5) > 1e-6 || math.Abs(v.Coverage-40.0/60) > 1e-12 || !v.Reasons.Has(ingest.ReasonGap) || v.Quality != ingest.Uncertain {
		t.Fatalf("got %+v (%v)", v, v.Reasons)
	}
	if met.Reason(ingest.ReasonGap) != 1 {
		t.Fatalf("gap counted %d", met.Reason(ingest.ReasonGap))
	}
}
