package influx

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/sinks"
)

// Series design (written with millisecond timestamps; <p> is
// Config.MeasurementPrefix, default "exw"):
//
//	<p>_machine  one point per record
//	  tags:   site, machine, kind, quality (record quality name)
//	  fields: quality_code (int, 0 good 1 uncertain 2 transient 3 bad)
//	          <figure>              float, SI unit in the figure name; absent when the figure is bad
//	          <figure>_u95          float, expanded uncertainty k=2; absent when not evaluated or bad
//	          <figure>_quality_code int, as quality_code
//	<p>_reason   one point per active reason code (record or figure)
//	  tags:   site, machine, kind, scope ("record" or the figure name), reason
//	  fields: active (int, always 1)
//	<p>_alert    one point per alert transition
//	  tags:   site, machine, rule, class, figure
//	  fields: state_code (int, new state: 0 inactive 1 pending 2 firing 3 resolved),
//	          from_state_code (int), value, limit, value_u95 (floats, unit of the figure),
//	          condition_age_s (float, seconds from Since to Time; absent when Since is zero)
//
// VictoriaMetrics names these <measurement>_<field>, e.g.
// exw_machine_isentropic_efficiency{site,machine,kind,quality}. No string
// field is ever written (VictoriaMetrics turns strings into 0): quality and
// reasons are tags or integer codes. An event's free-text Reason is not
// written here; the NATS sink and the store carry it.

// Tag and field names.
const (
	MeasMachine = "machine" // suffix of the per-record measurement
	MeasReason  = "reason"  // suffix of the reason-flag measurement
	MeasAlert   = "alert"   // suffix of the alert-transition measurement
)

// errLine marks a line that is not line protocol this package can read.
var errLine = errors.New("malformed line")

// validName reports whether s is usable as a field key or measurement:
// ASCII letters, digits and '_', not starting with a digit.
func validName(s string) bool {
	if s == "" || len(s) > 200 {
		return false
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c >= 'a' && c <= 'z', c >= 'A' && c <= 'Z', c == '_':
		case c >= '0' && c <= '9' && i > 0:
		default:
			return false
		}
	}
	return true
}

// checkTag refuses tag keys and values that line protocol cannot carry
// unambiguously: control characters and backslashes.
func checkTag(k, v string) error {
	for _, s := range [2]string{k, v} {
		for _, c := range s {
			if c < 0x20 || c == 0x7f || c == '\\' {
				return fmt.Errorf("%w: tag %s=%q has a control character or backslash", sinks.ErrInvalid, k, v)
			}
		}
	}
	if !validName(k) {
		return fmt.Errorf("%w: tag key %q is not a name", sinks.ErrInvalid, k)
	}
	return nil
}

// appendEscaped appends a tag value with ',', '=' and ' ' escaped.
func appendEscaped(dst []byte, v string) []byte {
	for i := 0; i < len(v); i++ {
		switch c := v[i]; c {
		case ',', '=', ' ':
			dst = append(dst, '\\', c)
		default:
			dst = append(dst, c)
		}
	}
	return dst
}

type tag struct{ k, v string }

type field struct {
	k     string
	isInt bool
	i     int64
	f     float64
}

// point is one line of line protocol as this package writes and reads it.
type point struct {
	meas   string
	tags   []tag // sorted by key, no empty values
	fields []field
	ms     int64 // Unix milliseconds
}

// appendLine appends the encoded point and a trailing newline to dst. It
// refuses non-finite floats, bad names, duplicate keys and empty field sets.
func appendLine(dst []byte, p point) ([]byte, error) {
	if !validName(p.meas) {
		return dst, fmt.Errorf("%w: measurement %q is not a name", sinks.ErrInvalid, p.meas)
	}
	if len(p.fields) == 0 {
		return dst, fmt.Errorf("%w: point %s without fields", sinks.ErrInvalid, p.meas)
	}
	start := len(dst)
	dst = append(dst, p.meas...)
	for i, t := range p.tags {
		if err := checkTag(t.k, t.v); err != nil {
			return dst[:start], err
		}
		if i > 0 && p.tags[i-1].k >= t.k {
			return dst[:start], fmt.Errorf("%w: tags of %s not sorted or duplicated at %q", sinks.ErrInvalid, p.meas, t.k)
		}
		if t.v == "" {
			continue
		}
		dst = append(dst, ',')
		dst = append(dst, t.k...)
		dst = append(dst, '=')
		dst = appendEscaped(dst, t.v)
	}
	var seen map[string]bool
	if len(p.fields) > 16 {
		seen = make(map[string]bool, len(p.fields))
	}
	for i, f := range p.fields {
		if !validName(f.k) {
			return dst[:start], fmt.Errorf("%w: field key %q of %s is not a name", sinks.ErrInvalid, f.k, p.meas)
		}
		dup := false
		if seen != nil {
			dup = seen[f.k]
			seen[f.k] = true
		} else {
			for _, g := range p.fields[:i] {
				if g.k == f.k {
					dup = true
					break
				}
			}
		}
		if dup {
			return dst[:start], fmt.Errorf("%w: field key %q appears twice in %s", sinks.ErrInvalid, f.k, p.meas)
		}
		if i == 0 {
			dst = append(dst, ' ')
		} else {
			dst = append(dst, ',')
		}
		dst = append(dst, f.k...)
		dst = append(dst, '=')
		if f.isInt {
			dst = strconv.AppendInt(dst, f.i, 10)
			dst = append(dst, 'i')
		} else {
			if math.IsNaN(f.f) || math.IsInf(f.f, 0) {
				return dst[:start], fmt.Errorf("%w: field %s of %s is %v", sinks.ErrInvalid, f.k, p.meas, f.f)
			}
			dst = strconv.AppendFloat(dst, f.f, 'g', -1, 64)
		}
	}
	if p.ms < 0 {
		return dst[:start], fmt.Errorf("%w: point %s has a time before 1970", sinks.ErrInvalid, p.meas)
	}
	dst = append(dst, ' ')
	dst = strconv.AppendInt(dst, p.ms, 10)
	dst = append(dst, '\n')
	return dst, nil
}

// parseLine reads one line (without its newline) in the subset of line
// protocol that appendLine writes: escaped measurement and tags, float and
// integer fields, a millisecond timestamp. Anything else is errLine.
func parseLine(line []byte) (point, error) {
	var p point
	if len(line) == 0 {
		return p, fmt.Errorf("%w: empty", errLine)
	}
	// split on unescaped spaces into 3 parts
	parts := splitUnescaped(line, ' ')
	if len(parts) != 3 {
		return p, fmt.Errorf("%w: want 3 space-separated parts, got %d", errLine, len(parts))
	}
	head := splitUnescaped(parts[0], ',')
	p.meas = string(head[0])
	if !validName(p.meas) {
		return p, fmt.Errorf("%w: measurement %q", errLine, head[0])
	}
	for _, kv := range head[1:] {
		kvp := splitUnescaped(kv, '=')
		if len(kvp) != 2 || len(kvp[1]) == 0 {
			return p, fmt.Errorf("%w: tag %q", errLine, kv)
		}
		v, err := unescape(kvp[1])
		if err != nil {
			return p, err
		}
		t := tag{k: string(kvp[0]), v: v}
		if err := checkTag(t.k, t.v); err != nil {
			return p, fmt.Errorf("%w: %v", errLine, err)
		}
		if n := len(p.tags); n > 0 && p.tags[n-1].k >= t.k {
			return p, fmt.Errorf("%w: tags not sorted at %q", errLine, t.k)
		}
		p.tags = append(p.tags, t)
	}
	seen := map[string]bool{}
	for _, kv := range splitUnescaped(parts[1], ',') {
		kvp := bytes.SplitN(kv, []byte{'='}, 2)
		if len(kvp) != 2 || len(kvp[1]) == 0 {
			return p, fmt.Errorf("%w: field %q", errLine, kv)
		}
		f := field{k: string(kvp[0])}
		if !validName(f.k) || seen[f.k] {
			return p, fmt.Errorf("%w: field key %q", errLine, kvp[0])
		}
		seen[f.k] = true
		v := kvp[1]
		if v[len(v)-1] == 'i' {
			n, err := strconv.ParseInt(string(v[:len(v)-1]), 10, 64)
			if err != nil {
				return p, fmt.Errorf("%w: integer field %s: %v", errLine, f.k, err)
			}
			f.isInt, f.i = true, n
		} else {
			x, err := strconv.ParseFloat(string(v), 64)
			if err != nil || math.IsNaN(x) || math.IsInf(x, 0) {
				return p, fmt.Errorf("%w: float field %s = %q", errLine, f.k, v)
			}
			f.f = x
		}
		p.fields = append(p.fields, f)
	}
	ms, err := strconv.ParseInt(string(parts[2]), 10, 64)
	if err != nil || ms < 0 {
		return p, fmt.Errorf("%w: timestamp %q", errLine, parts[2])
	}
	p.ms = ms
	return p, nil
}

// splitUnescaped splits b at sep bytes not preceded by a backslash.
func splitUnescaped(b []byte, sep byte) [][]byte {
	var out [][]byte
	start := 0
	for i := 0; i < len(b); i++ {
		if b[i] == '\\' {
			i++
			continue
		}
		if b[i] == sep {
			out = append(out, b[start:i])
			start = i + 1
		}
	}
	return append(out, b[start:])
}

func unescape(b []byte) (string, error) {
	var sb strings.Builder
	for i := 0; i < len(b); i++ {
		if b[i] == '\\' {
			if i+1 >= len(b) || !strings.ContainsRune(", =", rune(b[i+1])) {
				return "", fmt.Errorf("%w: bad escape in %q", errLine, b)
			}
			i++
		}
		sb.WriteByte(b[i])
	}
	return sb.String(), nil
}

func qcode(q compute.Quality) int64 { return int64(q) }

// unixMS converts a time to Unix milliseconds (sub-millisecond digits are
// dropped: the database stores milliseconds).
func unixMS(t time.Time) int64 { return t.UnixMilli() }

// encodeRecord appends the lines of one record. It checks the record with
// Validate and refuses what cannot be written faithfully; errors wrap
// sinks.ErrInvalid. It returns the new buffer and the number of points.
func encodeRecord(dst []byte, prefix string, r compute.Record) ([]byte, int, error) {
	start := len(dst)
	if err := r.Validate(); err != nil {
		return dst, 0, fmt.Errorf("%w: %w", sinks.ErrInvalid, err)
	}
	if r.Quality < compute.QualityGood || r.Quality > compute.QualityBad {
		return dst, 0, fmt.Errorf("%w: record %s has unknown quality %d", sinks.ErrInvalid, r.Machine, int(r.Quality))
	}
	ms := unixMS(r.Time)
	base := []tag{{"kind", r.MachineKind}, {"machine", r.Machine}, {"site", r.Site}}
	p := point{meas: prefix + "_" + MeasMachine, ms: ms,
		tags:   []tag{{"kind", r.MachineKind}, {"machine", r.Machine}, {"quality", r.Quality.String()}, {"site", r.Site}},
		fields: append(make([]field, 0, 1+3*len(r.Figures)), field{k: "quality_code", isInt: true, i: qcode(r.Quality)})}
	for _, f := range r.Figures {
		if f.Quality < compute.QualityGood || f.Quality > compute.QualityBad {
			return dst, 0, fmt.Errorf("%w: record %s: figure %s has unknown quality %d", sinks.ErrInvalid, r.Machine, f.Name, int(f.Quality))
		}
		if f.Quality != compute.QualityBad {
			p.fields = append(p.fields, field{k: f.Name, f: f.Value})
			if f.HasU95 {
				p.fields = append(p.fields, field{k: f.Name + "_u95", f: f.U95})
			}
		}
		p.fields = append(p.fields, field{k: f.Name + "_quality_code", isInt: true, i: qcode(f.Quality)})
	}
	var err error
	if dst, err = appendLine(dst, p); err != nil {
		return dst[:start], 0, fmt.Errorf("record %s: %w", r.Machine, err)
	}
	n := 1
	addReasons := func(scope string, reasons []string) error {
		rs := reasons
		if len(rs) > 1 {
			rs = slices.Clone(reasons)
			slices.Sort(rs)
			rs = slices.Compact(rs)
		}
		for _, reason := range rs {
			if reason == "" {
				continue
			}
			rp := point{meas: prefix + "_" + MeasReason, ms: ms,
				tags:   []tag{base[0], base[1], {"reason", reason}, {"scope", scope}, base[2]},
				fields: []field{{k: "active", isInt: true, i: 1}}}
			if dst, err = appendLine(dst, rp); err != nil {
				return fmt.Errorf("record %s reason %q: %w", r.Machine, reason, err)
			}
			n++
		}
		return nil
	}
	if err := addReasons("record", r.Reasons); err != nil {
		return dst[:start], 0, err
	}
	for _, f := range r.Figures {
		if err := addReasons(f.Name, f.Reasons); err != nil {
			return dst[:start], 0, err
		}
	}
	return dst, n, nil
}

// encodeEvent appends the line of one alert transition.
func encodeEvent(dst []byte, prefix string, e compute.Event) ([]byte, error) {
	if err := sinks.ValidateEvent(e); err != nil {
		return dst, err
	}
	p := point{meas: prefix + "_" + MeasAlert, ms: unixMS(e.Time),
		tags: []tag{{"class", string(e.Class)}, {"figure", e.Figure}, {"machine", e.Machine}, {"rule", e.Rule}, {"site", e.Site}},
		fields: []field{
			{k: "state_code", isInt: true, i: int64(e.To)},
			{k: "from_state_code", isInt: true, i: int64(e.From)},
			{k: "value", f: e.Value},
			{k: "limit", f: e.Limit},
			{k: "value_u95", f: e.U95},
		}}
	if !e.Since.IsZero() {
		p.fields = append(p.fields, field{k: "condition_age_s", f: e.Time.Sub(e.Since).Seconds()})
	}
	out, err := appendLine(dst, p)
	if err != nil {
		return dst, fmt.Errorf("event %s/%s: %w", e.Machine, e.Rule, err)
	}
	return out, nil
}
