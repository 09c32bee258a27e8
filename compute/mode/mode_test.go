package mode

import (
	"math"
	"testing"
	"time"
)

func TestModeSequence(t *testing.T) {
	t0 := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	d := Detector{Conditions: []Condition{{Signal: "flow@inlet", Above: 5}, {Signal: "speed@shaft", Above: 100, Below: 400}}, StartupTime: 30 * time.Second}
	steps := []struct {
		s          int
		flow, spd  float64
		want       Mode
		wantReason bool
	}{
		{0, 0, 0, NotRunning, true},
		{10, 10, 300, Starting, true},
		{30, 10, 300, Starting, true},
		{40, 10, 300, Running, false},
		{50, 10, 450, NotRunning, true}, // overspeed band exceeded
		{60, 10, 300, Starting, true},
		{70, math.NaN(), 300, NotRunning, true},
	}
	for _, s := range steps {
		m, why := d.Update(t0.Add(time.Duration(s.s)*time.Second), map[string]float64{"flow@inlet": s.flow, "speed@shaft": s.spd})
		if m != s.want || (why != "") != s.wantReason {
			t.Errorf("t=%ds: mode %v (%q), want %v", s.s, m, why, s.want)
		}
	}
	var always Detector
	if m, _ := always.Update(t0, nil); m != Running {
		t.Errorf("no conditions: %v", m)
	}
}
