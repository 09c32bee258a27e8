package quality

// The checker as it was before its state moved to Unix nanoseconds and one
// buffer (commit 72e5ebb), kept as the reference of the differential and
// fuzz tests in differential_test.go.

import (
	"math"
	"sort"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
)

// oldChecker holds the state of one tag. Not safe for concurrent use.
type oldChecker struct {
	P Params

	hist    []float64 // ring of recent values for the Hampel filter
	histPos int
	histN   int
	sorted  []float64 // the same values, sorted

	hasLast  bool
	lastT    time.Time // newest sample time (any quality)
	lastUseT time.Time // newest used sample
	lastUseV float64
	hasUse   bool

	stuckRef   float64
	stuckSince time.Time
	hasStuck   bool
}

// New returns a checker with parameters p.
func newOld(p Params) *oldChecker {
	if p.SpikeK == 0 {
		p.SpikeK = 3
	}
	c := &oldChecker{P: p}
	if p.SpikeWindow >= 3 {
		// One allocation for both, next to each other in memory.
		buf := make([]float64, 2*p.SpikeWindow)
		c.hist = buf[:p.SpikeWindow:p.SpikeWindow]
		c.sorted = buf[p.SpikeWindow : p.SpikeWindow : 2*p.SpikeWindow]
	}
	return c
}

// Check judges one sample (value v in SI at time t, source quality q).
// inOrder is false for a sample older than the tag's newest one; then the
// time-dependent checks (rate, stuck) are skipped and the state is not
// advanced. use reports whether the value may enter a time-weighted average.
func (c *oldChecker) Check(t time.Time, v float64, q ingest.Quality, inOrder bool) (use bool, rs ingest.Reasons) {
	use = true
	switch q {
	case ingest.Bad:
		rs = rs.Add(ingest.ReasonStatusBad)
		use = false
	case ingest.Uncertain:
		rs = rs.Add(ingest.ReasonStatusUncertain)
		if c.P.RejectUncertain {
			use = false
		}
	}
	if q == ingest.Bad {
		if inOrder {
			c.lastT, c.hasLast = t, true
		}
		return use, rs
	}
	if (c.P.Min != 0 || c.P.Max != 0) && (v < c.P.Min || v > c.P.Max) {
		rs = rs.Add(ingest.ReasonOutOfRange)
		use = false
	}
	if use && c.hist != nil && c.histN >= 3 {
		med, mad := c.oldMedianMAD()
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
		if dt := t.Sub(c.lastUseT).Seconds(); dt > 0 && math.Abs(v-c.lastUseV)/dt > c.P.MaxRate {
			rs = rs.Add(ingest.ReasonRateOfChange)
			use = false
		}
	}
	// The Hampel history takes every in-range value, also spikes, so that a
	// genuine step becomes the new median after half a window.
	if c.hist != nil && !rs.Has(ingest.ReasonOutOfRange) {
		if c.histN == len(c.hist) {
			c.sorted = oldReplaceSorted(c.sorted, c.hist[c.histPos], v)
		} else {
			c.histN++
			c.sorted = oldInsertSorted(c.sorted, v)
		}
		c.hist[c.histPos] = v
		if c.histPos++; c.histPos == len(c.hist) {
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
			} else if t.Sub(c.stuckSince) >= c.P.StuckPeriod {
				rs = rs.Add(ingest.ReasonStuck)
			}
		}
	}
	return use, rs
}

// oldMedianMAD returns the median of the window and the median absolute
// deviation from it, in O(n) from the sorted window: the deviations left
// and right of the median are each sorted, so a merge finds their median.
func (c *oldChecker) oldMedianMAD() (float64, float64) {
	s := c.sorted
	n := len(s)
	med := s[n/2]
	if n%2 == 0 {
		med = (s[n/2-1] + s[n/2]) / 2
	}
	// Merge the deviations med-s[i] (i = mid-1 down to 0) and s[j]-med
	// (j = mid up to n-1), both increasing, up to the middle element(s).
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
		return med, cur
	}
	return med, (prev + cur) / 2
}

// searchSorted is sort.SearchFloat64s (the first index with s[k] >= v) as
// a linear scan for windows of up to 32 values, where it is faster.
func oldSearchSorted(s []float64, v float64) int {
	if len(s) > 32 {
		return sort.SearchFloat64s(s, v)
	}
	k := 0
	for k < len(s) && !(s[k] >= v) {
		k++
	}
	return k
}

func oldInsertSorted(s []float64, v float64) []float64 {
	k := oldSearchSorted(s, v)
	s = append(s, 0)
	copy(s[k+1:], s[k:])
	s[k] = v
	return s
}

// replaceSorted is oldRemoveSorted(s, old) then oldInsertSorted(.., v) in one
// pass: the values between the old and the new place move by one.
func oldReplaceSorted(s []float64, old, v float64) []float64 {
	if old != old || v != v { // NaN: the general path
		return oldInsertSorted(oldRemoveSorted(s, old), v)
	}
	k := oldSearchSorted(s, old)
	if k == len(s) || s[k] != old {
		return oldInsertSorted(s, v) // old not held: as removeSorted would
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
	return s
}

func oldRemoveSorted(s []float64, v float64) []float64 {
	k := oldSearchSorted(s, v)
	if k < len(s) && s[k] == v {
		copy(s[k:], s[k+1:])
		s = s[:len(s)-1]
	}
	return s
}

// AtEvaluation returns the reasons that hold at evaluation time now: stale
// (newest sample older than StaleAfter, or none at all) and stuck (no change
// beyond the tolerance for StuckPeriod up to now, which also catches
// report-by-exception tags that stopped reporting a frozen value).
func (c *oldChecker) AtEvaluation(now time.Time) ingest.Reasons {
	var rs ingest.Reasons
	if c.P.StaleAfter > 0 && (!c.hasLast || now.Sub(c.lastT) > c.P.StaleAfter) {
		rs = rs.Add(ingest.ReasonStale)
	}
	if c.P.StuckPeriod > 0 && c.hasStuck && now.Sub(c.stuckSince) >= c.P.StuckPeriod {
		rs = rs.Add(ingest.ReasonStuck)
	}
	return rs
}

// Last returns the time of the newest in-order sample.
func (c *oldChecker) Last() (time.Time, bool) { return c.lastT, c.hasLast }
