package sinks

import (
	"encoding/json"
	"fmt"
	"math"
	"time"

	"github.com/exergywatch/exergywatch/compute"
)

// WireVersion is the version of the JSON wire form, carried in every message
// as "v". It changes only when a field changes meaning.
const WireVersion = 1

// RecordJSON is the JSON wire form of a compute.Record, published on NATS and
// stored by the embedded store. A Bad figure carries no value: "value" and
// "u95" are absent and only its quality and reasons are sent.
type RecordJSON struct {
	V           int          `json:"v"`            // WireVersion
	Time        time.Time    `json:"time"`         // evaluation time, RFC 3339 with nanoseconds, UTC
	Site        string       `json:"site"`         // site name
	Machine     string       `json:"machine"`      // machine id
	Kind        string       `json:"kind"`         // "turbine", "pump", "compressor"
	Quality     string       `json:"quality"`      // good, uncertain, transient, bad
	QualityCode int          `json:"quality_code"` // 0 good, 1 uncertain, 2 transient, 3 bad
	Reasons     []string     `json:"reasons,omitempty"`
	Figures     []FigureJSON `json:"figures"`
}

// FigureJSON is one figure of a RecordJSON.
type FigureJSON struct {
	Name        string   `json:"name"`            // series name with its SI unit suffix
	Value       *float64 `json:"value,omitempty"` // in the unit the name says; absent when quality is bad
	U95         *float64 `json:"u95,omitempty"`   // expanded uncertainty (k = 2) in the unit of value; absent when not evaluated or bad
	Quality     string   `json:"quality"`
	QualityCode int      `json:"quality_code"`
	Reasons     []string `json:"reasons,omitempty"`
}

// EventJSON is the JSON wire form of a compute.Event.
type EventJSON struct {
	V        int       `json:"v"`         // WireVersion
	Time     time.Time `json:"time"`      // transition time, UTC
	Site     string    `json:"site"`      // site name
	Machine  string    `json:"machine"`   // machine id
	Rule     string    `json:"rule"`      // rule name
	Class    string    `json:"class"`     // performance or data_quality
	Figure   string    `json:"figure"`    // watched figure or tag
	From     string    `json:"from"`      // state name before the transition
	To       string    `json:"to"`        // state name after the transition
	FromCode int       `json:"from_code"` // 0 inactive, 1 pending, 2 firing, 3 resolved
	ToCode   int       `json:"to_code"`   // as FromCode
	Value    float64   `json:"value"`     // value that caused the transition, unit of the figure
	Limit    float64   `json:"limit"`     // threshold crossed, unit of the figure
	U95      float64   `json:"u95"`       // uncertainty of value, 0 when unknown
	Since    time.Time `json:"since"`     // when the condition first became true
	Reason   string    `json:"reason"`    // plain-language explanation
}

// finite reports whether v is neither NaN nor infinite.
func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// RecordToJSON converts a record to its wire form after checking it with
// compute.Record.Validate. Errors wrap ErrInvalid.
func RecordToJSON(r compute.Record) (RecordJSON, error) {
	if err := r.Validate(); err != nil {
		return RecordJSON{}, fmt.Errorf("%w: %w", ErrInvalid, err)
	}
	if r.Quality < compute.QualityGood || r.Quality > compute.QualityBad {
		return RecordJSON{}, fmt.Errorf("%w: record for %s has unknown quality %d", ErrInvalid, r.Machine, int(r.Quality))
	}
	out := RecordJSON{
		V: WireVersion, Time: r.Time.UTC(), Site: r.Site, Machine: r.Machine, Kind: r.MachineKind,
		Quality: r.Quality.String(), QualityCode: int(r.Quality),
		Reasons: append([]string(nil), r.Reasons...),
		Figures: make([]FigureJSON, 0, len(r.Figures)),
	}
	for _, f := range r.Figures {
		if f.Quality < compute.QualityGood || f.Quality > compute.QualityBad {
			return RecordJSON{}, fmt.Errorf("%w: record for %s: figure %s has unknown quality %d", ErrInvalid, r.Machine, f.Name, int(f.Quality))
		}
		fj := FigureJSON{Name: f.Name, Quality: f.Quality.String(), QualityCode: int(f.Quality), Reasons: append([]string(nil), f.Reasons...)}
		if f.Quality != compute.QualityBad {
			v := f.Value
			fj.Value = &v
			if f.HasU95 {
				u := f.U95
				fj.U95 = &u
			}
		}
		out.Figures = append(out.Figures, fj)
	}
	return out, nil
}

// Record converts the wire form back. A Bad figure comes back with Value 0
// and HasU95 false: its value was never sent and must not be used.
func (j RecordJSON) Record() (compute.Record, error) {
	q, err := compute.ParseQuality(j.Quality)
	if err != nil {
		return compute.Record{}, fmt.Errorf("%w: record %s: %w", ErrInvalid, j.Machine, err)
	}
	if int(q) != j.QualityCode {
		return compute.Record{}, fmt.Errorf("%w: record %s: quality %q disagrees with quality_code %d", ErrInvalid, j.Machine, j.Quality, j.QualityCode)
	}
	r := compute.Record{Time: j.Time.UTC(), Site: j.Site, Machine: j.Machine, MachineKind: j.Kind, Quality: q, Reasons: j.Reasons}
	for _, fj := range j.Figures {
		fq, err := compute.ParseQuality(fj.Quality)
		if err != nil {
			return compute.Record{}, fmt.Errorf("%w: record %s: figure %s: %w", ErrInvalid, j.Machine, fj.Name, err)
		}
		if int(fq) != fj.QualityCode {
			return compute.Record{}, fmt.Errorf("%w: record %s: figure %s: quality %q disagrees with quality_code %d", ErrInvalid, j.Machine, fj.Name, fj.Quality, fj.QualityCode)
		}
		f := compute.Figure{Name: fj.Name, Quality: fq, Reasons: fj.Reasons}
		if fq != compute.QualityBad {
			if fj.Value == nil {
				return compute.Record{}, fmt.Errorf("%w: record %s: figure %s of quality %s has no value", ErrInvalid, j.Machine, fj.Name, fq)
			}
			f.Value = *fj.Value
			if fj.U95 != nil {
				f.U95, f.HasU95 = *fj.U95, true
			}
		}
		r.Figures = append(r.Figures, f)
	}
	if err := r.Validate(); err != nil {
		return compute.Record{}, fmt.Errorf("%w: %w", ErrInvalid, err)
	}
	return r, nil
}

// MarshalRecord encodes a record as wire JSON. Errors wrap ErrInvalid.
func MarshalRecord(r compute.Record) ([]byte, error) {
	j, err := RecordToJSON(r)
	if err != nil {
		return nil, err
	}
	return json.Marshal(j)
}

// UnmarshalRecord decodes wire JSON produced by MarshalRecord. Errors wrap
// ErrInvalid.
func UnmarshalRecord(b []byte) (compute.Record, error) {
	var j RecordJSON
	if err := json.Unmarshal(b, &j); err != nil {
		return compute.Record{}, fmt.Errorf("%w: record json: %w", ErrInvalid, err)
	}
	if j.V != WireVersion {
		return compute.Record{}, fmt.Errorf("%w: record json version %d, want %d", ErrInvalid, j.V, WireVersion)
	}
	return j.Record()
}

// ValidateEvent checks what sinks need from an event: a machine, a time, a
// known state on both sides and finite numbers. Errors wrap ErrInvalid.
func ValidateEvent(e compute.Event) error {
	switch {
	case e.Machine == "":
		return fmt.Errorf("%w: event without machine id", ErrInvalid)
	case e.Time.IsZero():
		return fmt.Errorf("%w: event for %s without time", ErrInvalid, e.Machine)
	case e.Rule == "":
		return fmt.Errorf("%w: event for %s without rule", ErrInvalid, e.Machine)
	case e.From < compute.AlertInactive || e.From > compute.AlertResolved, e.To < compute.AlertInactive || e.To > compute.AlertResolved:
		return fmt.Errorf("%w: event %s/%s has unknown state %d -> %d", ErrInvalid, e.Machine, e.Rule, int(e.From), int(e.To))
	case !finite(e.Value) || !finite(e.Limit) || !finite(e.U95):
		return fmt.Errorf("%w: event %s/%s has a non-finite number (value %v, limit %v, u95 %v)", ErrInvalid, e.Machine, e.Rule, e.Value, e.Limit, e.U95)
	}
	return nil
}

// EventToJSON converts an event to its wire form after ValidateEvent.
func EventToJSON(e compute.Event) (EventJSON, error) {
	if err := ValidateEvent(e); err != nil {
		return EventJSON{}, err
	}
	return EventJSON{
		V: WireVersion, Time: e.Time.UTC(), Site: e.Site, Machine: e.Machine, Rule: e.Rule, Class: string(e.Class),
		Figure: e.Figure, From: e.From.String(), To: e.To.String(), FromCode: int(e.From), ToCode: int(e.To),
		Value: e.Value, Limit: e.Limit, U95: e.U95, Since: e.Since.UTC(), Reason: e.Reason,
	}, nil
}

// Event converts the wire form back, checking state names against codes.
func (j EventJSON) Event() (compute.Event, error) {
	from, to := compute.AlertState(j.FromCode), compute.AlertState(j.ToCode)
	if from.String() != j.From || to.String() != j.To {
		return compute.Event{}, fmt.Errorf("%w: event %s/%s: states %q/%q disagree with codes %d/%d", ErrInvalid, j.Machine, j.Rule, j.From, j.To, j.FromCode, j.ToCode)
	}
	e := compute.Event{
		Time: j.Time.UTC(), Site: j.Site, Machine: j.Machine, Rule: j.Rule, Class: compute.AlertClass(j.Class),
		Figure: j.Figure, From: from, To: to, Value: j.Value, Limit: j.Limit, U95: j.U95, Since: j.Since.UTC(), Reason: j.Reason,
	}
	if err := ValidateEvent(e); err != nil {
		return compute.Event{}, err
	}
	return e, nil
}

// MarshalEvent encodes an event as wire JSON. Errors wrap ErrInvalid.
func MarshalEvent(e compute.Event) ([]byte, error) {
	j, err := EventToJSON(e)
	if err != nil {
		return nil, err
	}
	return json.Marshal(j)
}

// UnmarshalEvent decodes wire JSON produced by MarshalEvent.
func UnmarshalEvent(b []byte) (compute.Event, error) {
	var j EventJSON
	if err := json.Unmarshal(b, &j); err != nil {
		return compute.Event{}, fmt.Errorf("%w: event json: %w", ErrInvalid, err)
	}
	if j.V != WireVersion {
		return compute.Event{}, fmt.Errorf("%w: event json version %d, want %d", ErrInvalid, j.V, WireVersion)
	}
	return j.Event()
}
