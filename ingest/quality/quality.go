// Package quality runs the per-tag data-quality checks on SI values: source
// status, plausible range, stuck, spike (Hampel filter), rate of change and
// staleness. Each finding is a reason code from package ingest.
package quality

import (
	"math"
	"sort"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
)

// HampelScale makes the median absolute deviation a consistent estimator of
// the standard deviation for normally distributed data: 1/Φ⁻¹(3/4) =
// 1.4826 (common practice; Hampel 1974, Rousseeuw & Croux 1993).
const HampelScale = 1.4826

// Params are the compiled (SI) settings of one tag's checks. Zero values
// switch a check off, except SpikeK which defaults to 3.
type Params struct {
	Min, Max        float64       // plausible range in SI; both 0 means no range check
	StuckPeriod     time.Duration // stuck when no change beyond StuckTolerance for this long
	StuckTolerance  float64       // SI (a difference)
	SpikeWindow     int           // Hampel window: number of previous values (>= 3 to enable)
	SpikeK          float64       // Hampel threshold in scaled MADs (default 3)
	SpikeFloor      float64       // SI; the threshold is never below this (MAD is 0 on flat data)
	MaxRate         float64       // SI per second; 0 = off
	StaleAfter      time.Duration // stale when the newest sample is older than this at evaluation
	RejectUncertain bool          // drop samples with uncertain source quality instead of flagging
}

// Checker holds the state of one tag. Not safe for concurrent use.
//
// Times are held as Unix nanoseconds (the engine's clock is bounded to
// 2000..2262), the Hampel ring and its sorted copy share one buffer, and
// the per-sample state sits next to the parameters: a check touches few
// cache lines.
type Checker struct {
	P Params

	lastT    int64 // newest sample time (any quality), Unix ns
	lastUseT int64 // newest used sample, Unix ns
	lastUseV float64

	stuckRef   float64
	stuckSince int64 // Unix ns

	histPos  int32
	histN    int32
	hasLast  bool
	hasUse   bool
	hasStuck bool
	statOK   bool // med and mad are those of the window as it is

	med, mad float64 // median and MAD of the Hampel window when statOK

	// buf[:SpikeWindow] is the ring of recent values for the Hampel
	// filter, buf[SpikeWindow:SpikeWindow+histN] the same values sorted.
	buf []float64
}

// New returns a checker with parameters p.
func New(p Params) *Checker {
	c := &Checker{}
	c.Init(p)
	return c
}

// Init sets up c (a zero or used Checker) with parameters p, as New does,
// for checkers held by value.
func (c *Checker) Init(p Params) {
	if p.SpikeK == 0 {
		p.SpikeK = 3
	}
	*c = Checker{P: p}
	if p.SpikeWindow >= 3 {
		c.buf = make([]float64, 2*p.SpikeWindow)
	}
}

// Check judges one sample (value v in SI at time t, source quality q).
// inOrder is false for a sample older than the tag's newest one; then the
// time-dependent checks (rate, stuck) are skipped and the state is not
// advanced. use reports whether the value may enter a time-weighted average.
// t must lie within the range of Unix nanoseconds (years 1678..2262).
func (c *Checker) Check(t time.Time, v float64, q ingest.Quality, inOrder bool) (use bool, rs ingest.Reasons) {
	return c.CheckNs(t.UnixNano(), v, q, inOrder)
}

// CheckNs is Check with the sample time in Unix nanoseconds.
func (c *Checker) CheckNs(t int64, v float64, q ingest.Quality, inOrder bool) (use bool, rs ingest.Reasons) {
	use = true
	switch q {
	case ingest.Good:
	case ingest.Bad:
		if inOrder {
			c.lastT, c.hasLast = t, true
		}
		return false, rs.Add(ingest.ReasonStatusBad)
	case ingest.Uncertain:
		rs = rs.Add(ingest.ReasonStatusUncertain)
		if c.P.RejectUncertain {
			use = false
		}
	}
	inRange := !((c.P.Min != 0 || c.P.Max != 0) && (v < c.P.Min || v > c.P.Max))
	if !inRange {
		rs = rs.Add(ingest.ReasonOutOfRange)
		use = false
	}
	w := int32(len(c.buf) / 2)
	if use && w != 0 && c.histN >= 3 {
		if !c.statOK {
			c.med, c.mad = medianMAD(c.buf[w : w+c.histN])
			c.statOK = true
		}
		med, mad := c.med, c.mad
		thr := c.P.SpikeK * HampelScale * mad
		if thr < c.P.SpikeFloor {
			thr = c.P.SpikeFloor
		}
		if math.Abs(v-med) > thr {
			rs = rs.Add(ingest.ReasonSpike)
			use = false
		}
	}
	if inOrder && use && c.P.MaxRate > 0 && c.hasUse {
		if d := time.Duration(t - c.lastUseT); d > 0 && rateExceeded(math.Abs(v-c.lastUseV), d, c.P.MaxRate) {
			rs = rs.Add(ingest.ReasonRateOfChange)
			use = false
		}
	}
	// The Hampel history takes every in-range value, also spikes, so that a
	// genuine step becomes the new median after half a window.
	if w != 0 && inRange && v == v { // NaN never enters the window
		if c.histN == w {
			// A value replaced by the same number (steady or quantised
			// data) leaves the window, its median and MAD as they are.
			if old := c.buf[c.histPos]; math.Float64bits(old) != math.Float64bits(v) {
				replaceSorted(c.buf[w:2*w], old, v)
				c.statOK = false
			}
		} else {
			insertSorted(c.buf[w:w+c.histN+1], v)
			c.histN++
			c.statOK = false
		}
		c.buf[c.histPos] = v
		if c.histPos++; c.histPos == w {
			c.histPos = 0
		}
	}
	if !inOrder {
		return use, rs
	}
	c.lastT, c.hasLast = t, true
	if use {
		c.lastUseT, c.lastUseV, c.hasUse = t, v, true
		if c.P.StuckPeriod > 0 {
			if !c.hasStuck || math.Abs(v-c.stuckRef) > c.P.StuckTolerance {
				c.stuckRef, c.stuckSince, c.hasStuck = v, t, true
			} else if time.Duration(t-c.stuckSince) >= c.P.StuckPeriod {
				rs = rs.Add(ingest.ReasonStuck)
			}
		}
	}
	return use, rs
}

// rateExceeded is dv/d.Seconds() > maxRate (dv >= 0 or NaN, d > 0,
// maxRate > 0) without the integer division of Seconds and the float
// division: dv is compared with maxRate·d·1e-9, whose relative error
// against maxRate·d.Seconds() is a few units of 2⁻⁵³; only within a
// relative 1e-9 of the limit (or for NaN) the exact quotient decides.
func rateExceeded(dv float64, d time.Duration, maxRate float64) bool {
	lim := maxRate * float64(d) * 1e-9
	switch {
	case dv > lim*(1+1e-9):
		return true
	case dv < lim*(1-1e-9):
		return false
	}
	return dv/d.Seconds() > maxRate
}

// medianMAD returns the median of the sorted window s and the median
// absolute deviation from it, in O(n) without branches on the data.
//
// The k smallest deviations |s[i]-med| are a run of k neighbours in s
// (they grow away from the median on both sides), and the largest
// deviation of a run is at one of its ends, so the k-th smallest deviation
// is the least, over the runs s[i..i+k-1], of the larger end deviation.
// Each candidate is one of the deviations themselves, so the result is the
// same number as a sort of the deviations gives (tested against the
// previous merge, madMerge, and against sorting).
func medianMAD(s []float64) (float64, float64) {
	n := len(s)
	h := n / 2
	med := s[h]
	if n%2 == 0 {
		med = (s[h-1] + s[h]) / 2
	}
	if med-med != 0 { // ±Inf (NaN never enters): the merge copes
		return med, madMerge(s, med)
	}
	if n%2 == 1 {
		return med, kthDeviation(s, med, h+1)
	}
	return med, (kthDeviation(s, med, h) + kthDeviation(s, med, h+1)) / 2
}

// kthDeviation is the k-th smallest |s[i]-med| (1-based) of sorted s,
// k > len(s)/2 - 1 (so that every run s[i..i+k-1] reaches the median or
// lies on one side of it). The larger end deviation of a run is
// max(med-s[i], s[i+k-1]-med): an end on the wrong side of the median
// gives a value <= 0 there, the other end the true one. The deviations
// are compared as the integers of their bits, which order like the
// numbers for values >= 0 and put negative ones below (no NaN here; ±0
// compare as different but only the threshold test uses the result, where
// they are alike), so the loop has no branches and no float min/max.
func kthDeviation(s []float64, med float64, k int) float64 {
	lo, hi := s[:len(s)-k+1], s[k-1:]
	hi = hi[:len(lo)]
	d := int64(math.MaxInt64)
	for i := range lo {
		a := int64(math.Float64bits(med - lo[i]))
		b := int64(math.Float64bits(hi[i] - med))
		d = min(d, max(a, b))
	}
	return math.Float64frombits(uint64(d))
}

// madMerge is the median absolute deviation from med of sorted s by
// merging the deviations left and right of the median (both sorted) up to
// the middle element(s).
func madMerge(s []float64, med float64) float64 {
	n := len(s)
	i, j := n/2-1, n/2
	var prev, cur float64
	for k := 0; k <= n/2; k++ {
		prev = cur
		if j >= n || (i >= 0 && med-s[i] <= s[j]-med) {
			cur = med - s[i]
			i--
		} else {
			cur = s[j] - med
			j++
		}
	}
	if n%2 == 1 {
		return cur
	}
	return (prev + cur) / 2
}

// searchSorted is sort.SearchFloat64s (the first index with s[k] >= v) as
// a linear scan for windows of up to 32 values, where it is faster.
func searchSorted(s []float64, v float64) int {
	if len(s) > 32 {
		return sort.SearchFloat64s(s, v)
	}
	k := 0
	for k < len(s) && !(s[k] >= v) {
		k++
	}
	return k
}

// insertSorted puts v into s[:len(s)-1] (sorted), which grows by its last
// element.
func insertSorted(s []float64, v float64) {
	n := len(s) - 1
	k := searchSorted(s[:n], v)
	copy(s[k+1:], s[k:n])
	s[k] = v
}

// replaceSorted replaces the value old held in the sorted s by v, in one
// pass: the values between the old and the new place move by one.
func replaceSorted(s []float64, old, v float64) {
	k := searchSorted(s, old)
	if k == len(s) || s[k] != old {
		// old not held (cannot happen: the ring and s hold the same
		// values, and no NaN enters): s keeps its values.
		return
	}
	switch {
	case v > old:
		for k+1 < len(s) && s[k+1] < v {
			s[k] = s[k+1]
			k++
		}
	case v < old:
		for k > 0 && s[k-1] > v {
			s[k] = s[k-1]
			k--
		}
	}
	s[k] = v
}

// AtEvaluation returns the reasons that hold at evaluation time now: stale
// (newest sample older than StaleAfter, or none at all) and stuck (no change
// beyond the tolerance for StuckPeriod up to now, which also catches
// report-by-exception tags that stopped reporting a frozen value).
func (c *Checker) AtEvaluation(now time.Time) ingest.Reasons {
	var rs ingest.Reasons
	ns := now.UnixNano()
	if c.P.StaleAfter > 0 && (!c.hasLast || time.Duration(ns-c.lastT) > c.P.StaleAfter) {
		rs = rs.Add(ingest.ReasonStale)
	}
	if c.P.StuckPeriod > 0 && c.hasStuck && time.Duration(ns-c.stuckSince) >= c.P.StuckPeriod {
		rs = rs.Add(ingest.ReasonStuck)
	}
	return rs
}

// Last returns the time of the newest in-order sample (UTC).
func (c *Checker) Last() (time.Time, bool) {
	if !c.hasLast {
		return time.Time{}, false
	}
	return time.Unix(0, c.lastT).UTC(), true
}
