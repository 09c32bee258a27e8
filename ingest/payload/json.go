package payload

import (
	"fmt"
	"math"
	"strconv"
	"time"
	"unicode/utf16"
	"unicode/utf8"

	"github.com/exergywatch/exergywatch/ingest"
)

// The JSON decoder is a small hand-written scanner for the schema in the
// package documentation: about ten times faster than encoding/json with
// RawMessage for this shape, and it allocates only for new tag names.
// It first validates the whole payload (RFC 8259 grammar; invalid UTF-8
// in strings is tolerated and replaced by U+FFFD in tag names, as
// encoding/json does), then extracts. Keys are case-sensitive; for a
// repeated key the last one wins; unknown keys are skipped.

const maxDepth = 64

type kind byte

const (
	kNone kind = iota
	kString
	kNumber
	kTrue
	kFalse
	kNull
	kObject
	kArray
)

type span struct {
	k          kind
	start, end int // for strings: inside the quotes
	esc        bool
}

type scanner struct {
	b []byte
	i int
}

func (s *scanner) ws() {
	for s.i < len(s.b) {
		switch s.b[s.i] {
		case ' ', '\t', '\n', '\r':
			s.i++
		default:
			return
		}
	}
}

// value scans one JSON value and returns its span; ok false on a syntax
// error.
func (s *scanner) value(depth int) (span, bool) {
	s.ws()
	if s.i >= len(s.b) || depth > maxDepth {
		return span{}, false
	}
	start := s.i
	switch c := s.b[s.i]; {
	case c == '"':
		return s.str()
	case c == '{':
		s.i++
		s.ws()
		if s.i < len(s.b) && s.b[s.i] == '}' {
			s.i++
			return span{k: kObject, start: start, end: s.i}, true
		}
		for {
			s.ws()
			if s.i >= len(s.b) || s.b[s.i] != '"' {
				return span{}, false
			}
			if _, ok := s.str(); !ok {
				return span{}, false
			}
			s.ws()
			if s.i >= len(s.b) || s.b[s.i] != ':' {
				return span{}, false
			}
			s.i++
			if _, ok := s.value(depth + 1); !ok {
				return span{}, false
			}
			s.ws()
			if s.i >= len(s.b) {
				return span{}, false
			}
			if s.b[s.i] == ',' {
				s.i++
				continue
			}
			if s.b[s.i] == '}' {
				s.i++
				return span{k: kObject, start: start, end: s.i}, true
			}
			return span{}, false
		}
	case c == '[':
		s.i++
		s.ws()
		if s.i < len(s.b) && s.b[s.i] == ']' {
			s.i++
			return span{k: kArray, start: start, end: s.i}, true
		}
		for {
			if _, ok := s.value(depth + 1); !ok {
				return span{}, false
			}
			s.ws()
			if s.i >= len(s.b) {
				return span{}, false
			}
			if s.b[s.i] == ',' {
				s.i++
				continue
			}
			if s.b[s.i] == ']' {
				s.i++
				return span{k: kArray, start: start, end: s.i}, true
			}
			return span{}, false
		}
	case c == 't':
		return s.lit("true", kTrue)
	case c == 'f':
		return s.lit("false", kFalse)
	case c == 'n':
		return s.lit("null", kNull)
	case c == '-' || (c >= '0' && c <= '9'):
		return s.num()
	}
	return span{}, false
}

func (s *scanner) lit(w string, k kind) (span, bool) {
	if len(s.b)-s.i < len(w) || string(s.b[s.i:s.i+len(w)]) != w {
		return span{}, false
	}
	sp := span{k: k, start: s.i, end: s.i + len(w)}
	s.i += len(w)
	return sp, true
}

// num scans the RFC 8259 number grammar.
func (s *scanner) num() (span, bool) {
	start := s.i
	if s.b[s.i] == '-' {
		s.i++
	}
	if s.i >= len(s.b) {
		return span{}, false
	}
	if s.b[s.i] == '0' {
		s.i++
	} else if j := skipDigits(s.b, s.i); j == s.i {
		return span{}, false
	} else {
		s.i = j
	}
	if s.i < len(s.b) && s.b[s.i] == '.' {
		s.i++
		j := skipDigits(s.b, s.i)
		if j == s.i {
			return span{}, false
		}
		s.i = j
	}
	if s.i < len(s.b) && (s.b[s.i] == 'e' || s.b[s.i] == 'E') {
		s.i++
		if s.i < len(s.b) && (s.b[s.i] == '+' || s.b[s.i] == '-') {
			s.i++
		}
		j := skipDigits(s.b, s.i)
		if j == s.i {
			return span{}, false
		}
		s.i = j
	}
	return span{k: kNumber, start: start, end: s.i}, true
}

// skipDigits returns the index of the first byte at or after i that is not
// an ASCII digit.
func skipDigits(b []byte, i int) int {
	for i < len(b) && b[i]-'0' <= 9 {
		i++
	}
	return i
}

func (s *scanner) str() (span, bool) {
	s.i++ // opening quote
	start := s.i
	esc := false
	for s.i < len(s.b) {
		c := s.b[s.i]
		switch {
		case c == '"':
			sp := span{k: kString, start: start, end: s.i, esc: esc}
			s.i++
			return sp, true
		case c == '\\':
			esc = true
			if s.i+1 >= len(s.b) {
				return span{}, false
			}
			switch s.b[s.i+1] {
			case '"', '\\', '/', 'b', 'f', 'n', 'r', 't':
				s.i += 2
			case 'u':
				if s.i+6 > len(s.b) {
					return span{}, false
				}
				for _, h := range s.b[s.i+2 : s.i+6] {
					if !isHex(h) {
						return span{}, false
					}
				}
				s.i += 6
			default:
				return span{}, false
			}
		case c < 0x20:
			return span{}, false
		default:
			s.i++
		}
	}
	return span{}, false
}

func isHex(c byte) bool {
	return (c >= '0' && c <= '9') || (c >= 'a' && c <= 'f') || (c >= 'A' && c <= 'F')
}

// text returns the string value of a string span (unescaped, invalid UTF-8
// replaced), appending to buf when it must build it.
func text(b []byte, sp span, buf []byte) []byte {
	raw := b[sp.start:sp.end]
	if !sp.esc {
		if utf8.Valid(raw) {
			return raw
		}
		return []byte(string([]rune(string(raw)))) // replaces invalid bytes with U+FFFD
	}
	out := buf[:0]
	for i := 0; i < len(raw); {
		c := raw[i]
		if c != '\\' {
			r, n := utf8.DecodeRune(raw[i:])
			out = utf8.AppendRune(out, r)
			i += n
			continue
		}
		switch raw[i+1] {
		case 'b':
			out = append(out, '\b')
		case 'f':
			out = append(out, '\f')
		case 'n':
			out = append(out, '\n')
		case 'r':
			out = append(out, '\r')
		case 't':
			out = append(out, '\t')
		case 'u':
			r := rune(hex4(raw[i+2 : i+6]))
			i += 6
			if utf16.IsSurrogate(r) {
				if i+6 <= len(raw) && raw[i] == '\\' && raw[i+1] == 'u' {
					if r2 := utf16.DecodeRune(r, rune(hex4(raw[i+2:i+6]))); r2 != utf8.RuneError {
						out = utf8.AppendRune(out, r2)
						i += 6
						continue
					}
				}
				r = utf8.RuneError
			}
			out = utf8.AppendRune(out, r)
			continue
		default: // '"', '\\', '/'
			out = append(out, raw[i+1])
		}
		i += 2
	}
	return out
}

func hex4(h []byte) uint16 {
	var v uint16
	for _, c := range h {
		v <<= 4
		switch {
		case c >= '0' && c <= '9':
			v |= uint16(c - '0')
		case c >= 'a' && c <= 'f':
			v |= uint16(c - 'a' + 10)
		default:
			v |= uint16(c - 'A' + 10)
		}
	}
	return v
}

// fields are the known keys of a sample or batch object.
type fields struct {
	tag, value, ts, quality, status, samples span
}

// object reads the members of an already validated object at s.i.
func (d *Decoder) object(s *scanner, f *fields) {
	*f = fields{}
	s.ws()
	s.i++ // '{'
	for {
		s.ws()
		if s.b[s.i] == '}' {
			s.i++
			return
		}
		if s.b[s.i] == ',' {
			s.i++
			s.ws()
		}
		ksp, _ := s.str()
		key := text(s.b, ksp, d.buf)
		s.ws()
		s.i++ // ':'
		vsp, _ := s.value(0)
		switch string(key) {
		case "tag":
			f.tag = vsp
		case "value":
			f.value = vsp
		case "ts":
			f.ts = vsp
		case "quality":
			f.quality = vsp
		case "status":
			f.status = vsp
		case "samples":
			f.samples = vsp
		}
	}
}

func (d *Decoder) decodeJSON(data []byte, recv time.Time, dst []ingest.Sample, errs []Error) ([]ingest.Sample, []Error) {
	s := &scanner{b: data}
	top, ok := s.value(0)
	s.ws()
	if !ok || s.i != len(data) {
		if len(data) == 0 || top.k == kNone && s.i >= len(data) {
			return dst, append(errs, Error{Err: fmt.Errorf("%w: empty or truncated payload", ErrSyntax)})
		}
		return dst, append(errs, Error{Err: fmt.Errorf("%w: invalid JSON near byte %d", ErrSyntax, s.i)})
	}
	switch top.k {
	case kArray:
		return d.elements(data, top, nil, recv, dst, errs)
	case kObject:
		var f fields
		d.object(&scanner{b: data, i: top.start}, &f)
		if f.samples.k != kNone && f.samples.k != kNull {
			if f.samples.k != kArray {
				return dst, append(errs, Error{Err: fmt.Errorf("%w: samples is not an array", ErrSyntax)})
			}
			var def *time.Time
			if f.ts.k != kNone && f.ts.k != kNull {
				t, err := d.jsonTime(data, f.ts)
				if err != nil {
					return dst, append(errs, Error{Err: err})
				}
				def = &t
			}
			return d.elements(data, f.samples, def, recv, dst, errs)
		}
		if f.samples.k == kNull {
			return dst, errs // an empty batch
		}
		return d.sample(data, &f, nil, recv, dst, errs)
	}
	return dst, append(errs, Error{Err: fmt.Errorf("%w: payload is neither a sample object nor an array", ErrSyntax)})
}

func (d *Decoder) elements(data []byte, arr span, def *time.Time, recv time.Time, dst []ingest.Sample, errs []Error) ([]ingest.Sample, []Error) {
	s := &scanner{b: data, i: arr.start + 1}
	var f fields
	for {
		s.ws()
		if s.b[s.i] == ']' {
			return dst, errs
		}
		if s.b[s.i] == ',' {
			s.i++
			s.ws()
		}
		if s.b[s.i] != '{' {
			if _, ok := s.value(0); !ok {
				return dst, append(errs, Error{Err: fmt.Errorf("%w: bad batch element", ErrSyntax)})
			}
			errs = append(errs, Error{Err: fmt.Errorf("%w: batch element is not an object", ErrSyntax)})
			continue
		}
		d.object(s, &f)
		dst, errs = d.sample(data, &f, def, recv, dst, errs)
	}
}

func (d *Decoder) sample(data []byte, f *fields, def *time.Time, recv time.Time, dst []ingest.Sample, errs []Error) ([]ingest.Sample, []Error) {
	if f.tag.k != kString || f.tag.start == f.tag.end {
		return dst, append(errs, Error{Err: ErrNoTag})
	}
	tb := text(data, f.tag, d.buf)
	if f.tag.esc {
		d.buf = tb[:0] // keep the grown scratch buffer; never alias data
	}
	tag := d.name(tb)
	smp := ingest.Sample{Tag: tag, ReceiveTime: recv}
	switch f.value.k {
	case kNumber:
		v, ok := fastDecimal(data[f.value.start:f.value.end])
		var err error
		if !ok {
			v, err = strconv.ParseFloat(string(data[f.value.start:f.value.end]), 64)
		}
		if err != nil {
			return dst, append(errs, Error{Tag: tag, Err: fmt.Errorf("%w: %s", ErrBadValue, truncate(data[f.value.start:f.value.end]))})
		}
		smp.Value = v
	case kTrue:
		smp.Value = 1
	case kFalse:
		smp.Value = 0
	case kNone, kNull:
		return dst, append(errs, Error{Tag: tag, Err: ErrNoValue})
	default:
		return dst, append(errs, Error{Tag: tag, Err: fmt.Errorf("%w: not a number or boolean", ErrBadValue)})
	}
	switch f.ts.k {
	case kNone, kNull:
		if def != nil {
			smp.SourceTime = *def
		}
	default:
		t, err := d.jsonTime(data, f.ts)
		if err != nil {
			return dst, append(errs, Error{Tag: tag, Err: err})
		}
		smp.SourceTime = t
	}
	switch f.status.k {
	case kNone, kNull:
	case kNumber:
		c, err := strconv.ParseUint(string(data[f.status.start:f.status.end]), 10, 32)
		if err != nil {
			return dst, append(errs, Error{Tag: tag, Err: fmt.Errorf("%w: %s", ErrBadStatus, truncate(data[f.status.start:f.status.end]))})
		}
		smp.StatusCode, smp.HasStatus = uint32(c), true
		smp.Quality = ingest.QualityFromStatus(uint32(c))
	default:
		return dst, append(errs, Error{Tag: tag, Err: fmt.Errorf("%w: not an unsigned integer", ErrBadStatus)})
	}
	switch f.quality.k {
	case kNone, kNull:
	case kString:
		q, err := parseQuality(string(text(data, f.quality, nil)))
		if err != nil {
			return dst, append(errs, Error{Tag: tag, Err: err})
		}
		smp.Quality = q
	default:
		return dst, append(errs, Error{Tag: tag, Err: fmt.Errorf("%w: quality must be a string", ErrQuality)})
	}
	return append(dst, smp), errs
}

// Unix milliseconds accepted for "ts": values beyond ±1e15 ms (year 33658)
// are refused here; the pipeline judges plausibility.
const maxAbsMillis = 1e15

func (d *Decoder) jsonTime(data []byte, sp span) (time.Time, error) {
	switch sp.k {
	case kString:
		t, err := time.Parse(time.RFC3339Nano, string(text(data, sp, nil)))
		if err != nil {
			return time.Time{}, fmt.Errorf("%w: %v", ErrBadTime, err)
		}
		return t, nil
	case kNumber:
		raw := data[sp.start:sp.end]
		// Whole milliseconds (the usual form) need no float arithmetic:
		// below 1e15 in magnitude they are what the float path gives
		// exactly (ParseFloat is exact there and the split into seconds
		// and nanoseconds is integral).
		if len(raw) <= 17 {
			if n, ok := parseInt64(raw); ok && n <= maxAbsMillis && n >= -maxAbsMillis {
				return time.UnixMilli(n).UTC(), nil
			}
		}
		return millisFloat(raw)
	}
	return time.Time{}, fmt.Errorf("%w: ts must be RFC 3339 text or Unix milliseconds", ErrBadTime)
}

// millisFloat reads Unix milliseconds with a fraction (or an exponent).
func millisFloat(raw []byte) (time.Time, error) {
	ms, err := strconv.ParseFloat(string(raw), 64)
	if err != nil || math.IsNaN(ms) || math.Abs(ms) > maxAbsMillis {
		return time.Time{}, fmt.Errorf("%w: %s is not RFC 3339 text or Unix milliseconds", ErrBadTime, truncate(raw))
	}
	sec := math.Floor(ms / 1000)
	ns := math.Round((ms - sec*1000) * 1e6)
	return time.Unix(int64(sec), int64(ns)).UTC(), nil
}

func truncate(b []byte) string {
	if len(b) > 40 {
		return string(b[:40]) + "..."
	}
	return string(b)
}
