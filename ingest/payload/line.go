package payload

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"strconv"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
)

// maxLineNanos bounds line-protocol timestamps so that the multiplication
// by the precision cannot overflow int64 (year 2262 in nanoseconds).
const maxLineNanos = math.MaxInt64

type lpField struct {
	key   []byte
	value float64
	kind  byte // 'n' number, 's' string (quality), 'x' ignored string
	sval  []byte
}

func (d *Decoder) decodeLines(data []byte, recv time.Time, dst []ingest.Sample, errs []Error) ([]ingest.Sample, []Error) {
	// Scratch kept in the decoder from message to message.
	fields, nameBuf := d.fields[:0], d.nameBuf[:0]
	defer func() {
		clear(fields[:cap(fields)]) // keeps no reference to this payload
		d.fields, d.nameBuf = fields[:0], nameBuf[:0]
	}()
	for len(data) > 0 {
		var line []byte
		if i := bytes.IndexByte(data, '\n'); i >= 0 {
			line, data = data[:i], data[i+1:]
		} else {
			line, data = data, nil
		}
		for len(line) > 0 && line[len(line)-1] == '\r' {
			line = line[:len(line)-1]
		}
		for len(line) > 0 && (line[0] == ' ' || line[0] == '\t') {
			line = line[1:]
		}
		if len(line) == 0 || line[0] == '#' {
			continue
		}
		if !d.noFastLine {
			if smp, ok := d.fastLine(line, recv); ok {
				dst = append(dst, smp)
				continue
			}
		}
		var err error
		var base []byte
		var ts int64
		var hasTS bool
		base, fields, ts, hasTS, err = parseLine(line, fields[:0])
		if err != nil {
			errs = append(errs, Error{Tag: d.name(base), Err: err})
			continue
		}
		var st time.Time
		if hasTS {
			p := d.Precision
			if p <= 0 {
				p = time.Nanosecond
			}
			if ts > maxLineNanos/int64(p) || ts < -maxLineNanos/int64(p) {
				errs = append(errs, Error{Tag: d.name(base), Err: fmt.Errorf("%w: timestamp %d overflows", ErrBadTime, ts)})
				continue
			}
			st = time.Unix(0, ts*int64(p)).UTC()
		}
		q := ingest.Good
		var status uint32
		var hasStatus, haveQ bool
		bad := false
		for i := range fields {
			f := &fields[i]
			switch string(f.key) {
			case "quality":
				if f.kind != 's' {
					errs = append(errs, Error{Tag: d.name(base), Err: fmt.Errorf("%w: quality must be a string", ErrQuality)})
					bad = true
					break
				}
				qq, err := parseQuality(string(f.sval))
				if err != nil {
					errs = append(errs, Error{Tag: d.name(base), Err: err})
					bad = true
					break
				}
				q, haveQ = qq, true
			case "status":
				if f.kind != 'n' || f.value < 0 || f.value > math.MaxUint32 || f.value != math.Trunc(f.value) {
					errs = append(errs, Error{Tag: d.name(base), Err: fmt.Errorf("%w: status must be an integer 0..4294967295", ErrBadStatus)})
					bad = true
					break
				}
				status, hasStatus = uint32(f.value), true
			}
		}
		if bad {
			continue
		}
		if hasStatus && !haveQ {
			q = ingest.QualityFromStatus(status)
		}
		n := 0
		for i := range fields {
			f := &fields[i]
			if f.kind != 'n' || string(f.key) == "status" {
				continue
			}
			var tag string
			if string(f.key) == "value" {
				tag = d.name(base)
			} else {
				nameBuf = append(append(append(nameBuf[:0], base...), '.'), f.key...)
				tag = d.name(nameBuf)
			}
			dst = append(dst, ingest.Sample{Tag: tag, SourceTime: st, ReceiveTime: recv, Value: f.value,
				Quality: q, StatusCode: status, HasStatus: hasStatus})
			n++
		}
		if n == 0 {
			errs = append(errs, Error{Tag: d.name(base), Err: fmt.Errorf("%w: line has no numeric field", ErrNoValue)})
		}
	}
	return dst, errs
}

// fastLine decodes the everyday line "<name> value=<number>[ <integer
// timestamp>]" in one pass: no tag set, no escapes, a single field named
// value holding a number or boolean (parseLPValue). It reports false for
// every other line, which then goes through parseLine; for the lines it
// takes it gives what the general path gives (FuzzLineFastPath compares
// the two on arbitrary input).
func (d *Decoder) fastLine(line []byte, recv time.Time) (ingest.Sample, bool) {
	i := 0
	for i < len(line) {
		c := line[i]
		if c == ' ' {
			break
		}
		if c == ',' || c == '\\' {
			return ingest.Sample{}, false
		}
		i++
	}
	if i == 0 || i == len(line) {
		return ingest.Sample{}, false
	}
	name := line[:i]
	for i < len(line) && line[i] == ' ' {
		i++
	}
	const key = "value="
	if len(line)-i < len(key) || string(line[i:i+len(key)]) != key {
		return ingest.Sample{}, false
	}
	i += len(key)
	j := i
	for j < len(line) && line[j] != ' ' {
		if line[j] == ',' {
			return ingest.Sample{}, false
		}
		j++
	}
	v, ok := fastDecimal(line[i:j])
	if !ok {
		// Other numbers (exponents, 17 significant digits, i/u integers,
		// booleans) as the general path reads them; strings and errors
		// are left to it.
		if i == j || line[i] == '"' {
			return ingest.Sample{}, false
		}
		var err error
		if v, err = parseLPValue(line[i:j]); err != nil {
			return ingest.Sample{}, false
		}
	}
	for j < len(line) && line[j] == ' ' {
		j++
	}
	smp := ingest.Sample{ReceiveTime: recv, Value: v}
	if j < len(line) {
		rest := line[j:]
		for len(rest) > 0 && (rest[len(rest)-1] == ' ' || rest[len(rest)-1] == '\t') {
			rest = rest[:len(rest)-1]
		}
		ts, ok := parseInt64(rest) // false when empty: the general path reports it
		if !ok {
			return ingest.Sample{}, false
		}
		if p := d.Precision; p > time.Nanosecond {
			if ts > maxLineNanos/int64(p) || ts < -maxLineNanos/int64(p) {
				return ingest.Sample{}, false
			}
			ts *= int64(p)
		} else if ts < -maxLineNanos { // the general path's bound (no division for ns)
			return ingest.Sample{}, false
		}
		smp.SourceTime = time.Unix(0, ts).UTC()
	}
	smp.Tag = d.name(name)
	return smp, true
}

// parseLine splits one line. It returns the series base name (the "tag"
// tag's value, or the measurement), unescaped.
func parseLine(line []byte, fields []lpField) (base []byte, _ []lpField, ts int64, hasTS bool, err error) {
	// Measurement: up to an unescaped ',' or ' '.
	i := 0
	var meas []byte
	meas, i = scanKey(line, i, &stopMeas)
	if len(meas) == 0 {
		return nil, fields, 0, false, fmt.Errorf("%w: missing measurement", ErrSyntax)
	}
	base = meas
	// Tag set.
	for i < len(line) && line[i] == ',' {
		i++
		var k, v []byte
		k, i = scanKey(line, i, &stopKey)
		if i >= len(line) || line[i] != '=' || len(k) == 0 {
			return base, fields, 0, false, fmt.Errorf("%w: bad tag set", ErrSyntax)
		}
		i++
		v, i = scanKey(line, i, &stopMeas)
		if len(v) == 0 {
			return base, fields, 0, false, fmt.Errorf("%w: empty tag value", ErrSyntax)
		}
		if string(k) == "tag" {
			base = v
		}
	}
	if i >= len(line) || line[i] != ' ' {
		return base, fields, 0, false, fmt.Errorf("%w: missing field set", ErrSyntax)
	}
	for i < len(line) && line[i] == ' ' {
		i++
	}
	// Field set.
	for {
		var k []byte
		k, i = scanKey(line, i, &stopKey)
		if i >= len(line) || line[i] != '=' || len(k) == 0 {
			return base, fields, 0, false, fmt.Errorf("%w: bad field", ErrSyntax)
		}
		i++
		if i >= len(line) {
			return base, fields, 0, false, fmt.Errorf("%w: field %q without value", ErrSyntax, k)
		}
		f := lpField{key: k}
		if line[i] == '"' {
			j := i + 1
			var sb []byte
			closed := false
			for j < len(line) {
				c := line[j]
				if c == '\\' && j+1 < len(line) && (line[j+1] == '"' || line[j+1] == '\\') {
					sb = append(sb, line[j+1])
					j += 2
					continue
				}
				if c == '"' {
					closed = true
					j++
					break
				}
				sb = append(sb, c)
				j++
			}
			if !closed {
				return base, fields, 0, false, fmt.Errorf("%w: unterminated string field %q", ErrSyntax, k)
			}
			f.kind, f.sval = 's', sb
			i = j
		} else {
			j := i
			for j < len(line) && line[j] != ',' && line[j] != ' ' {
				j++
			}
			v, perr := parseLPValue(line[i:j])
			if perr != nil {
				return base, fields, 0, false, fmt.Errorf("field %q: %w", k, perr)
			}
			f.kind, f.value = 'n', v
			i = j
		}
		fields = append(fields, f)
		if i < len(line) && line[i] == ',' {
			i++
			continue
		}
		break
	}
	for i < len(line) && line[i] == ' ' {
		i++
	}
	if i < len(line) {
		rest := line[i:]
		for len(rest) > 0 && (rest[len(rest)-1] == ' ' || rest[len(rest)-1] == '\t') {
			rest = rest[:len(rest)-1]
		}
		t, ok := parseInt64(rest)
		if !ok {
			return base, fields, 0, false, fmt.Errorf("%w: %q", ErrBadTime, truncate(line[i:]))
		}
		ts, hasTS = t, true
	}
	return base, fields, ts, hasTS, nil
}

// Stop sets of scanKey.
var stopMeas, stopKey [256]bool

func init() {
	stopMeas[','], stopMeas[' '] = true, true
	stopKey['='] = true
}

// scanKey reads up to an unescaped byte in stop, removing backslash escapes
// of ',', ' ', '=' and '\\'. The result aliases line when nothing was
// escaped.
func scanKey(line []byte, i int, stop *[256]bool) ([]byte, int) {
	start := i
	var out []byte
	escaped := false
	for i < len(line) {
		c := line[i]
		if !stop[c] && c != '\\' { // the common byte: part of the key
			if escaped {
				out = append(out, c)
			}
			i++
			continue
		}
		if c == '\\' && i+1 < len(line) {
			n := line[i+1]
			if n == ',' || n == ' ' || n == '=' || n == '\\' {
				if !escaped {
					out = append(out, line[start:i]...)
					escaped = true
				}
				out = append(out, n)
				i += 2
				continue
			}
		}
		if stop[c] {
			break
		}
		if escaped {
			out = append(out, c)
		}
		i++
	}
	if escaped {
		return out, i
	}
	return line[start:i], i
}

// parseInt64 reads an optionally signed decimal integer; false on any
// other byte, on an empty number or on overflow.
func parseInt64(b []byte) (int64, bool) {
	neg := false
	if len(b) > 0 && (b[0] == '-' || b[0] == '+') {
		neg = b[0] == '-'
		b = b[1:]
	}
	if len(b) == 0 {
		return 0, false
	}
	for len(b) > 1 && b[0] == '0' {
		b = b[1:]
	}
	if len(b) > 19 {
		return 0, false
	}
	var u uint64
	for len(b) >= 8 {
		v, ok := eightDigits(b)
		if !ok {
			return 0, false
		}
		u = u*1e8 + v
		b = b[8:]
	}
	for _, c := range b {
		if c < '0' || c > '9' {
			return 0, false
		}
		u = u*10 + uint64(c-'0')
	}
	// 19 digits fit in uint64; the int64 range is checked here.
	if neg {
		if u > 1<<63 {
			return 0, false
		}
		return -int64(u), true
	}
	if u > 1<<63-1 {
		return 0, false
	}
	return int64(u), true
}

// eightDigits reads 8 ASCII digits at once (SWAR: the byte check and the
// three multiply-shift steps of simdjson's parse_eight_digits_unrolled,
// Lemire and Langdale 2019); false if any byte is not a digit.
func eightDigits(b []byte) (uint64, bool) {
	v := binary.LittleEndian.Uint64(b)
	if (v&0xF0F0F0F0F0F0F0F0)|(((v+0x0606060606060606)&0xF0F0F0F0F0F0F0F0)>>4) != 0x3333333333333333 {
		return 0, false
	}
	v = (v & 0x0F0F0F0F0F0F0F0F) * 2561 >> 8
	v = (v & 0x00FF00FF00FF00FF) * 6553601 >> 16
	return (v & 0x0000FFFF0000FFFF) * 42949672960001 >> 32, true
}

func parseLPValue(b []byte) (float64, error) {
	if len(b) == 0 {
		return 0, fmt.Errorf("%w: empty value", ErrBadValue)
	}
	if c := b[0]; c == '-' || (c >= '0' && c <= '9') {
		if v, ok := fastDecimal(b); ok {
			return v, nil
		}
	}
	switch string(b) {
	case "t", "T", "true", "True", "TRUE":
		return 1, nil
	case "f", "F", "false", "False", "FALSE":
		return 0, nil
	}
	last := b[len(b)-1]
	switch last {
	case 'i':
		n, err := strconv.ParseInt(string(b[:len(b)-1]), 10, 64)
		if err != nil {
			return 0, fmt.Errorf("%w: %q", ErrBadValue, truncate(b))
		}
		return float64(n), nil
	case 'u':
		n, err := strconv.ParseUint(string(b[:len(b)-1]), 10, 64)
		if err != nil {
			return 0, fmt.Errorf("%w: %q", ErrBadValue, truncate(b))
		}
		return float64(n), nil
	}
	v, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		return 0, fmt.Errorf("%w: %q", ErrBadValue, truncate(b))
	}
	return v, nil
}
