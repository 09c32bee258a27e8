// Package compute holds the types that leave the compute stage: the derived
// Record of one machine evaluation and the alert Event. The machine models,
// windows, steady-state detection, baselines and alerts live in the
// sub-packages; sinks import only this package.
package compute

import (
	"fmt"
	"math"
	"time"
)

// Quality grades a derived figure or a whole record.
type Quality int

// Qualities, from best to worst. A Bad figure never reaches a sink as a plain
// number: sinks write its quality and reasons, not its value.
const (
	QualityGood      Quality = iota // steady, in range, inputs good
	QualityUncertain                // computed, but an input or check raises doubt (reasons say which)
	QualityTransient                // computed outside steady state; not for trending
	QualityBad                      // not usable; the value must not be published
)

var qualityNames = [...]string{"good", "uncertain", "transient", "bad"}

func (q Quality) String() string {
	if q < 0 || int(q) >= len(qualityNames) {
		return fmt.Sprintf("Quality(%d)", int(q))
	}
	return qualityNames[q]
}

// ParseQuality is the inverse of Quality.String.
func ParseQuality(s string) (Quality, error) {
	for i, n := range qualityNames {
		if n == s {
			return Quality(i), nil
		}
	}
	return QualityBad, fmt.Errorf("unknown quality %q (want good, uncertain, transient or bad)", s)
}

// Worse returns the worse of two qualities.
func Worse(a, b Quality) Quality {
	if b > a {
		return b
	}
	return a
}

// Figure is one derived number of an evaluation.
type Figure struct {
	// Name is the series name, snake_case with the SI unit as suffix where
	// the figure has one, e.g. "entropy_generation_rate_w_per_k",
	// "isentropic_efficiency" (dimensionless fraction).
	Name  string
	Value float64 // SI units as the name says; finite whenever Quality != QualityBad
	// U95 is the expanded uncertainty (coverage factor k = 2, about 95 %)
	// in the unit of Value; HasU95 is false when it was not evaluated.
	U95     float64
	HasU95  bool
	Quality Quality
	Reasons []string // machine-readable reason codes, e.g. "near_saturation"
}

// Record is one evaluation of one machine.
type Record struct {
	Time        time.Time // the evaluation time (end of the window), UTC
	Site        string    // site name from config
	Machine     string    // machine id from config
	MachineKind string    // "turbine", "pump", "compressor"
	Quality     Quality   // worst of the figures and of the inputs
	Reasons     []string  // reason codes for the record as a whole
	Figures     []Figure
}

// Validate checks the invariant that sinks rely on: every figure that is not
// Bad has a finite value and a finite, non-negative U95 when HasU95.
func (r *Record) Validate() error {
	if r.Machine == "" {
		return fmt.Errorf("record without machine id")
	}
	if r.Time.IsZero() {
		return fmt.Errorf("record for %s without time", r.Machine)
	}
	for _, f := range r.Figures {
		if f.Name == "" {
			return fmt.Errorf("record for %s: figure without name", r.Machine)
		}
		if f.Quality == QualityBad {
			continue
		}
		if math.IsNaN(f.Value) || math.IsInf(f.Value, 0) {
			return fmt.Errorf("record for %s: figure %s = %v is not finite but quality is %s", r.Machine, f.Name, f.Value, f.Quality)
		}
		if f.HasU95 && (math.IsNaN(f.U95) || math.IsInf(f.U95, 0) || f.U95 < 0) {
			return fmt.Errorf("record for %s: figure %s has invalid U95 %v", r.Machine, f.Name, f.U95)
		}
	}
	return nil
}

// AlertState is a state of an alert rule's state machine.
type AlertState int

// Alert states: inactive -> pending -> firing -> resolved (-> inactive).
const (
	AlertInactive AlertState = iota
	AlertPending
	AlertFiring
	AlertResolved
)

var alertStateNames = [...]string{"inactive", "pending", "firing", "resolved"}

func (s AlertState) String() string {
	if s < 0 || int(s) >= len(alertStateNames) {
		return fmt.Sprintf("AlertState(%d)", int(s))
	}
	return alertStateNames[s]
}

// AlertClass separates machine-performance alerts from instrument
// (data-quality) alerts: a stuck thermocouple is an instrument ticket, not a
// machine alarm.
type AlertClass string

// Alert classes.
const (
	AlertPerformance AlertClass = "performance"
	AlertDataQuality AlertClass = "data_quality"
)

// Event is one transition of an alert rule. Alerts are advisory.
type Event struct {
	Time    time.Time  // when the transition happened, UTC
	Site    string     // site name
	Machine string     // machine id
	Rule    string     // rule name from config
	Class   AlertClass // performance or data_quality
	Figure  string     // the figure or tag the rule watches
	From    AlertState
	To      AlertState
	Value   float64   // the value that caused the transition (finite)
	Limit   float64   // the threshold crossed, in the figure's unit
	U95     float64   // uncertainty of Value, 0 when unknown
	Since   time.Time // when the condition first became true
	Reason  string    // plain-language explanation for a person
}
