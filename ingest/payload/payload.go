// Package payload decodes NATS message payloads into ingest samples.
//
// Three formats are accepted (Detect picks one by the first non-blank byte:
// '{' or '[' is JSON, anything else line protocol).
//
// # JSON sample
//
//		{"tag": "T1.PT101", "ts": "2026-12-01T10:00:00.250Z", "value": 12.5,
//		 "quality": "good", "status": 0}
//
//	  - tag (string, required): the source tag name looked up in the tag map.
//	  - value (number or boolean, required): the reading in the unit configured
//	    for the tag; true/false are 1/0. null, strings, objects are errors.
//	  - ts (optional): source timestamp, either an RFC 3339 string (fraction
//	    of seconds allowed) or a number of Unix milliseconds (fraction
//	    allowed). Missing: the receive time is used.
//	  - quality (optional string): "good", "uncertain" or "bad".
//	  - status (optional unsigned integer < 2^32): an OPC UA StatusCode; sets
//	    the quality from its severity bits unless quality is also given.
//	  - any other key is ignored.
//
// # JSON batch
//
//	{"ts": <default ts>, "samples": [<JSON sample>, ...]}   or   [<JSON sample>, ...]
//
// The batch-level ts, when given, applies to samples without their own ts.
// A bad element is counted and skipped; the others are kept.
//
// # InfluxDB line protocol
//
//	<measurement>[,<tagkey>=<tagvalue>...] <field>=<value>[,...] [<timestamp>]
//
// Tag name: the value of the line-protocol tag "tag" if present, else the
// measurement; a field named "value" gives that name as it is, every other
// field gives "<name>.<field>". Fields "quality" (string: good, uncertain,
// bad) and "status" (integer: OPC UA StatusCode) are metadata for the other
// fields of the line. Values: floats, integers (i), unsigned (u), booleans
// (t, true, f, false -> 1, 0); other string fields are ignored. The
// timestamp is an integer in the decoder's precision (nanoseconds by
// default). Escapes follow the line-protocol rules (backslash before comma,
// space and equals sign; backslash before quote and backslash in strings).
// Lines starting with '#' and blank lines are skipped.
package payload

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math/bits"
	"sync"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
)

// Errors callers branch on.
var (
	ErrSyntax    = errors.New("payload syntax error")
	ErrNoTag     = errors.New("sample without tag")
	ErrNoValue   = errors.New("sample without value")
	ErrBadValue  = errors.New("value is not a number or boolean")
	ErrBadTime   = errors.New("bad timestamp")
	ErrBadStatus = errors.New("bad status code")
	ErrQuality   = errors.New("unknown quality")
)

// Error is one decode failure: the tag when it could be read (for the
// once-per-tag-per-minute log), and the cause.
type Error struct {
	Tag string
	Err error
}

func (e Error) Error() string {
	if e.Tag == "" {
		return e.Err.Error()
	}
	return fmt.Sprintf("tag %q: %v", e.Tag, e.Err)
}

func (e Error) Unwrap() error { return e.Err }

// Format is a payload format.
type Format int

// Formats.
const (
	Auto Format = iota
	JSON
	LineProtocol
)

// ParseFormat reads "auto", "json" or "line" (also "influx", "lineprotocol").
func ParseFormat(s string) (Format, error) {
	switch s {
	case "", "auto":
		return Auto, nil
	case "json":
		return JSON, nil
	case "line", "influx", "lineprotocol", "line_protocol":
		return LineProtocol, nil
	}
	return Auto, fmt.Errorf("unknown payload format %q (auto, json, line)", s)
}

// Decoder decodes payloads. It keeps an intern table of tag names so that a
// steady stream of the same tags allocates no strings. A Decoder is not safe
// for concurrent use; use one per goroutine (decoders on several goroutines
// can share one Names table, see ShareNames).
type Decoder struct {
	Format Format
	// Precision of line-protocol timestamps; 0 means time.Nanosecond.
	Precision time.Duration
	intern    map[string]string
	names     *Names // shared intern table; nil: intern is used
	// noFastLine sends every line through the general parser (tests
	// compare it with the fast path).
	noFastLine bool
	cache      *[1 << nameCacheBits]string
	buf        []byte
	fields     []lpField // line-protocol scratch
	nameBuf    []byte
}

// NewDecoder returns a decoder for format f.
func NewDecoder(f Format) *Decoder {
	return &Decoder{Format: f, intern: make(map[string]string)}
}

const maxIntern = 1 << 16

// Names is a tag-name intern table shared by several decoders (safe for
// concurrent use): decoders running on different goroutines then hand out
// the very same string for the same tag, so that lookups keyed by the
// string's address (tagmap's cache) hit whichever decoder read the sample.
// It holds at most 65536 names; beyond that new names are still returned,
// just not kept.
type Names struct {
	mu sync.RWMutex
	m  map[string]string
}

// NewNames returns an empty shared intern table.
func NewNames() *Names { return &Names{m: make(map[string]string)} }

func (n *Names) get(b []byte) string {
	n.mu.RLock()
	s, ok := n.m[string(b)]
	n.mu.RUnlock()
	if ok {
		return s
	}
	n.mu.Lock()
	defer n.mu.Unlock()
	if s, ok := n.m[string(b)]; ok {
		return s
	}
	s = string(b)
	if len(n.m) < maxIntern {
		n.m[s] = s
	}
	return s
}

// ShareNames makes d intern tag names in n instead of its own table. Call
// it before the first Decode.
func (d *Decoder) ShareNames(n *Names) { d.names = n }

// nameCacheBits sizes the cache in front of the intern table: a pair of
// slots holds the last two names whose bytes hashed to it, checked by
// comparing the bytes, so a hit skips the map lookup.
const nameCacheBits = 12

// nameHash mixes the length and up to 24 bytes of b (start, middle, end)
// into a slot index; names that differ elsewhere only share a slot.
func nameHash(b []byte) uint64 {
	n := len(b)
	var x uint64
	switch {
	case n >= 8:
		x = binary.LittleEndian.Uint64(b) ^ bits.RotateLeft64(binary.LittleEndian.Uint64(b[n-8:]), 29)
		if n > 16 {
			x ^= bits.RotateLeft64(binary.LittleEndian.Uint64(b[n/2-4:]), 47)
		}
	case n >= 4:
		x = uint64(binary.LittleEndian.Uint32(b)) | uint64(binary.LittleEndian.Uint32(b[n-4:]))<<32
	default:
		for _, c := range b {
			x = x<<8 | uint64(c)
		}
	}
	x ^= uint64(n) * 0x9E3779B97F4A7C15
	return (x * 0xBF58476D1CE4E5B9) >> (64 - nameCacheBits)
}

func (d *Decoder) name(b []byte) string {
	if d.cache == nil {
		d.cache = new([1 << nameCacheBits]string)
	}
	h := nameHash(b)
	s0, s1 := &d.cache[h], &d.cache[h^1] // two-way: a pair of slots
	if *s0 == string(b) {
		return *s0
	}
	if *s1 == string(b) {
		return *s1
	}
	s := d.internName(b)
	*s1, *s0 = *s0, s // newest first
	return s
}

func (d *Decoder) internName(b []byte) string {
	if d.names != nil {
		return d.names.get(b)
	}
	if s, ok := d.intern[string(b)]; ok {
		return s
	}
	s := string(b)
	if d.intern == nil {
		d.intern = make(map[string]string)
	}
	if len(d.intern) < maxIntern {
		d.intern[s] = s
	}
	return s
}

// Decode appends the samples in data to dst and the failures to errs.
// recv is the receive time stamped on every sample. Decode never panics and
// never returns a sample with a missing tag; non-finite values are passed on
// for the pipeline to count (they cannot be written in JSON and are parsed
// from line protocol only if spelled as a float, e.g. NaN).
func (d *Decoder) Decode(data []byte, recv time.Time, dst []ingest.Sample, errs []Error) ([]ingest.Sample, []Error) {
	f := d.Format
	if f == Auto {
		f = Detect(data)
	}
	if f == JSON {
		return d.decodeJSON(data, recv, dst, errs)
	}
	return d.decodeLines(data, recv, dst, errs)
}

// Detect guesses the format from the first non-blank byte.
func Detect(data []byte) Format {
	for _, c := range data {
		switch c {
		case ' ', '\t', '\r', '\n':
			continue
		case '{', '[':
			return JSON
		}
		return LineProtocol
	}
	return LineProtocol
}

func parseQuality(s string) (ingest.Quality, error) {
	switch s {
	case "good", "Good", "GOOD":
		return ingest.Good, nil
	case "uncertain", "Uncertain", "UNCERTAIN":
		return ingest.Uncertain, nil
	case "bad", "Bad", "BAD":
		return ingest.Bad, nil
	}
	return ingest.Bad, fmt.Errorf("%w %q (good, uncertain, bad)", ErrQuality, s)
}
