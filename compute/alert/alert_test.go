package alert

import (
	"encoding/json"
	"math"
	"strings"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/compute"
)

var t0 = time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)

func rule() Rule {
	return Rule{Name: "eta-low", Machine: "air-compressor", Class: compute.AlertPerformance,
		Figure: "isentropic_efficiency", Kind: Threshold, Below: true, Limit: 0.80, Hysteresis: 0.01,
		PendingFor: 20 * time.Second, ClearFor: 20 * time.Second}
}

// A scripted sequence (values and expected transitions worked out by hand
// from the state machine's definition: pending on the first value under
// 0.80, firing after 20 s under it, clearing only above 0.81 held for 20 s).
func TestScriptedHysteresisAndHold(t *testing.T) {
	m, err := New("quillmoor", rule())
	if err != nil {
		t.Fatal(err)
	}
	steps := []struct {
		dt   time.Duration
		v    float64
		want compute.AlertState
		ev   bool
	}{
		{0, 0.83, compute.AlertInactive, false},
		{10 * time.Second, 0.79, compute.AlertPending, true},
		{20 * time.Second, 0.805, compute.AlertInactive, true}, // back above before the hold: not raised
		{30 * time.Second, 0.79, compute.AlertPending, true},
		{40 * time.Second, 0.795, compute.AlertPending, false},
		{50 * time.Second, 0.79, compute.AlertFiring, true},   // 20 s under the limit
		{60 * time.Second, 0.805, compute.AlertFiring, false}, // above the limit but inside the hysteresis band
		{70 * time.Second, 0.815, compute.AlertFiring, false}, // clear run starts
		{80 * time.Second, 0.799, compute.AlertFiring, false}, // clear run broken
		{90 * time.Second, 0.82, compute.AlertFiring, false},
		{110 * time.Second, 0.82, compute.AlertResolved, true},
		{120 * time.Second, 0.83, compute.AlertInactive, false},
	}
	for i, s := range steps {
		ev, err := m.Observe(t0.Add(s.dt), s.v, 0.005, compute.QualityGood)
		if err != nil {
			t.Fatal(err)
		}
		if m.S.State != s.want {
			t.Errorf("step %d (t=%v v=%v): state %v, want %v", i, s.dt, s.v, m.S.State, s.want)
		}
		if (ev != nil) != s.ev {
			t.Errorf("step %d: event %+v, want event=%v", i, ev, s.ev)
		}
	}
}

func TestHoveringRaisesOnceClearsOnce(t *testing.T) {
	m, _ := New("quillmoor", rule())
	fired, resolved := 0, 0
	now := t0
	// 10 minutes hovering within ±0.004 of the limit, then recovery.
	for i := 0; i < 120; i++ {
		now = now.Add(5 * time.Second)
		v := 0.80 + 0.004*math.Sin(float64(i))
		if i < 10 {
			v = 0.79
		}
		ev, _ := m.Observe(now, v, 0, compute.QualityGood)
		if ev != nil && ev.To == compute.AlertFiring {
			fired++
		}
		if ev != nil && ev.To == compute.AlertResolved {
			resolved++
		}
	}
	for i := 0; i < 10; i++ {
		now = now.Add(5 * time.Second)
		if ev, _ := m.Observe(now, 0.83, 0, compute.QualityGood); ev != nil && ev.To == compute.AlertResolved {
			resolved++
		}
	}
	if fired != 1 || resolved != 1 {
		t.Fatalf("fired %d times, resolved %d times; want 1 and 1", fired, resolved)
	}
}

func TestTransientHoldsState(t *testing.T) {
	r := rule()
	r.PendingFor = 0
	m, _ := New("quillmoor", r)
	m.Observe(t0, 0.70, 0, compute.QualityGood)
	if m.S.State != compute.AlertFiring {
		t.Fatalf("state %v", m.S.State)
	}
	for _, q := range []compute.Quality{compute.QualityTransient, compute.QualityBad} {
		if ev, _ := m.Observe(t0.Add(time.Minute), 0.95, 0, q); ev != nil || m.S.State != compute.AlertFiring {
			t.Errorf("%v observation moved the rule: %+v", q, ev)
		}
	}
	if _, err := m.Observe(t0, math.NaN(), 0, compute.QualityGood); err != ErrNotFinite {
		t.Errorf("NaN: %v", err)
	}
}

func TestDeviationAndRate(t *testing.T) {
	d := rule()
	d.Kind, d.Baseline, d.Limit, d.Hysteresis, d.PendingFor = Deviation, 0.84, -0.02, 0.005, 0
	m, _ := New("quillmoor", d)
	if ev, _ := m.Observe(t0, 0.815, 0, compute.QualityGood); ev == nil || ev.To != compute.AlertFiring || math.Abs(ev.Value-(-0.025)) > 1e-12 {
		t.Fatalf("deviation rule: %+v", ev)
	}

	r := rule()
	r.Kind, r.Below, r.Limit, r.RateWindow, r.PendingFor = Rate, true, -0.01, time.Hour, 0 // falling faster than 1 point per hour
	rm, _ := New("quillmoor", r)
	var last *compute.Event
	for i := 0; i < 10; i++ {
		// 0.5 points per 10 minutes = 3 points per hour falling: slope -0.03/h exactly.
		ev, _ := rm.Observe(t0.Add(time.Duration(i)*10*time.Minute), 0.85-0.005*float64(i), 0, compute.QualityGood)
		if ev != nil {
			last = ev
		}
	}
	if last == nil || last.To != compute.AlertFiring || math.Abs(rm.S.LastValue-(-0.03)) > 1e-9 {
		t.Fatalf("rate rule: last event %+v, slope %v (want -0.03 per hour)", last, rm.S.LastValue)
	}
	if len(rm.S.Points) > 7 {
		t.Errorf("rate window keeps %d points, want at most 7 in one hour at 10-minute spacing", len(rm.S.Points))
	}
}

func TestStatePersistsAsJSON(t *testing.T) {
	r := rule()
	r.PendingFor = 0
	m, _ := New("quillmoor", r)
	m.Observe(t0, 0.7, 0.01, compute.QualityGood)
	b, err := json.Marshal(m.S)
	if err != nil {
		t.Fatal(err)
	}
	m2, _ := New("quillmoor", r)
	if err := json.Unmarshal(b, &m2.S); err != nil {
		t.Fatal(err)
	}
	// After a restart the rule is still firing: the same low value raises nothing new.
	if ev, _ := m2.Observe(t0.Add(time.Minute), 0.7, 0.01, compute.QualityGood); ev != nil || m2.S.State != compute.AlertFiring {
		t.Fatalf("restored rule re-fired or lost state: %+v %v", ev, m2.S.State)
	}
}

func TestReasonExplains(t *testing.T) {
	r := rule()
	r.PendingFor, r.Advice = 0, "Inspect the inlet filter and plan an offline wash"
	m, _ := New("quillmoor", r)
	ev, _ := m.Observe(t0, 0.78, 0.012, compute.QualityGood)
	for _, want := range []string{"isentropic_efficiency", "air-compressor", "0.78", "0.8", "U95", "inlet filter", "Advisory"} {
		if !strings.Contains(ev.Reason, want) {
			t.Errorf("reason %q lacks %q", ev.Reason, want)
		}
	}
}

func TestValidate(t *testing.T) {
	bad := []Rule{{}, {Name: "x", Figure: "f", Kind: "odd", Class: compute.AlertPerformance},
		{Name: "x", Figure: "f", Kind: Rate, Class: compute.AlertPerformance},
		{Name: "x", Figure: "f", Kind: Threshold, Class: "other"},
		{Name: "x", Figure: "f", Kind: Threshold, Class: compute.AlertPerformance, Hysteresis: -1}}
	for _, r := range bad {
		if r.Validate() == nil {
			t.Errorf("%+v validated", r)
		}
	}
}
