// Package mode decides a machine's operating mode from configured
// conditions: not running, starting (conditions met for less than the
// start-up time) and running. Figures are evaluated only when running.
// Time is a parameter.
package mode

import (
	"fmt"
	"math"
	"time"
)

// Mode is an operating mode.
type Mode int

// Modes.
const (
	NotRunning Mode = iota
	Starting
	Running
)

var names = [...]string{"not_running", "starting", "running"}

func (m Mode) String() string {
	if m < 0 || int(m) >= len(names) {
		return fmt.Sprintf("Mode(%d)", int(m))
	}
	return names[m]
}

// Condition is one running condition: the SI value of Signal must exceed
// Above (and, when Below is set, stay under it).
type Condition struct {
	Signal string  // a snapshot key, e.g. "flow@inlet"
	Above  float64 // SI units of the signal
	Below  float64 // SI units; 0 means no upper limit
}

// Detector tracks the mode of one machine. The zero value with no
// conditions is always running.
type Detector struct {
	Conditions []Condition
	// StartupTime: conditions must hold this long before the machine counts
	// as running; before that it is starting.
	StartupTime time.Duration
	S           State
}

// State is the persisted state.
type State struct {
	Mode     Mode      `json:"mode"`
	MetSince time.Time `json:"met_since"`
}

// Update evaluates the conditions on values (SI, keyed by signal) at now.
// A missing or non-finite signal counts as not met, and the reason is
// returned.
func (d *Detector) Update(now time.Time, values map[string]float64) (Mode, string) {
	met, why := true, ""
	for _, c := range d.Conditions {
		v, ok := values[c.Signal]
		switch {
		case !ok || math.IsNaN(v) || math.IsInf(v, 0):
			met, why = false, fmt.Sprintf("%s has no usable value", c.Signal)
		case v <= c.Above:
			met, why = false, fmt.Sprintf("%s = %.4g is not above %.4g", c.Signal, v, c.Above)
		case c.Below != 0 && v >= c.Below:
			met, why = false, fmt.Sprintf("%s = %.4g is not below %.4g", c.Signal, v, c.Below)
		}
		if !met {
			break
		}
	}
	if !met {
		d.S = State{Mode: NotRunning}
		return NotRunning, why
	}
	if d.S.MetSince.IsZero() || d.S.Mode == NotRunning {
		d.S.MetSince = now
	}
	if now.Sub(d.S.MetSince) >= d.StartupTime {
		d.S.Mode = Running
		return Running, ""
	}
	d.S.Mode = Starting
	return Starting, fmt.Sprintf("running conditions met for %v of the %v start-up time", now.Sub(d.S.MetSince).Round(time.Second), d.StartupTime)
}
