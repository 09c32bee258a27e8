// Package steady decides whether a machine is running steadily enough for
// its figures to mean something.
//
// The test is the R-statistic of Cao and Rhinehart: S. Cao and R. R.
// Rhinehart, "An efficient method for on-line identification of steady
// state", Journal of Process Control 5(6) (1995) 363-374. Three first-order
// filters run on each key signal X sampled at equal intervals:
//
//	Xf(i)  = λ1 X(i) + (1-λ1) Xf(i-1)                    filtered value
//	v2(i)  = λ2 (X(i) - Xf(i-1))² + (1-λ2) v2(i-1)        filtered squared deviation from the mean
//	d2(i)  = λ3 (X(i) - X(i-1))² + (1-λ3) d2(i-1)         filtered squared sample-to-sample difference
//	R(i)   = (2 - λ1) v2(i) / d2(i)
//
// At steady state with independent noise R is near 1; a trend or a step
// makes v2 grow faster than d2 and R rises. The signal is declared
// transient while R exceeds the critical value (about 2 by default,
// configurable), and steady again only after R has stayed below it for a
// minimum dwell. Defaults λ1 = 0.2, λ2 = 0.1, λ3 = 0.1 as recommended by the
// authors.
//
// Time is a parameter: every Update takes the sample time from the caller.
package steady

import (
	"errors"
	"fmt"
	"math"
	"time"
)

// Config sets the test. Zero fields take the defaults.
type Config struct {
	Lambda1 float64 `yaml:"lambda1"` // filter factor of the mean, default 0.2
	Lambda2 float64 `yaml:"lambda2"` // filter factor of the variance, default 0.1
	Lambda3 float64 `yaml:"lambda3"` // filter factor of the differences, default 0.1
	// RCritical: R above this is transient. Default 2.0.
	RCritical float64 `yaml:"r_critical"`
	// Warmup is the number of samples before a verdict is possible
	// (the filters start from the first sample). Default 10.
	Warmup int `yaml:"warmup_samples"`
	// Dwell is how long R must stay below RCritical before the signal is
	// declared steady again. Default 0 (immediately).
	Dwell time.Duration `yaml:"-"`
}

// Defaults of Config (Cao and Rhinehart 1995 recommend λ1 = 0.2, λ2 = λ3 =
// 0.1; the critical R of about 2 is common practice for those factors).
const (
	DefaultLambda1   = 0.2
	DefaultLambda2   = 0.1
	DefaultLambda3   = 0.1
	DefaultRCritical = 2.0
	DefaultWarmup    = 10
)

// WithDefaults returns c with zero fields replaced by the defaults.
func (c Config) WithDefaults() Config {
	if c.Lambda1 == 0 {
		c.Lambda1 = DefaultLambda1
	}
	if c.Lambda2 == 0 {
		c.Lambda2 = DefaultLambda2
	}
	if c.Lambda3 == 0 {
		c.Lambda3 = DefaultLambda3
	}
	if c.RCritical == 0 {
		c.RCritical = DefaultRCritical
	}
	if c.Warmup == 0 {
		c.Warmup = DefaultWarmup
	}
	return c
}

// Validate checks the ranges: filter factors in (0, 1], RCritical > 1.
func (c Config) Validate() error {
	c = c.WithDefaults()
	for _, l := range []struct {
		n string
		v float64
	}{{"lambda1", c.Lambda1}, {"lambda2", c.Lambda2}, {"lambda3", c.Lambda3}} {
		if !(l.v > 0 && l.v <= 1) {
			return fmt.Errorf("steady state: %s = %g must be in (0, 1]", l.n, l.v)
		}
	}
	if !(c.RCritical > 1) {
		return fmt.Errorf("steady state: r_critical = %g must be above 1 (R is about 1 at steady state)", c.RCritical)
	}
	if c.Warmup < 2 {
		return fmt.Errorf("steady state: warmup_samples = %d must be at least 2", c.Warmup)
	}
	if c.Dwell < 0 {
		return fmt.Errorf("steady state: dwell must not be negative")
	}
	return nil
}

// ErrNotFinite is returned by Update for a NaN or infinite sample; the
// filter state is left unchanged.
var ErrNotFinite = errors.New("steady state: sample is not finite")

// Filter is the R-statistic filter of one signal. The zero value is not
// usable; use NewFilter. A Filter is not safe for concurrent use.
type Filter struct {
	cfg Config
	// State, exported for persistence across restarts.
	S FilterState
}

// FilterState is the persisted state of a Filter.
type FilterState struct {
	N            int       `json:"n"`             // samples seen
	Xf           float64   `json:"xf"`            // filtered value
	V2           float64   `json:"v2"`            // filtered squared deviation
	D2           float64   `json:"d2"`            // filtered squared difference
	Last         float64   `json:"last"`          // previous sample
	LastTime     time.Time `json:"last_time"`     // time of the previous sample
	R            float64   `json:"r"`             // latest R (0 before two samples)
	Steady       bool      `json:"steady"`        // latest verdict
	BelowSince   time.Time `json:"below_since"`   // start of the current run of R <= RCritical
	SteadySince  time.Time `json:"steady_since"`  // when the current steady period began
	TransientSet time.Time `json:"transient_set"` // when the current transient period began
}

// NewFilter returns a filter with cfg (defaults filled in).
func NewFilter(cfg Config) (*Filter, error) {
	cfg = cfg.WithDefaults()
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	return &Filter{cfg: cfg}, nil
}

// Update feeds one sample x taken at time now and returns the verdict.
// Samples are expected at equal intervals (the daemon's evaluation tick).
func (f *Filter) Update(now time.Time, x float64) (steady bool, r float64, err error) {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return f.S.Steady, f.S.R, ErrNotFinite
	}
	c, s := f.cfg, &f.S
	if s.N == 0 {
		s.Xf, s.V2, s.D2, s.Last = x, 0, 0, x
		s.N, s.LastTime = 1, now
		s.Steady, s.R = false, 0
		s.TransientSet = now
		return false, 0, nil
	}
	dev := x - s.Xf // deviation from the previous filtered value
	dif := x - s.Last
	s.V2 = c.Lambda2*dev*dev + (1-c.Lambda2)*s.V2
	s.Xf = c.Lambda1*x + (1-c.Lambda1)*s.Xf
	s.D2 = c.Lambda3*dif*dif + (1-c.Lambda3)*s.D2
	s.Last, s.LastTime = x, now
	s.N++
	switch {
	case s.D2 > 0:
		s.R = (2 - c.Lambda1) * s.V2 / s.D2
	case s.V2 > 0:
		s.R = math.Inf(1) // cannot happen with finite input; keep transient
	default:
		s.R = 1 // a perfectly constant signal is steady (a stuck sensor is caught by ingest)
	}
	below := s.R <= c.RCritical
	if !below {
		s.BelowSince = time.Time{}
		if s.Steady || s.TransientSet.IsZero() {
			s.TransientSet = now
		}
		s.Steady = false
	} else {
		if s.BelowSince.IsZero() {
			s.BelowSince = now
		}
		if !s.Steady && s.N >= c.Warmup && now.Sub(s.BelowSince) >= c.Dwell {
			s.Steady, s.SteadySince = true, now
		}
	}
	r = s.R
	if math.IsInf(r, 0) {
		r = math.MaxFloat64
	}
	return s.Steady, r, nil
}

// Steady reports the latest verdict.
func (f *Filter) Steady() bool { return f.S.Steady }

// R returns the latest R-statistic (0 before the second sample).
func (f *Filter) R() float64 { return f.S.R }

// Restore replaces the filter state (from persistence).
func (f *Filter) Restore(s FilterState) { f.S = s }

// Detector combines the filters of several key signals of one machine: the
// machine is steady when every key signal is steady.
type Detector struct {
	cfg     Config
	filters map[string]*Filter
	order   []string
}

// NewDetector returns a detector for the named key signals.
func NewDetector(cfg Config, keys []string) (*Detector, error) {
	if len(keys) == 0 {
		return nil, errors.New("steady state: no key signals configured")
	}
	d := &Detector{cfg: cfg, filters: map[string]*Filter{}}
	for _, k := range keys {
		if _, dup := d.filters[k]; dup {
			return nil, fmt.Errorf("steady state: key signal %q listed twice", k)
		}
		f, err := NewFilter(cfg)
		if err != nil {
			return nil, err
		}
		d.filters[k] = f
		d.order = append(d.order, k)
	}
	return d, nil
}

// Verdict is the detector's answer at one tick.
type Verdict struct {
	Steady bool
	// R holds the R-statistic of each key signal.
	R map[string]float64
	// Transient lists the key signals that are not steady (or missing).
	Transient []string
}

// Update feeds one value per key signal; a key missing from values counts as
// not steady (and its filter is not advanced).
func (d *Detector) Update(now time.Time, values map[string]float64) Verdict {
	v := Verdict{Steady: true, R: make(map[string]float64, len(d.order))}
	for _, k := range d.order {
		x, ok := values[k]
		f := d.filters[k]
		if !ok {
			v.Steady = false
			v.Transient = append(v.Transient, k)
			continue
		}
		st, r, err := f.Update(now, x)
		v.R[k] = r
		if err != nil || !st {
			v.Steady = false
			v.Transient = append(v.Transient, k)
		}
	}
	return v
}

// Reset forgets every filter's history: after a stop the machine must prove
// steady state again from fresh samples.
func (d *Detector) Reset() {
	for _, f := range d.filters {
		f.S = FilterState{}
	}
}

// States returns the filter states for persistence.
func (d *Detector) States() map[string]FilterState {
	out := make(map[string]FilterState, len(d.filters))
	for k, f := range d.filters {
		out[k] = f.S
	}
	return out
}

// Restore sets filter states saved by States; unknown keys are ignored.
func (d *Detector) Restore(s map[string]FilterState) {
	for k, st := range s {
		if f, ok := d.filters[k]; ok {
			f.Restore(st)
		}
	}
}
