package main

// Readers of recorded tag history for `exergywatch replay`.
//
// CSV: a header row naming at least the columns tag, time and value, and
// optionally quality (any order; other columns are ignored; names are
// case-insensitive). Fields are comma-separated; a field may be double-quoted
// ("" is a quote inside it) but may not span lines. time is RFC 3339 (a
// fraction of seconds and any offset allowed) or Unix milliseconds (an
// integer, optionally with up to six decimals). value is a decimal number in
// the unit the tag map configures for the tag. quality is good, uncertain or
// bad (empty: good). Blank lines and lines starting with '#' are skipped; a
// UTF-8 byte-order mark and CRLF line ends are accepted.
//
// Line protocol: decoded by ingest/payload, the daemon's own NATS decoder,
// one line at a time: the tag name is the value of the line-protocol tag
// "tag" when present, else the measurement; a field named "value" gives that
// name as it is and every other field "<name>.<field>"; the string field
// "quality" (good, uncertain, bad) and the integer field "status" (an OPC UA
// StatusCode) qualify the line's other fields. Every line must carry a
// timestamp, in the precision given by --precision (default ns).
//
// A row that cannot be read is counted with its reason and its file:line
// (the first few are kept for the summary) and skipped; it never stops the
// replay.

import (
	"bufio"
	"bytes"
	"cmp"
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"os/signal"
	"path/filepath"
	"runtime"
	"runtime/debug"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"time"
	"unsafe"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/config"
	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/align"
	"github.com/exergywatch/exergywatch/ingest/payload"
	"github.com/exergywatch/exergywatch/sinks"
)

// Reasons a row of an input file is rejected (keys of the summary).
const (
	rejTooLong     = "line too long"
	rejFields      = "missing field"
	rejQuote       = "bad quoting"
	rejTag         = "empty tag"
	rejTime        = "bad time"
	rejValue       = "bad value"
	rejNonFinite   = "non-finite value"
	rejQuality     = "unknown quality"
	rejNoTimestamp = "no timestamp"
	rejTooOld      = "time before 2000"
)

// maxLine is the longest input line read (bytes).
const maxLine = 64 << 10

// reorderDepth is how many samples of one file are held to sort out local
// disorder before they enter the merge.
const reorderDepth = 4096

// ErrHeader reports a CSV file without a usable header row.
var ErrHeader = errors.New("csv header")

// rowError is one rejected row.
type rowError struct {
	File   string
	Line   int
	Reason string
	Detail string
}

func (e rowError) String() string {
	if e.Detail == "" {
		return fmt.Sprintf("%s:%d: %s", e.File, e.Line, e.Reason)
	}
	return fmt.Sprintf("%s:%d: %s: %s", e.File, e.Line, e.Reason, e.Detail)
}

// rejects counts rejected rows by reason and keeps the first few.
type rejects struct {
	ByReason map[string]uint64
	First    []rowError
	Total    uint64
}

func (r *rejects) add(e rowError) {
	if r.ByReason == nil {
		r.ByReason = map[string]uint64{}
	}
	r.ByReason[e.Reason]++
	r.Total++
	if len(r.First) < 10 {
		r.First = append(r.First, e)
	}
}

// lineReader yields lines (without the line end) with their numbers; lines
// longer than maxLine are reported once as too long and skipped.
type lineReader struct {
	r      *bufio.Reader
	n      int
	err    error
	counts *countingReader
}

type countingReader struct {
	r io.Reader
	n int64
}

func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += int64(n)
	return n, err
}

func newLineReader(r io.Reader) *lineReader {
	c := &countingReader{r: r}
	return &lineReader{r: bufio.NewReaderSize(c, maxLine), counts: c}
}

// next returns the next line; tooLong is set for a line that was skipped.
func (l *lineReader) next() (line []byte, n int, tooLong bool, ok bool) {
	if l.err != nil {
		return nil, l.n, false, false
	}
	b, err := l.r.ReadSlice('\n')
	l.n++
	if errors.Is(err, bufio.ErrBufferFull) {
		for errors.Is(err, bufio.ErrBufferFull) {
			_, err = l.r.ReadSlice('\n')
		}
		if err != nil {
			l.err = err
		}
		return nil, l.n, true, true
	}
	if err != nil {
		l.err = err
		if len(b) == 0 {
			return nil, l.n, false, false
		}
	}
	if n := len(b); n > 0 && b[n-1] == '\n' {
		b = b[:n-1]
	}
	if n := len(b); n > 0 && b[n-1] == '\r' {
		b = b[:n-1]
	}
	return b, l.n, false, true
}

// splitCSV splits one CSV line into fields, appending to dst. Quoted fields
// may contain commas and doubled quotes.
func splitCSV(line []byte, dst [][]byte, scratch []byte) ([][]byte, []byte, bool) {
	dst = dst[:0]
	scratch = scratch[:0]
	for {
		if len(line) > 0 && line[0] == '"' {
			start := len(scratch)
			i := 1
			closed := false
			for i < len(line) {
				c := line[i]
				if c == '"' {
					if i+1 < len(line) && line[i+1] == '"' {
						scratch = append(scratch, '"')
						i += 2
						continue
					}
					closed = true
					i++
					break
				}
				scratch = append(scratch, c)
				i++
			}
			if !closed {
				return dst, scratch, false
			}
			dst = append(dst, scratch[start:len(scratch):len(scratch)])
			line = line[i:]
			if len(line) == 0 {
				return dst, scratch, true
			}
			if line[0] != ',' {
				return dst, scratch, false
			}
			line = line[1:]
			continue
		}
		i := bytes.IndexByte(line, ',')
		if i < 0 {
			f := line
			if bytes.IndexByte(f, '"') >= 0 {
				return dst, scratch, false
			}
			return append(dst, f), scratch, true
		}
		f := line[:i]
		if bytes.IndexByte(f, '"') >= 0 {
			return dst, scratch, false
		}
		dst = append(dst, f)
		line = line[i+1:]
	}
}

// parseTime reads RFC 3339 or Unix milliseconds (integer with up to six
// decimals). The common forms are read by hand (parseRFC3339Fast,
// parseUnixMsFast); anything else takes the general path, which decides.
func parseTime(b []byte) (time.Time, error) {
	b = bytes.TrimSpace(b)
	if len(b) == 0 {
		return time.Time{}, errors.New("empty")
	}
	if bytes.IndexByte(b, 'T') < 0 && bytes.IndexByte(b, 't') < 0 {
		if t, ok := parseUnixMsFast(b); ok {
			return t, nil
		}
		s := string(b)
		ip, frac, hasFrac := strings.Cut(s, ".")
		ms, err := strconv.ParseInt(ip, 10, 64)
		if err != nil || ip == "" || ip[0] == '+' {
			return time.Time{}, fmt.Errorf("%q is neither RFC 3339 nor Unix milliseconds", s)
		}
		var ns int64
		if hasFrac {
			if len(frac) == 0 || len(frac) > 6 {
				return time.Time{}, fmt.Errorf("%q: Unix milliseconds take 1 to 6 decimals", s)
			}
			f, err := strconv.ParseUint(frac, 10, 32)
			if err != nil {
				return time.Time{}, fmt.Errorf("%q is neither RFC 3339 nor Unix milliseconds", s)
			}
			ns = int64(f)
			for k := len(frac); k < 6; k++ {
				ns *= 10
			}
			if ms < 0 || ip[0] == '-' {
				ns = -ns
			}
		}
		if ms > unixMsLimit || ms < -unixMsLimit {
			return time.Time{}, fmt.Errorf("%q: out of range", s)
		}
		return time.Unix(0, ms*int64(time.Millisecond)+ns).UTC(), nil
	}
	if t, ok := parseRFC3339Fast(b); ok {
		return t, nil
	}
	t, err := time.Parse(time.RFC3339Nano, string(b))
	if err != nil {
		return time.Time{}, fmt.Errorf("%q is neither RFC 3339 nor Unix milliseconds", string(b))
	}
	return t.UTC(), nil
}

// unixMsLimit keeps Unix milliseconds clear of int64 overflow in
// nanoseconds (about year 2262).
const unixMsLimit = math.MaxInt64/int64(time.Millisecond) - 1

// digits2 reads two ASCII digits.
func digits2(b []byte) (int, bool) {
	d0, d1 := b[0]-'0', b[1]-'0'
	if d0 > 9 || d1 > 9 {
		return 0, false
	}
	return int(d0)*10 + int(d1), true
}

// parseRFC3339Fast reads the canonical RFC 3339 form
// YYYY-MM-DDTHH:MM:SS[.F{1,9}](Z|+hh:mm|-hh:mm) with every field in range
// (the day checked against the month), without allocating. ok is false for
// anything else, which the caller hands to time.Parse; for what it accepts
// the result equals time.Parse(time.RFC3339Nano, ...).UTC()
// (FuzzParseTimeFastPath checks both).
func parseRFC3339Fast(b []byte) (time.Time, bool) {
	if len(b) < 20 || b[4] != '-' || b[7] != '-' || b[10] != 'T' || b[13] != ':' || b[16] != ':' {
		return time.Time{}, false
	}
	y1, ok1 := digits2(b[0:2])
	y2, ok2 := digits2(b[2:4])
	mo, ok3 := digits2(b[5:7])
	d, ok4 := digits2(b[8:10])
	h, ok5 := digits2(b[11:13])
	mi, ok6 := digits2(b[14:16])
	sec, ok7 := digits2(b[17:19])
	if !(ok1 && ok2 && ok3 && ok4 && ok5 && ok6 && ok7) {
		return time.Time{}, false
	}
	y := y1*100 + y2
	if mo < 1 || mo > 12 || d < 1 || h > 23 || mi > 59 || sec > 59 {
		return time.Time{}, false
	}
	days := [13]int{0, 31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31}[mo]
	if mo == 2 && y%4 == 0 && (y%100 != 0 || y%400 == 0) {
		days = 29
	}
	if d > days {
		return time.Time{}, false
	}
	i := 19
	ns := 0
	if b[i] == '.' {
		i++
		j := i
		for i < len(b) && b[i] >= '0' && b[i] <= '9' {
			i++
		}
		n := i - j
		if n < 1 || n > 9 {
			return time.Time{}, false
		}
		for k := j; k < i; k++ {
			ns = ns*10 + int(b[k]-'0')
		}
		for k := n; k < 9; k++ {
			ns *= 10
		}
	}
	off := 0
	switch rest := b[i:]; {
	case len(rest) == 1 && rest[0] == 'Z':
	case len(rest) == 6 && (rest[0] == '+' || rest[0] == '-') && rest[3] == ':':
		oh, ok1 := digits2(rest[1:3])
		om, ok2 := digits2(rest[4:6])
		if !ok1 || !ok2 || oh > 23 || om > 59 {
			return time.Time{}, false
		}
		off = (oh*60 + om) * 60
		if rest[0] == '-' {
			off = -off
		}
	default:
		return time.Time{}, false
	}
	t := time.Date(y, time.Month(mo), d, h, mi, sec, ns, time.UTC)
	if off != 0 {
		t = t.Add(-time.Duration(off) * time.Second)
	}
	return t, true
}

// parseUnixMsFast reads [-]D{1,13}[.D{1,6}] Unix milliseconds within the
// general path's range without allocating; ok is false for anything else
// (the general path decides).
func parseUnixMsFast(b []byte) (time.Time, bool) {
	neg := false
	if b[0] == '-' {
		neg = true
		b = b[1:]
	}
	var ms int64
	i := 0
	for i < len(b) && b[i] >= '0' && b[i] <= '9' {
		ms = ms*10 + int64(b[i]-'0')
		i++
	}
	if i < 1 || i > 13 || ms > unixMsLimit {
		return time.Time{}, false
	}
	var ns int64
	if i < len(b) {
		if b[i] != '.' {
			return time.Time{}, false
		}
		i++
		j := i
		for i < len(b) && b[i] >= '0' && b[i] <= '9' {
			ns = ns*10 + int64(b[i]-'0')
			i++
		}
		n := i - j
		if i != len(b) || n < 1 || n > 6 {
			return time.Time{}, false
		}
		for k := n; k < 6; k++ {
			ns *= 10
		}
	}
	if neg {
		ms, ns = -ms, -ns
	}
	return time.Unix(0, ms*int64(time.Millisecond)+ns).UTC(), true
}

func parseQualityField(b []byte) (ingest.Quality, bool) {
	if string(b) == "good" {
		return ingest.Good, true
	}
	switch strings.ToLower(string(bytes.TrimSpace(b))) {
	case "", "good":
		return ingest.Good, true
	case "uncertain":
		return ingest.Uncertain, true
	case "bad":
		return ingest.Bad, true
	}
	return 0, false
}

// parseFloatBytes is strconv.ParseFloat on b without copying b into a new
// string: the string shares b's memory for the duration of the call only
// (the error, which would keep it, is not kept by the caller).
func parseFloatBytes(b []byte) (float64, error) {
	if len(b) == 0 {
		return strconv.ParseFloat("", 64)
	}
	return strconv.ParseFloat(unsafe.String(&b[0], len(b)), 64)
}

// csvReader reads one CSV file.
type csvReader struct {
	name   string
	lr     *lineReader
	rej    *rejects
	intern map[string]string
	col    struct{ tag, time, value, quality, need int }
	header bool
	fields [][]byte
	buf    []byte
}

func newCSVReader(name string, r io.Reader, rej *rejects) *csvReader {
	return &csvReader{name: name, lr: newLineReader(r), rej: rej, intern: map[string]string{}}
}

func (c *csvReader) readHeader(line []byte, n int) error {
	line = bytes.TrimPrefix(line, []byte("\xef\xbb\xbf"))
	fs, _, ok := splitCSV(line, nil, nil)
	if !ok {
		return fmt.Errorf("%s:%d: %w: bad quoting; the first row must name the columns tag,time,value[,quality]", c.name, n, ErrHeader)
	}
	c.col.tag, c.col.time, c.col.value, c.col.quality = -1, -1, -1, -1
	for i, f := range fs {
		switch strings.ToLower(strings.TrimSpace(string(f))) {
		case "tag":
			c.col.tag = i
		case "time":
			c.col.time = i
		case "value":
			c.col.value = i
		case "quality":
			c.col.quality = i
		}
	}
	if c.col.tag < 0 || c.col.time < 0 || c.col.value < 0 {
		return fmt.Errorf("%s:%d: %w: the first row must name the columns tag,time,value[,quality]; got %q", c.name, n, ErrHeader, string(line))
	}
	c.col.need = max(c.col.tag, c.col.time, c.col.value, c.col.quality) + 1
	c.header = true
	return nil
}

// next returns the next good sample; ok is false at the end of the file.
// err is set only for a missing or unusable header.
func (c *csvReader) next() (s ingest.Sample, ok bool, err error) {
	for {
		line, n, tooLong, more := c.lr.next()
		if !more {
			return s, false, nil
		}
		if tooLong {
			c.rej.add(rowError{File: c.name, Line: n, Reason: rejTooLong})
			continue
		}
		if t := bytes.TrimSpace(line); len(t) == 0 || t[0] == '#' {
			continue
		}
		if !c.header {
			if err := c.readHeader(line, n); err != nil {
				return s, false, err
			}
			continue
		}
		var good bool
		c.fields, c.buf, good = splitCSV(line, c.fields, c.buf)
		if !good {
			c.rej.add(rowError{File: c.name, Line: n, Reason: rejQuote})
			continue
		}
		if len(c.fields) < c.col.need && !(c.col.quality == c.col.need-1 && len(c.fields) == c.col.need-1) {
			c.rej.add(rowError{File: c.name, Line: n, Reason: rejFields, Detail: fmt.Sprintf("%d fields", len(c.fields))})
			continue
		}
		tagB := bytes.TrimSpace(c.fields[c.col.tag])
		if len(tagB) == 0 {
			c.rej.add(rowError{File: c.name, Line: n, Reason: rejTag})
			continue
		}
		t, err := parseTime(c.fields[c.col.time])
		if err != nil {
			c.rej.add(rowError{File: c.name, Line: n, Reason: rejTime, Detail: err.Error()})
			continue
		}
		if t.Before(align.Earliest) {
			// Also keeps one stray timestamp from stretching the span
			// (and the number of ticks) back to 1970.
			c.rej.add(rowError{File: c.name, Line: n, Reason: rejTooOld, Detail: t.Format(time.RFC3339)})
			continue
		}
		v, err := parseFloatBytes(bytes.TrimSpace(c.fields[c.col.value]))
		if err != nil {
			c.rej.add(rowError{File: c.name, Line: n, Reason: rejValue, Detail: fmt.Sprintf("%q", c.fields[c.col.value])})
			continue
		}
		if math.IsNaN(v) || math.IsInf(v, 0) {
			c.rej.add(rowError{File: c.name, Line: n, Reason: rejNonFinite})
			continue
		}
		q := ingest.Good
		if c.col.quality >= 0 && c.col.quality < len(c.fields) {
			var qok bool
			if q, qok = parseQualityField(c.fields[c.col.quality]); !qok {
				c.rej.add(rowError{File: c.name, Line: n, Reason: rejQuality, Detail: fmt.Sprintf("%q (want good, uncertain or bad)", c.fields[c.col.quality])})
				continue
			}
		}
		tag, hit := c.intern[string(tagB)]
		if !hit {
			tag = string(tagB)
			c.intern[tag] = tag
		}
		return ingest.Sample{Tag: tag, SourceTime: t, ReceiveTime: t, Value: v, Quality: q}, true, nil
	}
}

// lineProtoReader reads one line-protocol file with the daemon's decoder.
type lineProtoReader struct {
	name    string
	lr      *lineReader
	rej     *rejects
	dec     *payload.Decoder
	pending []ingest.Sample
	errs    []payload.Error
}

func newLineProtoReader(name string, r io.Reader, precision time.Duration, rej *rejects) *lineProtoReader {
	d := payload.NewDecoder(payload.LineProtocol)
	d.Precision = precision
	return &lineProtoReader{name: name, lr: newLineReader(r), rej: rej, dec: d}
}

var lpSentinels = []error{payload.ErrSyntax, payload.ErrNoTag, payload.ErrNoValue, payload.ErrBadValue, payload.ErrBadTime, payload.ErrBadStatus, payload.ErrQuality}

func (l *lineProtoReader) next() (ingest.Sample, bool, error) {
	for len(l.pending) == 0 {
		line, n, tooLong, more := l.lr.next()
		if !more {
			return ingest.Sample{}, false, nil
		}
		if tooLong {
			l.rej.add(rowError{File: l.name, Line: n, Reason: rejTooLong})
			continue
		}
		l.pending, l.errs = l.dec.Decode(line, time.Time{}, l.pending[:0], l.errs[:0])
		for _, e := range l.errs {
			reason := "line protocol: other"
			for _, s := range lpSentinels {
				if errors.Is(e, s) {
					reason = "line protocol: " + s.Error()
					break
				}
			}
			l.rej.add(rowError{File: l.name, Line: n, Reason: reason, Detail: e.Error()})
		}
		kept := l.pending[:0]
		for _, s := range l.pending {
			switch {
			case s.SourceTime.IsZero():
				l.rej.add(rowError{File: l.name, Line: n, Reason: rejNoTimestamp, Detail: s.Tag})
			case s.SourceTime.Before(align.Earliest):
				l.rej.add(rowError{File: l.name, Line: n, Reason: rejTooOld, Detail: s.SourceTime.Format(time.RFC3339)})
			case math.IsNaN(s.Value) || math.IsInf(s.Value, 0):
				l.rej.add(rowError{File: l.name, Line: n, Reason: rejNonFinite, Detail: s.Tag})
			default:
				s.ReceiveTime = s.SourceTime
				kept = append(kept, s)
			}
		}
		l.pending = kept
	}
	s := l.pending[0]
	l.pending = l.pending[1:]
	return s, true, nil
}

// rowSource is one input file.
type rowSource interface {
	next() (ingest.Sample, bool, error)
}

// mergeKey orders buffered samples by time, then by input order (seq is
// unique within one heap); slot says where the sample is held.
type mergeKey struct {
	t    int64 // source time, Unix ns
	seq  uint64
	slot int
}

func (a mergeKey) less(b mergeKey) bool {
	if a.t != b.t {
		return a.t < b.t
	}
	return a.seq < b.seq
}

// keyHeap is a binary min-heap of merge keys. It holds no samples (they stay
// in their slot), so sifting moves 24 bytes without pointers.
type keyHeap []mergeKey

func (h *keyHeap) push(k mergeKey) {
	*h = append(*h, k)
	q := *h
	i := len(q) - 1
	for i > 0 {
		p := (i - 1) / 2
		if !q[i].less(q[p]) {
			break
		}
		q[i], q[p] = q[p], q[i]
		i = p
	}
}

func (h *keyHeap) pop() mergeKey {
	q := *h
	top := q[0]
	n := len(q) - 1
	q[0] = q[n]
	q = q[:n]
	for i := 0; ; {
		l := 2*i + 1
		if l >= n {
			break
		}
		m := l
		if r := l + 1; r < n && q[r].less(q[l]) {
			m = r
		}
		if !q[m].less(q[i]) {
			break
		}
		q[i], q[m] = q[m], q[i]
		i = m
	}
	*h = q
	return top
}

// reorder holds up to reorderDepth samples of one file and releases the
// oldest (by time, then file order), sorting out local disorder. Samples
// that arrive in order (the usual case) wait in a FIFO ring; only samples
// older than the newest one held go to a heap. Releasing the smaller of
// the ring's front and the heap's top is the same as releasing the minimum
// of one heap over everything held.
type reorder struct {
	src  rowSource
	seq  uint64
	done bool

	ring       []ingest.Sample // FIFO, capacity reorderDepth
	ringKey    []mergeKey
	head, n    int
	heap       keyHeap
	slab       []ingest.Sample // heap samples by slot
	free       []int
	lastT      int64 // time of the newest sample in the ring
	lastInRing bool
}

func (r *reorder) held() int { return r.n + len(r.heap) }

func (r *reorder) hold(s ingest.Sample) {
	if r.ring == nil {
		r.ring = make([]ingest.Sample, reorderDepth)
		r.ringKey = make([]mergeKey, reorderDepth)
	}
	r.seq++
	k := mergeKey{t: s.SourceTime.UnixNano(), seq: r.seq}
	if r.n == 0 || k.t >= r.lastT {
		i := (r.head + r.n) % reorderDepth
		r.ring[i], r.ringKey[i] = s, k
		r.n++
		r.lastT = k.t
		return
	}
	if len(r.free) > 0 {
		k.slot = r.free[len(r.free)-1]
		r.free = r.free[:len(r.free)-1]
		r.slab[k.slot] = s
	} else {
		k.slot = len(r.slab)
		r.slab = append(r.slab, s)
	}
	r.heap.push(k)
}

func (r *reorder) next() (ingest.Sample, bool, error) {
	for !r.done && r.held() < reorderDepth {
		s, ok, err := r.src.next()
		if err != nil {
			return s, false, err
		}
		if !ok {
			r.done = true
			break
		}
		r.hold(s)
	}
	switch {
	case r.n > 0 && (len(r.heap) == 0 || r.ringKey[r.head].less(r.heap[0])):
		s := r.ring[r.head]
		r.ring[r.head] = ingest.Sample{}
		r.head = (r.head + 1) % reorderDepth
		r.n--
		return s, true, nil
	case len(r.heap) > 0:
		k := r.heap.pop()
		s := r.slab[k.slot]
		r.slab[k.slot] = ingest.Sample{}
		r.free = append(r.free, k.slot)
		return s, true, nil
	}
	return ingest.Sample{}, false, nil
}

// merger merges several time-ordered streams into one: by time, then by
// the order in which the samples were pulled from their streams.
type merger struct {
	srcs  []rowSource
	heads []ingest.Sample // the pulled sample of each stream, by stream
	h     keyHeap
	init  bool
	seq   uint64
}

func (m *merger) pull(i int) error {
	s, ok, err := m.srcs[i].next()
	if err != nil || !ok {
		return err
	}
	m.seq++
	m.heads[i] = s
	m.h.push(mergeKey{t: s.SourceTime.UnixNano(), seq: m.seq, slot: i})
	return nil
}

func (m *merger) next() (ingest.Sample, bool, error) {
	if !m.init {
		m.init = true
		m.heads = make([]ingest.Sample, len(m.srcs))
		for i := range m.srcs {
			if err := m.pull(i); err != nil {
				return ingest.Sample{}, false, err
			}
		}
	}
	if len(m.h) == 0 {
		return ingest.Sample{}, false, nil
	}
	k := m.h.pop()
	s := m.heads[k.slot]
	if err := m.pull(k.slot); err != nil {
		return ingest.Sample{}, false, err
	}
	return s, true, nil
}

// ---- the replay driver ----------------------------------------------------

// replaySource is the time-ordered stream a replay consumes.
type replaySource interface {
	next() (ingest.Sample, bool, error)
	// progress is the fraction of the input consumed, 0..1.
	progress() float64
}

// fileSet is the merged input files.
type fileSet struct {
	m     *merger
	lrs   []*lineReader
	total int64
	close []func() error
}

func (f *fileSet) next() (ingest.Sample, bool, error) { return f.m.next() }

func (f *fileSet) progress() float64 {
	if f.total <= 0 {
		return 0
	}
	var n int64
	for _, l := range f.lrs {
		n += l.counts.n
	}
	return min(float64(n)/float64(f.total), 1)
}

func (f *fileSet) Close() error {
	var err error
	for _, c := range f.close {
		err = errors.Join(err, c())
	}
	return err
}

// formatOf picks the format of one input: the --format flag, else the file
// extension (.csv; .lp, .line, .influx), else the first non-blank line (a
// header row naming tag, time and value is CSV).
func formatOf(flagFormat, name string, head []byte) string {
	if flagFormat != "auto" {
		return flagFormat
	}
	switch strings.ToLower(filepath.Ext(name)) {
	case ".csv":
		return "csv"
	case ".lp", ".line", ".influx":
		return "line"
	}
	for _, line := range bytes.Split(head, []byte{'\n'}) {
		line = bytes.TrimSpace(bytes.TrimPrefix(line, []byte("\xef\xbb\xbf")))
		if len(line) == 0 || line[0] == '#' {
			continue
		}
		l := strings.ToLower(string(line))
		if strings.Contains(l, "tag") && strings.Contains(l, "time") && strings.Contains(l, "value") && strings.Contains(l, ",") && !strings.Contains(l, " ") {
			return "csv"
		}
		return "line"
	}
	return "csv"
}

// openInputs opens every input file and merges them by time.
func openInputs(names []string, format string, precision time.Duration, rej *rejects) (*fileSet, error) {
	fs := &fileSet{m: &merger{}}
	for _, name := range names {
		f, err := os.Open(name)
		if err != nil {
			_ = fs.Close()
			return nil, err
		}
		fs.close = append(fs.close, f.Close)
		if st, err := f.Stat(); err == nil {
			fs.total += st.Size()
		}
		br := bufio.NewReaderSize(f, 64<<10)
		head, _ := br.Peek(4096)
		var src rowSource
		switch formatOf(format, name, head) {
		case "csv":
			c := newCSVReader(name, br, rej)
			fs.lrs = append(fs.lrs, c.lr)
			src = c
		default:
			l := newLineProtoReader(name, br, precision, rej)
			fs.lrs = append(fs.lrs, l.lr)
			src = l
		}
		fs.m.srcs = append(fs.m.srcs, &reorder{src: src})
	}
	return fs, nil
}

// prefetchSize is the number of samples the reading goroutine hands over
// at a time.
const prefetchSize = 4096

// prefetch reads a replay source on a goroutine of its own, prefetchSize
// samples at a time and up to four batches ahead, so that parsing the
// input overlaps aligning and evaluating it: the goroutine that feeds the
// alignment engine would otherwise do both, one after the other. The
// samples come out in the source's order; an error comes after the samples
// read before it. progress is the source's progress at the end of the
// current batch. close stops the goroutine (it finishes the batch it is
// reading) and must be called once.
type prefetch struct {
	ch   chan prefetchBatch
	free chan []ingest.Sample // consumed batches, for reuse
	stop chan struct{}
	done chan struct{}
	cur  prefetchBatch
	i    int
}

type prefetchBatch struct {
	s    []ingest.Sample
	err  error
	end  bool
	frac float64
}

func newPrefetch(src replaySource) *prefetch {
	p := &prefetch{ch: make(chan prefetchBatch, 4), free: make(chan []ingest.Sample, 8), stop: make(chan struct{}), done: make(chan struct{})}
	go func() {
		defer close(p.done)
		for {
			var buf []ingest.Sample
			select {
			case buf = <-p.free:
				buf = buf[:0]
			default:
				buf = make([]ingest.Sample, 0, prefetchSize)
			}
			var b prefetchBatch
			for len(buf) < prefetchSize {
				s, ok, err := src.next()
				if err != nil {
					b.err = err
					break
				}
				if !ok {
					b.end = true
					break
				}
				buf = append(buf, s)
			}
			b.s, b.frac = buf, src.progress()
			select {
			case p.ch <- b:
			case <-p.stop:
				return
			}
			if b.err != nil || b.end {
				return
			}
		}
	}()
	return p
}

func (p *prefetch) next() (ingest.Sample, bool, error) {
	for p.i >= len(p.cur.s) {
		switch {
		case p.cur.err != nil:
			return ingest.Sample{}, false, p.cur.err
		case p.cur.end:
			return ingest.Sample{}, false, nil
		}
		if p.cur.s != nil {
			select {
			case p.free <- p.cur.s:
			default:
			}
		}
		p.cur, p.i = <-p.ch, 0
	}
	p.i++
	return p.cur.s[p.i-1], true, nil
}

func (p *prefetch) progress() float64 { return p.cur.frac }

func (p *prefetch) close() {
	close(p.stop)
	<-p.done
}

// replayOptions steer one replay.
type replayOptions struct {
	from, to time.Time // zero: unbounded; to is exclusive
	workers  int       // evaluation goroutines (default GOMAXPROCS)
	// progress, when set, is called from one goroutine every progressEvery.
	progress      func(replayProgress)
	progressEvery time.Duration
	// rebalanceAfter, rebalanceEvery (ticks) and rebalanceGain (the
	// fraction of the current largest worker load the new assignment must
	// stay under) steer the assignment of machines to workers; zero:
	// the constants of the same names (tests set them).
	rebalanceAfter, rebalanceEvery uint64
	rebalanceGain                  float64
}

type replayProgress struct {
	Fraction    float64
	Samples     uint64
	Evaluations uint64
	Elapsed     time.Duration
	At          time.Time // time of the last tick evaluated
}

// replayResult is what the summary prints.
type replayResult struct {
	Samples          uint64 // samples handed to the alignment engine
	Skipped          uint64 // samples outside --from/--to
	Ticks            uint64
	Evaluations      uint64
	ByQuality        map[compute.Quality]uint64
	AlertTransitions uint64
	AlertsFiring     uint64 // transitions into firing
	SinkDrops        uint64 // records or events a sink queue refused
	First, Last      time.Time
	Wall             time.Duration
	CPU              time.Duration // user+system CPU time of the process during the replay
	Workers          int           // evaluation goroutines
	Busy             time.Duration // time the workers spent evaluating, summed over them
	Rebalances       int           // reassignments of machines to workers by measured cost
}

type replayWorker struct {
	in        chan []*align.Snapshot
	busy      int64 // ns spent evaluating (owned by the worker goroutine)
	evals     uint64
	q         [4]uint64
	trans     uint64
	firing    uint64
	sinkDrops uint64
}

// replay drives pipeline p from src with a fake clock: samples enter the
// alignment engine in time order, a tick is evaluated at every evaluation
// interval across the data span, and each machine's snapshots go, in tick
// order, to one evaluation goroutine (machines are independent, so several
// goroutines share them). Records and events go to p's sinks; the sinks'
// queues are watched so that nothing is dropped for speed.
func replay(ctx context.Context, p *pipeline, src replaySource, opt replayOptions) (replayResult, error) {
	start := time.Now()
	res := replayResult{ByQuality: map[compute.Quality]uint64{}}
	// The evaluators allocate short-lived maps and slices per evaluation;
	// collecting less often costs memory (bounded: nothing accumulates) and
	// saves a few per cent of CPU.
	defer debug.SetGCPercent(debug.SetGCPercent(400))
	// A year of history raises thousands of alert transitions: the summary
	// counts them; the log gets them at debug level.
	p.quietAlerts = true
	iv := p.cfg.Evaluation.Interval.D()
	if iv <= 0 {
		return res, fmt.Errorf("evaluation interval %v: must be positive", iv)
	}
	late := p.cfg.Alignment.LateHorizon
	if late <= 0 {
		late = p.cfg.Alignment.Window
	}
	if late <= 0 {
		late = 60 * time.Second
	}
	maxSpan := late / 2
	workers := opt.workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	workers = max(1, min(workers, len(p.order)))
	rbAfter, rbEvery, rbGain := cmp.Or(opt.rebalanceAfter, rebalanceAfter), cmp.Or(opt.rebalanceEvery, rebalanceEvery), cmp.Or(opt.rebalanceGain, rebalanceGain)
	// Machines go round-robin to the workers first; after rebalanceAfter
	// ticks the measured cost of each machine (a gas compressor on
	// GERG-2008 costs ten times a pump on IF97) reassigns them, largest
	// first, to the least loaded worker. Costs change with the plant's
	// life (machines stop, loads change), so every rebalanceEvery ticks
	// the costs of the ticks since the last assignment are looked at again.
	route := map[string]int{}
	index := map[string]int{}
	for i, id := range p.order {
		route[id] = i % workers
		index[id] = i
	}
	cost := make([]atomic.Int64, len(p.order)) // ns spent per machine since the last assignment
	// Sink queue limits: records handed to the workers but not yet written
	// (inflight) plus the records in a sink's queue stay under three
	// quarters of that queue's bound (Multi drops what does not fit; a
	// replay waits instead). The last quarter is room for alert events.
	var limits []int64
	for _, s := range p.cfg.Sinks {
		q := s.QueueLen
		if q <= 0 {
			q = p.cfg.Fanout.QueueLen
		}
		if q <= 0 {
			q = 4096
		}
		limits = append(limits, int64(max(q*3/4, 1)))
	}
	var inflight atomic.Int64
	wctx := context.WithoutCancel(ctx)
	ws := make([]*replayWorker, workers)
	var wg sync.WaitGroup
	for i := range ws {
		w := &replayWorker{in: make(chan []*align.Snapshot, 32)}
		ws[i] = w
		wg.Add(1)
		go func() {
			defer wg.Done()
			for batch := range w.in {
				for _, s := range batch {
					t0 := time.Now()
					k, known := index[s.Machine]
					w.add(p.evaluateOne(wctx, s))
					d := int64(time.Since(t0))
					if known {
						cost[k].Add(d)
					}
					w.busy += d
					inflight.Add(-1)
				}
			}
		}()
	}
	var samples atomic.Uint64
	var frac atomic.Uint64
	var lastTick atomic.Int64
	stopProgress := make(chan struct{})
	progressDone := make(chan struct{})
	go func() {
		defer close(progressDone)
		if opt.progress == nil || opt.progressEvery <= 0 {
			<-stopProgress
			return
		}
		t := time.NewTicker(opt.progressEvery)
		defer t.Stop()
		for {
			select {
			case <-stopProgress:
				return
			case <-t.C:
				var e uint64
				for _, w := range ws {
					e += atomic.LoadUint64(&w.evals)
				}
				at := time.Time{}
				if n := lastTick.Load(); n != 0 {
					at = time.Unix(0, n).UTC()
				}
				opt.progress(replayProgress{Fraction: float64(frac.Load()) / 1e6, Samples: samples.Load(), Evaluations: e,
					Elapsed: time.Since(start), At: at})
			}
		}
	}()

	var tick time.Time
	var chunk []ingest.Sample
	perWorker := make([][]*align.Snapshot, workers)
	flush := func() {
		if len(chunk) == 0 {
			return
		}
		p.engine.Ingest(chunk, chunk[len(chunk)-1].SourceTime)
		samples.Add(uint64(len(chunk)))
		chunk = chunk[:0]
	}
	// waitSinks blocks until n more records fit every sink queue.
	waitSinks := func(n int) {
		if len(limits) == 0 {
			return
		}
		for {
			full := false
			busy := inflight.Load() + int64(n)
			for i, st := range p.multi.Stats() {
				// A tick larger than a queue cannot wait for room: it only
				// waits for the queue to empty.
				if i < len(limits) && st.Queued+busy > max(limits[i], int64(n)) {
					full = true
				}
			}
			if !full || ctx.Err() != nil {
				return
			}
			time.Sleep(100 * time.Microsecond)
		}
	}
	evaluate := func(t time.Time) {
		flush()
		snaps := p.engine.Evaluate(t)
		waitSinks(len(snaps))
		inflight.Add(int64(len(snaps)))
		for _, s := range snaps {
			k, ok := route[s.Machine]
			if !ok {
				inflight.Add(-1)
				s.Release()
				continue
			}
			perWorker[k] = append(perWorker[k], s)
		}
		for k, b := range perWorker {
			if len(b) > 0 {
				ws[k].in <- b
				perWorker[k] = make([]*align.Snapshot, 0, len(b))
			}
		}
		res.Ticks++
		lastTick.Store(t.UnixNano())
		if workers > 1 && (res.Ticks == rbAfter || res.Ticks > rbAfter && (res.Ticks-rbAfter)%rbEvery == 0) {
			c := make([]int64, len(cost))
			for i := range cost {
				c[i] = cost[i].Swap(0)
			}
			now := make([]int, len(c))
			for i, id := range p.order {
				now[i] = route[id]
			}
			next := assignLPT(c, workers)
			// Moving a machine between workers is safe only when none of
			// its snapshots is still queued: wait for the workers to drain
			// (a short pause), unless the new assignment gains little.
			if float64(makespan(c, next, workers)) < rbGain*float64(makespan(c, now, workers)) {
				for inflight.Load() > 0 {
					time.Sleep(50 * time.Microsecond)
				}
				for i, w := range next {
					route[p.order[i]] = w
				}
				res.Rebalances++
			}
		}
	}
	pf := newPrefetch(src)
	defer pf.close()
	var runErr error
	n := 0
	for {
		s, ok, err := pf.next()
		if err != nil {
			runErr = err
			break
		}
		if !ok {
			break
		}
		n++
		if n&4095 == 0 {
			frac.Store(uint64(pf.progress() * 1e6))
			if ctx.Err() != nil {
				runErr = ctx.Err()
				break
			}
		}
		t := s.SourceTime
		if (!opt.from.IsZero() && t.Before(opt.from)) || (!opt.to.IsZero() && !t.Before(opt.to)) {
			res.Skipped++
			continue
		}
		if res.First.IsZero() {
			res.First = t
			tick = t.Truncate(iv).Add(iv)
		}
		if t.After(res.Last) {
			res.Last = t
		}
		for t.After(tick) {
			evaluate(tick)
			tick = tick.Add(iv)
		}
		if len(chunk) > 0 && (len(chunk) >= 4096 || t.Sub(chunk[0].SourceTime) > maxSpan) {
			flush()
		}
		chunk = append(chunk, s)
		res.Samples++
	}
	if runErr == nil && !res.First.IsZero() {
		// The last tick covers the newest sample.
		evaluate(tick)
	}
	frac.Store(1e6)
	for _, w := range ws {
		close(w.in)
	}
	wg.Wait()
	close(stopProgress)
	<-progressDone
	res.Workers = workers
	for _, w := range ws {
		res.Busy += time.Duration(w.busy)
		res.Evaluations += w.evals
		for q, c := range w.q {
			if c > 0 {
				res.ByQuality[compute.Quality(q)] += c
			}
		}
		res.AlertTransitions += w.trans
		res.AlertsFiring += w.firing
		res.SinkDrops += w.sinkDrops
	}
	p.saveState()
	res.Wall = time.Since(start)
	return res, runErr
}

// rebalanceAfter is the tick after which machines are reassigned to the
// evaluation workers by measured cost; rebalanceEvery is the number of
// ticks after which the costs are looked at again.
const (
	rebalanceAfter = 64
	rebalanceEvery = 1440
	rebalanceGain  = 0.97
)

// makespan is the largest load of a worker when job j of cost costs[j]
// runs on worker assign[j].
func makespan(costs []int64, assign []int, workers int) int64 {
	load := make([]int64, workers)
	for j, w := range assign {
		load[w] += costs[j]
	}
	return slices.Max(load)
}

// assignLPT assigns jobs of the given costs to workers, largest first, each
// to the currently least loaded worker (longest processing time first).
func assignLPT(costs []int64, workers int) []int {
	order := make([]int, len(costs))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return costs[order[a]] > costs[order[b]] })
	load := make([]int64, workers)
	out := make([]int, len(costs))
	for _, j := range order {
		w := 0
		for k := 1; k < workers; k++ {
			if load[k] < load[w] {
				w = k
			}
		}
		out[j] = w
		load[w] += costs[j]
	}
	return out
}

// add counts one evaluation of the worker's.
func (w *replayWorker) add(o evalOutcome) {
	if !o.evaluated {
		return
	}
	atomic.AddUint64(&w.evals, 1)
	if q := int(o.quality); q >= 0 && q < len(w.q) {
		w.q[q]++
	}
	w.trans += uint64(o.transitions)
	w.firing += uint64(o.firing)
	w.sinkDrops += uint64(o.sinkDrops)
}

// ---- the command ----------------------------------------------------------

func init() {
	register("replay", "run recorded tag history (CSV or line protocol) through the pipeline as fast as possible", cmdReplay)
}

type multiFlag []string

func (m *multiFlag) String() string     { return strings.Join(*m, ",") }
func (m *multiFlag) Set(s string) error { *m = append(*m, s); return nil }

func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}

func parsePrecision(s string) (time.Duration, error) {
	switch s {
	case "ns":
		return time.Nanosecond, nil
	case "us":
		return time.Microsecond, nil
	case "ms":
		return time.Millisecond, nil
	case "s":
		return time.Second, nil
	}
	return 0, fmt.Errorf("--precision %q: use ns, us, ms or s", s)
}

func cmdReplay(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("replay", flag.ContinueOnError)
	fs.SetOutput(stderr)
	file := fs.String("c", "", "configuration file (YAML): tag map, alignment, machines, alerts and sinks are used; sources are not")
	var inputs multiFlag
	fs.Var(&inputs, "input", "recorded tag history (repeatable; further file names may follow the flags)")
	format := fs.String("format", "auto", "input format: csv, line (InfluxDB line protocol) or auto (by extension .csv/.lp, else by content)")
	precision := fs.String("precision", "ns", "line-protocol timestamp precision: ns, us, ms or s")
	fromS := fs.String("from", "", "replay samples at or after this time (RFC 3339 or Unix ms)")
	toS := fs.String("to", "", "replay samples before this time (RFC 3339 or Unix ms)")
	workers := fs.Int("workers", 0, "evaluation goroutines (0: one per CPU)")
	state := fs.String("state", "", "state file for the evaluators (default: a temporary file, so a live daemon's state is never touched)")
	every := fs.Duration("progress-every", 10*time.Second, "interval of progress lines when stderr is not a terminal (0: none)")
	level := fs.String("log-level", "warn", "log level on stderr")
	fs.Usage = func() {
		fmt.Fprint(stderr, `usage: exergywatch replay -c FILE [flags] [--input] FILE...

Runs recorded tag history through the configured pipeline (tag map,
alignment, machine evaluators, alerts, sinks) as fast as the machine allows,
with a clock that follows the data: a tick every evaluation interval across
the data span. Prints a summary on stdout; progress on stderr.

Inputs (several files are merged by time; per-tag files are fine):
  CSV            header row naming tag,time,value[,quality] (any order);
                 time RFC 3339 or Unix milliseconds; quality good, uncertain
                 or bad (empty: good); value in the tag's configured unit.
  line protocol  <measurement>[,tag=<name>] value=<v>[,quality="good"] <time>
                 tag name = the "tag" tag, else the measurement; a field other
                 than "value" gives "<name>.<field>"; the time is required.
Rows that cannot be read are counted with their reason and line, never fatal.

flags:
`)
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		return 2
	}
	inputs = append(inputs, fs.Args()...)
	fail := func(code int, format string, a ...any) int {
		fmt.Fprintf(stderr, "exergywatch replay: "+format+"\n", a...)
		return code
	}
	if *file == "" {
		return fail(2, "-c FILE is required")
	}
	if len(inputs) == 0 {
		return fail(2, "no input: give --input FILE (CSV with header tag,time,value[,quality], or line protocol)")
	}
	switch *format {
	case "auto", "csv", "line":
	default:
		return fail(2, "--format %q: use csv, line or auto", *format)
	}
	prec, err := parsePrecision(*precision)
	if err != nil {
		return fail(2, "%v", err)
	}
	var opt replayOptions
	if *fromS != "" {
		if opt.from, err = parseTime([]byte(*fromS)); err != nil {
			return fail(2, "--from: %v", err)
		}
	}
	if *toS != "" {
		if opt.to, err = parseTime([]byte(*toS)); err != nil {
			return fail(2, "--to: %v", err)
		}
	}
	if !opt.from.IsZero() && !opt.to.IsZero() && !opt.to.After(opt.from) {
		return fail(2, "--to must be after --from")
	}
	opt.workers = *workers
	log, err := newLogger(stderr, *level, "text")
	if err != nil {
		return fail(2, "%v", err)
	}
	cfg, err := config.Load(*file)
	if err != nil {
		fmt.Fprintln(stderr, err)
		return 2
	}
	if *state == "" {
		dir, err := os.MkdirTemp("", "exergywatch-replay-")
		if err != nil {
			return fail(1, "%v", err)
		}
		defer os.RemoveAll(dir)
		cfg.State.Path = filepath.Join(dir, "state.db")
	} else {
		cfg.State.Path = *state
	}
	var rej rejects
	in, err := openInputs(inputs, *format, prec, &rej)
	if err != nil {
		return fail(2, "%v", err)
	}
	defer in.Close()
	p, err := buildPipeline(cfg, pipelineOptions{log: log})
	if err != nil {
		return fail(1, "%v", err)
	}
	tty := isTerminal(stderr)
	if tty {
		opt.progressEvery = 200 * time.Millisecond
		opt.progress = func(pr replayProgress) { fmt.Fprint(stderr, "\r"+progressBar(pr)) }
	} else if *every > 0 {
		opt.progressEvery = *every
		opt.progress = func(pr replayProgress) { fmt.Fprintln(stderr, "replay: "+progressText(pr)) }
	}
	ctx, stop := signal.NotifyContext(context.Background(), syscall.SIGINT, syscall.SIGTERM)
	defer stop()
	began, cpu0 := time.Now(), cpuTime()
	res, runErr := replay(ctx, p, in, opt)
	if tty {
		fmt.Fprint(stderr, "\r"+strings.Repeat(" ", 100)+"\r")
	}
	stats := p.multi.Stats()
	closeErr := p.close()
	stats = mergeStats(stats, p.multi.Stats())
	res.Wall = time.Since(began) // including the sinks' final flush
	res.CPU = cpuTime() - cpu0
	printReplaySummary(stdout, inputs, &rej, p.metrics, res, stats)
	for _, s := range cfg.Sinks {
		if s.Kind == "store" && s.Store != nil && !res.First.IsZero() {
			keep := s.Store.Retention
			if keep <= 0 {
				keep = 720 * time.Hour
			}
			if res.First.Before(time.Now().Add(-keep)) {
				fmt.Fprintf(stdout, "  WARNING           sink %s keeps %v counted from the wall clock: records older than that are deleted at its next retention run; raise retention to keep them\n", s.Name, keep)
			}
		}
	}
	if runErr != nil {
		if errors.Is(runErr, ErrHeader) {
			return fail(2, "%v", runErr)
		}
		return fail(1, "%v", runErr)
	}
	if closeErr != nil {
		return fail(1, "closing the sinks: %v", closeErr)
	}
	return 0
}

// mergeStats prefers the view after Close (everything flushed) when Multi
// still reports it.
func mergeStats(before, after []sinks.Stats) []sinks.Stats {
	if len(after) == len(before) {
		return after
	}
	return before
}

// cpuTime is the user+system CPU time of this process so far.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

func progressText(pr replayProgress) string {
	rate := 0.0
	if s := pr.Elapsed.Seconds(); s > 0 {
		rate = float64(pr.Samples) / s
	}
	at := "-"
	if !pr.At.IsZero() {
		at = pr.At.Format(time.RFC3339)
	}
	return fmt.Sprintf("%5.1f %%  %d samples  %d evaluations  at %s  %.0f samples/s  %s elapsed",
		100*pr.Fraction, pr.Samples, pr.Evaluations, at, rate, pr.Elapsed.Round(time.Second))
}

func progressBar(pr replayProgress) string {
	const width = 30
	n := int(pr.Fraction * width)
	n = max(0, min(n, width))
	eta := ""
	if pr.Fraction > 0.01 && pr.Fraction < 1 {
		rest := time.Duration(float64(pr.Elapsed) * (1 - pr.Fraction) / pr.Fraction)
		eta = " eta " + rest.Round(time.Second).String()
	}
	rate := 0.0
	if s := pr.Elapsed.Seconds(); s > 0 {
		rate = float64(pr.Samples) / s
	}
	return fmt.Sprintf("[%s%s] %5.1f%% %s samples %s/s%s   ", strings.Repeat("#", n), strings.Repeat("-", width-n),
		100*pr.Fraction, siCount(float64(pr.Samples)), siCount(rate), eta)
}

func siCount(v float64) string {
	switch {
	case v >= 1e9:
		return fmt.Sprintf("%.2fG", v/1e9)
	case v >= 1e6:
		return fmt.Sprintf("%.2fM", v/1e6)
	case v >= 1e3:
		return fmt.Sprintf("%.1fk", v/1e3)
	}
	return fmt.Sprintf("%.0f", v)
}

func printReplaySummary(w io.Writer, inputs []string, rej *rejects, m *ingest.Metrics, res replayResult, stats []sinks.Stats) {
	var b strings.Builder
	fmt.Fprintf(&b, "replay summary\n")
	fmt.Fprintf(&b, "  inputs            %d file(s)\n", len(inputs))
	read := res.Samples + res.Skipped
	fmt.Fprintf(&b, "  samples read      %d (replayed %d, outside --from/--to %d)\n", read, res.Samples, res.Skipped)
	fmt.Fprintf(&b, "  rows rejected     %d\n", rej.Total)
	for _, k := range sortedKeys(rej.ByReason) {
		fmt.Fprintf(&b, "    %-28s %d\n", k, rej.ByReason[k])
	}
	for _, e := range rej.First {
		fmt.Fprintf(&b, "    e.g. %s\n", e)
	}
	recv, acc := m.Received.Load(), m.Accepted.Load()
	fmt.Fprintf(&b, "  alignment         %d of %d samples taken into windows, %d dropped\n", acc, recv, recv-min(acc, recv))
	var rs []string
	for r := ingest.Reason(1); int(r) < ingest.NumReasons; r++ {
		if c := m.Reason(r); c > 0 {
			rs = append(rs, fmt.Sprintf("%s %d", r, c))
		}
	}
	if len(rs) > 0 {
		fmt.Fprintf(&b, "    reasons counted: %s\n", strings.Join(rs, ", "))
	}
	span := "-"
	if !res.First.IsZero() {
		span = res.First.Format(time.RFC3339) + " .. " + res.Last.Format(time.RFC3339)
	}
	fmt.Fprintf(&b, "  data span         %s\n", span)
	fmt.Fprintf(&b, "  evaluations       %d (%d ticks)\n", res.Evaluations, res.Ticks)
	fmt.Fprintf(&b, "  records           good %d, uncertain %d, transient %d, bad %d\n",
		res.ByQuality[compute.QualityGood], res.ByQuality[compute.QualityUncertain], res.ByQuality[compute.QualityTransient], res.ByQuality[compute.QualityBad])
	fmt.Fprintf(&b, "  alerts            %d raised (firing), %d transitions\n", res.AlertsFiring, res.AlertTransitions)
	for _, s := range stats {
		fmt.Fprintf(&b, "  sink %-12s written %d, dropped %d, rejected %d", s.Name, s.Written, s.Dropped, s.Rejected)
		if s.LastError != "" {
			fmt.Fprintf(&b, ", last error: %s", s.LastError)
		}
		b.WriteString("\n")
	}
	if res.SinkDrops > 0 {
		fmt.Fprintf(&b, "  WARNING           %d records or events were refused by a sink queue\n", res.SinkDrops)
	}
	secs := res.Wall.Seconds()
	fmt.Fprintf(&b, "  wall time         %s (CPU time %s on %d CPUs)\n", res.Wall.Round(time.Millisecond), res.CPU.Round(time.Millisecond), runtime.GOMAXPROCS(0))
	if secs > 0 {
		fmt.Fprintf(&b, "  throughput        %.0f samples/s, %.0f evaluations/s\n", float64(res.Samples)/secs, float64(res.Evaluations)/secs)
	}
	fmt.Fprint(w, b.String())
}

func sortedKeys[V any](m map[string]V) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}
