// Package alert runs alert rules as explicit state machines:
//
//	inactive --condition--> pending --held for PendingFor--> firing
//	pending  --condition gone--> inactive
//	firing   --clear condition held for ClearFor--> resolved --> inactive
//
// The clear condition has hysteresis: a "below" rule that fires under Limit
// clears only above Limit + Hysteresis, so a value hovering around the
// limit raises once and clears once. Figures that are transient or bad do
// not move a rule (the state is held), so start-ups and ramps neither raise
// nor clear alerts.
//
// Alerts are advisory: they support people, who act under site procedures.
// Time is a parameter: Observe takes now from the caller.
package alert

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"time"

	"github.com/exergywatch/exergywatch/compute"
)

// Kind is what a rule compares with its limit.
type Kind string

// Rule kinds.
const (
	// Threshold compares the figure's value.
	Threshold Kind = "threshold"
	// Deviation compares value - Baseline.
	Deviation Kind = "deviation"
	// Rate compares the least-squares slope of the value over RateWindow,
	// per hour.
	Rate Kind = "rate"
)

// Rule is one alert rule of one machine.
type Rule struct {
	Name    string             // unique per machine
	Machine string             // machine id
	Class   compute.AlertClass // performance or data_quality
	Figure  string             // figure name, or a data-quality reason code for data_quality rules
	Kind    Kind
	Below   bool    // true: the condition is value < Limit; false: value > Limit
	Limit   float64 // in the figure's unit (for Rate: unit per hour)
	// Hysteresis (>= 0): a firing rule clears only when the value is past
	// Limit by this much in the other direction.
	Hysteresis float64
	Baseline   float64       // Deviation rules: the reference value
	RateWindow time.Duration // Rate rules: the slope window
	PendingFor time.Duration // the condition must hold this long before firing
	ClearFor   time.Duration // the clear condition must hold this long before resolving
	Advice     string        // optional text for people, appended to the reason
}

// Validate checks a rule.
func (r Rule) Validate() error {
	var errs []string
	if r.Name == "" {
		errs = append(errs, "name is empty")
	}
	if r.Figure == "" {
		errs = append(errs, "figure is empty")
	}
	switch r.Kind {
	case Threshold, Deviation:
	case Rate:
		if r.RateWindow <= 0 {
			errs = append(errs, "rate rules need a positive rate window")
		}
	default:
		errs = append(errs, fmt.Sprintf("kind %q is not threshold, deviation or rate", r.Kind))
	}
	if r.Class != compute.AlertPerformance && r.Class != compute.AlertDataQuality {
		errs = append(errs, fmt.Sprintf("class %q is not performance or data_quality", r.Class))
	}
	if math.IsNaN(r.Limit) || math.IsInf(r.Limit, 0) || math.IsNaN(r.Baseline) || math.IsInf(r.Baseline, 0) {
		errs = append(errs, "limit and baseline must be finite")
	}
	if r.Hysteresis < 0 || math.IsNaN(r.Hysteresis) {
		errs = append(errs, "hysteresis must be >= 0")
	}
	if r.PendingFor < 0 || r.ClearFor < 0 {
		errs = append(errs, "hold times must be >= 0")
	}
	if len(errs) > 0 {
		return fmt.Errorf("alert rule %q: %s", r.Name, strings.Join(errs, "; "))
	}
	return nil
}

// State is the persisted state of one rule.
type State struct {
	State        compute.AlertState `json:"state"`
	Since        time.Time          `json:"since"`         // when the condition first became true (pending/firing)
	FiringSince  time.Time          `json:"firing_since"`  // when it fired
	ClearSince   time.Time          `json:"clear_since"`   // start of the current clear run while firing
	LastValue    float64            `json:"last_value"`    // the compared value at the last observation
	LastU95      float64            `json:"last_u95"`      // its uncertainty
	LastObserved time.Time          `json:"last_observed"` // time of the last observation
	// Points is the rate window (times and values) for Rate rules.
	Points []Point `json:"points,omitempty"`
}

// Point is a (time, value) pair of a Rate rule's window.
type Point struct {
	T time.Time `json:"t"`
	V float64   `json:"v"`
}

// Machine runs one rule. Not safe for concurrent use.
type Machine struct {
	Rule Rule
	S    State
	site string
}

// ErrNotFinite: an observation was NaN or infinite; the state is unchanged.
var ErrNotFinite = errors.New("alert: value is not finite")

// New returns the state machine of a rule, inactive.
func New(site string, r Rule) (*Machine, error) {
	if err := r.Validate(); err != nil {
		return nil, err
	}
	return &Machine{Rule: r, site: site}, nil
}

// Observe feeds the figure's value at now with its U95 and quality, and
// returns the transition it caused, if any. Transient and bad observations
// hold the state and return nil.
func (m *Machine) Observe(now time.Time, value, u95 float64, q compute.Quality) (*compute.Event, error) {
	if q == compute.QualityTransient || q == compute.QualityBad {
		return nil, nil
	}
	if math.IsNaN(value) || math.IsInf(value, 0) {
		return nil, ErrNotFinite
	}
	r, s := m.Rule, &m.S
	v := value
	switch r.Kind {
	case Deviation:
		v = value - r.Baseline
	case Rate:
		s.Points = append(s.Points, Point{T: now, V: value})
		cut := 0
		for cut < len(s.Points) && now.Sub(s.Points[cut].T) > r.RateWindow {
			cut++
		}
		s.Points = s.Points[cut:]
		slope, ok := slopePerHour(s.Points)
		if !ok {
			s.LastObserved = now
			return nil, nil // not enough points for a slope yet
		}
		v = slope
	}
	s.LastValue, s.LastU95, s.LastObserved = v, u95, now
	cond := (r.Below && v < r.Limit) || (!r.Below && v > r.Limit)
	clear := (r.Below && v > r.Limit+r.Hysteresis) || (!r.Below && v < r.Limit-r.Hysteresis)

	from := s.State
	switch s.State {
	case compute.AlertInactive, compute.AlertResolved:
		s.State = compute.AlertInactive
		if cond {
			s.State, s.Since = compute.AlertPending, now
			if r.PendingFor == 0 {
				s.State, s.FiringSince, s.ClearSince = compute.AlertFiring, now, time.Time{}
			}
		}
	case compute.AlertPending:
		switch {
		case !cond:
			s.State, s.Since = compute.AlertInactive, time.Time{}
		case now.Sub(s.Since) >= r.PendingFor:
			s.State, s.FiringSince, s.ClearSince = compute.AlertFiring, now, time.Time{}
		}
	case compute.AlertFiring:
		if clear {
			if s.ClearSince.IsZero() {
				s.ClearSince = now
			}
			if now.Sub(s.ClearSince) >= r.ClearFor {
				s.State = compute.AlertResolved
			}
		} else {
			s.ClearSince = time.Time{}
		}
	}
	if s.State == from || (from == compute.AlertResolved && s.State == compute.AlertInactive) {
		return nil, nil
	}
	// Report the transitions people care about: pending (quietly logged),
	// firing and resolved. pending -> inactive is reported too, so a
	// consumer tracking state never sees a dangling pending.
	ev := &compute.Event{
		Time: now.UTC(), Site: m.site, Machine: r.Machine, Rule: r.Name, Class: r.Class,
		Figure: r.Figure, From: from, To: s.State, Value: v, Limit: r.Limit, U95: u95,
		Since: s.Since.UTC(),
	}
	ev.Reason = m.reason(ev)
	return ev, nil
}

func slopePerHour(ps []Point) (float64, bool) {
	if len(ps) < 3 {
		return 0, false
	}
	t0 := ps[0].T
	var n, st, sv, stt, stv float64
	for _, p := range ps {
		t := p.T.Sub(t0).Hours()
		n++
		st += t
		sv += p.V
		stt += t * t
		stv += t * p.V
	}
	den := n*stt - st*st
	if den <= 0 {
		return 0, false
	}
	return (n*stv - st*sv) / den, true
}

func (m *Machine) reason(ev *compute.Event) string {
	r := m.Rule
	dir := "above"
	if r.Below {
		dir = "below"
	}
	what := r.Figure
	switch r.Kind {
	case Deviation:
		what = fmt.Sprintf("deviation of %s from its baseline %.4g", r.Figure, r.Baseline)
	case Rate:
		what = fmt.Sprintf("rate of change of %s (per hour, over %v)", r.Figure, r.RateWindow)
	}
	var b strings.Builder
	switch ev.To {
	case compute.AlertPending:
		fmt.Fprintf(&b, "%s of %s is %.4g, %s the limit %.4g; waiting %v before raising", what, r.Machine, ev.Value, dir, r.Limit, r.PendingFor)
	case compute.AlertFiring:
		fmt.Fprintf(&b, "%s of %s is %.4g, %s the limit %.4g since %s", what, r.Machine, ev.Value, dir, r.Limit, ev.Since.Format(time.RFC3339))
		if ev.U95 > 0 {
			fmt.Fprintf(&b, " (U95 ±%.2g)", ev.U95)
		}
		if r.Class == compute.AlertDataQuality {
			b.WriteString("; an instrument matter, not a machine alarm")
		}
	case compute.AlertResolved:
		fmt.Fprintf(&b, "%s of %s is back at %.4g, past the limit %.4g with hysteresis %.4g", what, r.Machine, ev.Value, r.Limit, r.Hysteresis)
	case compute.AlertInactive:
		fmt.Fprintf(&b, "%s of %s returned to %.4g before the hold time; not raised", what, r.Machine, ev.Value)
	}
	if advice := strings.TrimRight(strings.TrimSpace(r.Advice), "."); advice != "" && ev.To == compute.AlertFiring {
		b.WriteString(". ")
		b.WriteString(advice)
	}
	b.WriteString(". Advisory only; act under site procedures.")
	return b.String()
}
