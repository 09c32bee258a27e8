// Package trend keeps the rolling views of a derived figure: an
// exponentially weighted trend line with a time constant and daily
// aggregates in the site's local time zone. (The time-weighted averaging of
// the inputs over each evaluation window is done by ingest/align.)
//
// Time is a parameter: every Add takes the observation time from the
// caller, so the same code runs live, in replay and on a fake clock.
package trend

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"time"
	_ "time/tzdata" // site time zones must work on machines without tzdata
)

// ErrNotFinite: an observation was NaN or infinite and was not taken.
var ErrNotFinite = errors.New("trend: value is not finite")

// ErrOutOfOrder: an observation was older than the previous one.
var ErrOutOfOrder = errors.New("trend: observation older than the previous one")

// EWMA is an exponentially weighted moving average for irregular sampling:
// with a time constant tau, a new value observed dt after the previous one
// gets weight alpha = 1 - exp(-dt/tau) (the exact discretisation of a
// first-order low-pass filter; common practice, no source).
type EWMA struct {
	Tau   time.Duration `json:"tau"`
	Value float64       `json:"value"`
	Last  time.Time     `json:"last"`
	N     int           `json:"n"`
}

// Add folds in x observed at now.
func (e *EWMA) Add(now time.Time, x float64) error {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return ErrNotFinite
	}
	if e.N == 0 {
		e.Value, e.Last, e.N = x, now, 1
		return nil
	}
	dt := now.Sub(e.Last)
	if dt < 0 {
		return ErrOutOfOrder
	}
	alpha := 1.0
	if e.Tau > 0 {
		alpha = 1 - math.Exp(-dt.Seconds()/e.Tau.Seconds())
	}
	e.Value += alpha * (x - e.Value)
	e.Last = now
	e.N++
	return nil
}

// Day is the aggregate of one local calendar day.
type Day struct {
	Date       string    `json:"date"` // YYYY-MM-DD in the site time zone
	Start, End time.Time `json:"-"`    // local midnight to the next local midnight
	N          int       `json:"n"`
	Mean       float64   `json:"mean"`
	Median     float64   `json:"median"`
	Min        float64   `json:"min"`
	Max        float64   `json:"max"`
	// SteadyCoverage is the share of the day's length (23, 24 or 25 h
	// across daylight-saving changes) during which the machine was running
	// and steady.
	SteadyCoverage float64 `json:"steady_coverage"`
}

// Daily accumulates per-day aggregates in a time zone.
type Daily struct {
	loc     *time.Location
	cur     dayAcc
	hasCur  bool
	lastT   time.Time
	lastOK  bool // last observation was steady and running
	hasLast bool
}

type dayAcc struct {
	date       string
	start, end time.Time
	values     []float64
	steadySec  float64
}

// NewDaily returns an accumulator for the IANA time zone tz (e.g.
// "Europe/Oslo", "UTC").
func NewDaily(tz string) (*Daily, error) {
	loc, err := time.LoadLocation(tz)
	if err != nil {
		return nil, fmt.Errorf("trend: time zone %q: %w", tz, err)
	}
	return &Daily{loc: loc}, nil
}

func (d *Daily) bounds(t time.Time) (string, time.Time, time.Time) {
	lt := t.In(d.loc)
	y, m, dd := lt.Date()
	start := time.Date(y, m, dd, 0, 0, 0, 0, d.loc)
	end := time.Date(y, m, dd+1, 0, 0, 0, 0, d.loc)
	return start.Format("2006-01-02"), start, end
}

// Add records one evaluation at now: value (counted in the statistics only
// when steady) and whether the machine was running and steady. Steady time
// is credited from the previous observation to this one when the previous
// one was steady. It returns the days completed by this observation.
func (d *Daily) Add(now time.Time, value float64, steady bool) ([]Day, error) {
	if steady && (math.IsNaN(value) || math.IsInf(value, 0)) {
		return nil, ErrNotFinite
	}
	if d.hasLast && now.Before(d.lastT) {
		return nil, ErrOutOfOrder
	}
	var done []Day
	if !d.hasCur {
		d.cur = d.newAcc(now)
		d.hasCur = true
	}
	// Credit steady time, split at midnights.
	if d.hasLast && d.lastOK {
		from := d.lastT
		for from.Before(now) {
			if !from.Before(d.cur.end) {
				done = append(done, d.close())
				d.cur = d.newAcc(from)
				continue
			}
			to := now
			if to.After(d.cur.end) {
				to = d.cur.end
			}
			d.cur.steadySec += to.Sub(from).Seconds()
			from = to
		}
	}
	for !now.Before(d.cur.end) {
		done = append(done, d.close())
		d.cur = d.newAcc(now)
	}
	if steady {
		d.cur.values = append(d.cur.values, value)
	}
	d.lastT, d.lastOK, d.hasLast = now, steady, true
	return done, nil
}

func (d *Daily) newAcc(t time.Time) dayAcc {
	date, s, e := d.bounds(t)
	return dayAcc{date: date, start: s, end: e}
}

// Current returns the aggregate of the day in progress.
func (d *Daily) Current() (Day, bool) {
	if !d.hasCur {
		return Day{}, false
	}
	return d.cur.day(), true
}

func (d *Daily) close() Day { return d.cur.day() }

func (a dayAcc) day() Day {
	out := Day{Date: a.date, Start: a.start, End: a.end, N: len(a.values)}
	if n := len(a.values); n > 0 {
		s := append([]float64(nil), a.values...)
		sort.Float64s(s)
		var sum float64
		for _, v := range s {
			sum += v
		}
		out.Mean, out.Min, out.Max = sum/float64(n), s[0], s[n-1]
		if n%2 == 1 {
			out.Median = s[n/2]
		} else {
			out.Median = (s[n/2-1] + s[n/2]) / 2
		}
	}
	out.SteadyCoverage = a.steadySec / a.end.Sub(a.start).Seconds()
	return out
}

// ErrStateMismatch: a saved daily state does not belong to this
// accumulator's time zone (the site's time zone changed between runs) or is
// inconsistent; it was not restored.
var ErrStateMismatch = errors.New("trend: saved daily state does not fit this accumulator")

// DailyState is the restorable content of a Daily: the day in progress
// (its steady observations and steady seconds so far) and the previous
// observation, so a daemon restart in mid-day neither loses the morning
// nor credits the downtime as steady. Values is kept in full because the
// daily median needs every observation.
type DailyState struct {
	// Date is the local date (YYYY-MM-DD) of the day in progress; empty
	// when no day has started.
	Date string `json:"date,omitempty"`
	// Values are the day's steady observations, in the unit of the figure.
	Values []float64 `json:"values,omitempty"`
	// SteadySeconds is the steady running time credited to the day, s.
	SteadySeconds float64 `json:"steady_s,omitempty"`
	// Last is the time of the previous observation (zero: none) and
	// LastSteady whether it was steady and running.
	Last       time.Time `json:"last,omitzero"`
	LastSteady bool      `json:"last_steady,omitempty"`
}

// State returns a copy of the accumulator's state.
func (d *Daily) State() DailyState {
	var s DailyState
	if d.hasCur {
		s.Date = d.cur.date
		s.Values = append([]float64(nil), d.cur.values...)
		s.SteadySeconds = d.cur.steadySec
	}
	if d.hasLast {
		s.Last, s.LastSteady = d.lastT, d.lastOK
	}
	return s
}

// Restore replaces the accumulator's state with s. A state whose day does
// not match its last observation in this time zone, with non-finite or
// negative content, or with more steady seconds than the day has, is
// refused with ErrStateMismatch and the accumulator is left unchanged.
func (d *Daily) Restore(s DailyState) error {
	var nd Daily
	nd.loc = d.loc
	if !s.Last.IsZero() {
		nd.lastT, nd.lastOK, nd.hasLast = s.Last, s.LastSteady, true
	}
	if s.Date != "" {
		if !nd.hasLast {
			return fmt.Errorf("%w: day %s has no last observation", ErrStateMismatch, s.Date)
		}
		acc := nd.newAcc(s.Last)
		if acc.date != s.Date {
			return fmt.Errorf("%w: last observation %s falls on %s in %s, not on the saved day %s",
				ErrStateMismatch, s.Last.Format(time.RFC3339), acc.date, d.loc, s.Date)
		}
		if math.IsNaN(s.SteadySeconds) || s.SteadySeconds < 0 || s.SteadySeconds > acc.end.Sub(acc.start).Seconds() {
			return fmt.Errorf("%w: %v steady seconds on day %s", ErrStateMismatch, s.SteadySeconds, s.Date)
		}
		for _, v := range s.Values {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("%w: non-finite value on day %s", ErrStateMismatch, s.Date)
			}
		}
		acc.values = append([]float64(nil), s.Values...)
		acc.steadySec = s.SteadySeconds
		nd.cur, nd.hasCur = acc, true
	}
	*d = nd
	return nil
}
