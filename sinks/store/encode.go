package store

import (
	"math"
	"strconv"
	"time"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/sinks"
)

// marshalRecord returns the bytes of sinks.MarshalRecord(r). Records whose
// strings need no JSON escaping (printable ASCII without '"', '\\', '<', '>'
// and '&'), whose time is within years 0..9999 and which pass validation
// are written by appendRecordJSON without reflection; every other record,
// and every error, comes from sinks.MarshalRecord itself.
// TestMarshalRecordEqualsWire and FuzzMarshalRecord check that the bytes
// are the same.
func marshalRecord(r compute.Record) ([]byte, error) {
	if b, ok := appendRecordJSON(make([]byte, 0, 256+160*len(r.Figures)), &r); ok {
		return b, nil
	}
	return sinks.MarshalRecord(r)
}

// plain reports whether encoding/json writes s as it is between quotes.
func plain(s string) bool {
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c < 0x20 || c > 0x7e || c == '"' || c == '\\' || c == '<' || c == '>' || c == '&' {
			return false
		}
	}
	return true
}

func plainAll(ss []string) bool {
	for _, s := range ss {
		if !plain(s) {
			return false
		}
	}
	return true
}

func appendQuoted(b []byte, s string) []byte {
	b = append(b, '"')
	b = append(b, s...)
	return append(b, '"')
}

// appendJSONFloat writes a finite float64 as encoding/json does (the
// shortest representation; exponent form below 1e-6 and from 1e21, with a
// one-digit negative exponent written without its leading zero).
func appendJSONFloat(b []byte, f float64) []byte {
	abs := math.Abs(f)
	format := byte('f')
	if abs != 0 && (abs < 1e-6 || abs >= 1e21) {
		format = 'e'
	}
	b = strconv.AppendFloat(b, f, format, -1, 64)
	if format == 'e' {
		// clean up e-09 to e-9
		n := len(b)
		if n >= 4 && b[n-4] == 'e' && b[n-3] == '-' && b[n-2] == '0' {
			b[n-2] = b[n-1]
			b = b[:n-1]
		}
	}
	return b
}

func appendReasons(b []byte, rs []string) []byte {
	b = append(b, `,"reasons":[`...)
	for i, s := range rs {
		if i > 0 {
			b = append(b, ',')
		}
		b = appendQuoted(b, s)
	}
	return append(b, ']')
}

// appendRecordJSON appends the wire JSON of r (sinks.RecordJSON, fields in
// its order, omitempty as tagged) when r is a record it can write exactly
// as encoding/json would; ok is false otherwise, and b is then unusable.
func appendRecordJSON(b []byte, r *compute.Record) ([]byte, bool) {
	if r.Validate() != nil || r.Quality < compute.QualityGood || r.Quality > compute.QualityBad ||
		!plain(r.Site) || !plain(r.Machine) || !plain(r.MachineKind) || !plainAll(r.Reasons) {
		return b, false
	}
	t := r.Time.UTC()
	if y := t.Year(); y < 0 || y > 9999 {
		return b, false
	}
	for i := range r.Figures {
		f := &r.Figures[i]
		if f.Quality < compute.QualityGood || f.Quality > compute.QualityBad || !plain(f.Name) || !plainAll(f.Reasons) {
			return b, false
		}
	}
	q := r.Quality.String()
	if !plain(q) {
		return b, false
	}
	b = append(b, `{"v":`...)
	b = strconv.AppendInt(b, sinks.WireVersion, 10)
	b = append(b, `,"time":"`...)
	b = t.AppendFormat(b, time.RFC3339Nano)
	b = append(b, `","site":`...)
	b = appendQuoted(b, r.Site)
	b = append(b, `,"machine":`...)
	b = appendQuoted(b, r.Machine)
	b = append(b, `,"kind":`...)
	b = appendQuoted(b, r.MachineKind)
	b = append(b, `,"quality":`...)
	b = appendQuoted(b, q)
	b = append(b, `,"quality_code":`...)
	b = strconv.AppendInt(b, int64(r.Quality), 10)
	if len(r.Reasons) > 0 {
		b = appendReasons(b, r.Reasons)
	}
	b = append(b, `,"figures":[`...)
	for i := range r.Figures {
		f := &r.Figures[i]
		fq := f.Quality.String()
		if !plain(fq) {
			return b, false
		}
		if i > 0 {
			b = append(b, ',')
		}
		b = append(b, `{"name":`...)
		b = appendQuoted(b, f.Name)
		if f.Quality != compute.QualityBad {
			b = append(b, `,"value":`...)
			b = appendJSONFloat(b, f.Value)
			if f.HasU95 {
				b = append(b, `,"u95":`...)
				b = appendJSONFloat(b, f.U95)
			}
		}
		b = append(b, `,"quality":`...)
		b = appendQuoted(b, fq)
		b = append(b, `,"quality_code":`...)
		b = strconv.AppendInt(b, int64(f.Quality), 10)
		if len(f.Reasons) > 0 {
			b = appendReasons(b, f.Reasons)
		}
		b = append(b, '}')
	}
	return append(b, "]}"...), true
}
