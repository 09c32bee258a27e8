package ingest

import "strings"

// Reason is a code for why a sample or a snapshot value is doubtful or was
// dropped. Reasons are counted in the metrics and carried in snapshots.
type Reason uint8

// Reason codes.
const (
	ReasonNone            Reason = iota
	ReasonDecode                 // payload could not be decoded
	ReasonNonFinite              // value NaN or ±Inf
	ReasonTimeTooOld             // source timestamp before 2000-01-01
	ReasonTimeFuture             // source timestamp beyond the allowed future skew
	ReasonUnmapped               // tag not in the tag map
	ReasonDuplicate              // same tag, same source time, same value again
	ReasonOutOfOrder             // older than the tag's newest sample (kept if within the late horizon)
	ReasonLate                   // older than the late-data horizon: dropped
	ReasonStatusBad              // source quality bad (OPC UA StatusCode severity bad)
	ReasonStatusUncertain        // source quality uncertain
	ReasonOutOfRange             // outside the plausible range of the quantity
	ReasonStuck                  // no change beyond tolerance over the stuck period
	ReasonSpike                  // Hampel filter outlier
	ReasonRateOfChange           // rate of change above the limit
	ReasonStale                  // newest sample older than the staleness limit
	ReasonNoBarometer            // gauge pressure without barometer value or site pressure
	ReasonSkew                   // tags of the machine further apart in time than the maximum skew
	ReasonLowCoverage            // usable data covers too little of the window
	ReasonSubstituted            // a redundancy group used a substitute member
	ReasonDivergence             // A/B members diverge beyond the limit
	ReasonQueueFull              // bounded queue full: batch dropped (core NATS only)
	ReasonGap                    // source connection lost; data gap
	ReasonNoData                 // no sample in or before the window
	numReasons
)

// NumReasons is the number of reason codes (for arrays indexed by Reason).
const NumReasons = int(numReasons)

var reasonNames = [...]string{
	ReasonNone: "none", ReasonDecode: "decode", ReasonNonFinite: "non_finite", ReasonTimeTooOld: "time_too_old",
	ReasonTimeFuture: "time_future", ReasonUnmapped: "unmapped", ReasonDuplicate: "duplicate",
	ReasonOutOfOrder: "out_of_order", ReasonLate: "late", ReasonStatusBad: "status_bad",
	ReasonStatusUncertain: "status_uncertain", ReasonOutOfRange: "out_of_range", ReasonStuck: "stuck",
	ReasonSpike: "spike", ReasonRateOfChange: "rate_of_change", ReasonStale: "stale",
	ReasonNoBarometer: "no_barometer", ReasonSkew: "skew", ReasonLowCoverage: "low_coverage",
	ReasonSubstituted: "substituted", ReasonDivergence: "divergence", ReasonQueueFull: "queue_full",
	ReasonGap: "gap", ReasonNoData: "no_data",
}

func (r Reason) String() string {
	if int(r) < len(reasonNames) {
		return reasonNames[r]
	}
	return "invalid"
}

// Reasons is a set of reason codes.
type Reasons uint32

// Add returns the set with r added.
func (rs Reasons) Add(r Reason) Reasons {
	if r == ReasonNone {
		return rs
	}
	return rs | 1<<r
}

// Has reports whether r is in the set.
func (rs Reasons) Has(r Reason) bool { return rs&(1<<r) != 0 }

// List returns the reasons in code order.
func (rs Reasons) List() []Reason {
	var out []Reason
	for r := Reason(1); r < numReasons; r++ {
		if rs.Has(r) {
			out = append(out, r)
		}
	}
	return out
}

func (rs Reasons) String() string {
	l := rs.List()
	s := make([]string, len(l))
	for i, r := range l {
		s[i] = r.String()
	}
	return strings.Join(s, ",")
}
