// Package tagmap maps source tags to machine inputs: machine, port and
// quantity, with the unit conversion to SI (the only place where sensor
// units are converted, through config/units), linear scaling of raw
// counts, gauge pressures made absolute with a barometer tag or a declared
// site pressure, plausible ranges, the per-tag quality-check settings and
// redundancy groups.
//
// The config helper decodes YAML into Config; Compile checks it and returns
// a Mapper.
package tagmap

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"
	"time"
	"unsafe"

	"github.com/exergywatch/exergywatch/config/units"
	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/quality"
)

// Config is the tag map section of the configuration.
type Config struct {
	// SitePressure is the declared barometric pressure ("101.325kPa") used
	// for gauge tags that have no barometer tag of their own.
	SitePressure string `yaml:"site_pressure"`
	// Ranges overrides the default plausible range per quantity
	// ("p": {min: "0.5kPa", max: "35MPa"}).
	Ranges map[string]RangeConfig `yaml:"ranges"`
	Tags   []TagConfig            `yaml:"tags"`
	Groups []GroupConfig          `yaml:"redundancy_groups"`
}

// RangeConfig is a plausible range written with units.
type RangeConfig struct {
	Min string `yaml:"min"`
	Max string `yaml:"max"`
}

// TagConfig maps one source tag.
type TagConfig struct {
	Tag     string `yaml:"tag"`     // source tag name (payload tag, or OPC UA tag name)
	Machine string `yaml:"machine"` // machine id; empty for site tags (barometer)
	Port    string `yaml:"port"`    // inlet, outlet, shaft, suction, discharge, extraction, ambient, ...
	// Quantity: p, T, dT, flow, power, x, rh, speed, h, s, rho.
	Quantity string `yaml:"quantity"`
	// Unit of the value as sent (after scaling): "barg", "degC", "t/h", ...
	// Empty means SI.
	Unit string `yaml:"unit"`
	// BarometerTag names a tag (quantity p, absolute) whose newest value
	// makes this gauge pressure absolute.
	BarometerTag string `yaml:"barometer_tag"`
	// SitePressure overrides Config.SitePressure for this tag.
	SitePressure string `yaml:"site_pressure"`
	// Scale maps raw counts linearly to the engineering value in Unit.
	Scale *ScaleConfig `yaml:"scale"`
	// Range overrides the plausible range of the quantity for this tag.
	Range  *RangeConfig `yaml:"range"`
	Checks CheckConfig  `yaml:"checks"`
}

// ScaleConfig is a linear map raw [RawMin, RawMax] -> [EngMin, EngMax] (in
// the tag's Unit), e.g. 4..20 mA or 0..27648 counts.
type ScaleConfig struct {
	RawMin float64 `yaml:"raw_min"`
	RawMax float64 `yaml:"raw_max"`
	EngMin float64 `yaml:"eng_min"`
	EngMax float64 `yaml:"eng_max"`
}

// CheckConfig holds the data-quality settings of a tag, written with units
// where they have one. Tolerances and rates are differences of the quantity
// ("0.2K", "50kPa"); a rate is per second.
type CheckConfig struct {
	StuckPeriod     time.Duration `yaml:"stuck_period"`
	StuckTolerance  string        `yaml:"stuck_tolerance"`
	SpikeWindow     int           `yaml:"spike_window"`
	SpikeK          float64       `yaml:"spike_k"`
	SpikeFloor      string        `yaml:"spike_floor"`
	MaxRatePerS     string        `yaml:"max_rate_per_s"`
	StaleAfter      time.Duration `yaml:"stale_after"`
	RejectUncertain bool          `yaml:"reject_uncertain"`
}

// Mode is how a redundancy group combines its members.
type Mode string

// Redundancy modes.
const (
	Median3   Mode = "median3"   // median of three; with two usable the mean, with one that one (substituted)
	AB        Mode = "ab"        // mean of A and B; divergence beyond the limit is flagged; one usable: substituted
	Preferred Mode = "preferred" // first usable member in the given order; any other is a substitution
)

// GroupConfig groups redundant tags measuring the same machine input.
type GroupConfig struct {
	Name string   `yaml:"name"`
	Mode Mode     `yaml:"mode"`
	Tags []string `yaml:"tags"`
	// Divergence is the A/B (and median3) disagreement limit, a difference
	// with unit ("0.5bar", "2K").
	Divergence string `yaml:"divergence"`
}

// Errors callers branch on.
var (
	ErrConfig          = errors.New("invalid tag map")
	ErrUnknownQuantity = errors.New("unknown quantity")
)

// Quantity describes one quantity name.
type Quantity struct {
	Name  string
	Kind  units.Kind
	Delta units.Kind // kind of a difference of this quantity (tolerances, rates)
	// Default plausible range in SI (judgement for industrial turbines,
	// pumps and compressors, no source; override per site or tag).
	Min, Max float64
}

var quantities = map[string]Quantity{
	"p":     {"p", units.Pressure, units.Pressure, 0, 1e8},                     // 0 .. 1000 bar
	"T":     {"T", units.Temperature, units.TemperatureDelta, 150, 2000},       // K
	"dT":    {"dT", units.TemperatureDelta, units.TemperatureDelta, -500, 500}, // K
	"flow":  {"flow", units.MassFlow, units.MassFlow, -1e3, 2e4},               // kg/s
	"power": {"power", units.Power, units.Power, -2e9, 2e9},                    // W
	"x":     {"x", units.Fraction, units.Fraction, 0, 1},                       // vapour quality
	"rh":    {"rh", units.Fraction, units.Fraction, 0, 1},                      // relative humidity
	"speed": {"speed", units.RotationalSpeed, units.RotationalSpeed, 0, 1e4},   // rad/s (about 95000 rpm)
	"h":     {"h", units.SpecificEnergy, units.SpecificEnergy, -1e6, 1e7},      // J/kg
	"s":     {"s", units.SpecificEntropy, units.SpecificEntropy, -1e4, 1e5},    // J/(kg K)
	"rho":   {"rho", units.Density, units.Density, 0, 2e4},                     // kg/m3
}

// LookupQuantity returns the description of a quantity name.
func LookupQuantity(name string) (Quantity, error) {
	q, ok := quantities[name]
	if !ok {
		names := make([]string, 0, len(quantities))
		for n := range quantities {
			names = append(names, n)
		}
		sort.Strings(names)
		return Quantity{}, fmt.Errorf("%w %q (known: %s)", ErrUnknownQuantity, name, strings.Join(names, ", "))
	}
	return q, nil
}

// Key identifies a machine input.
type Key struct {
	Port     string
	Quantity string
}

func (k Key) String() string { return k.Port + "." + k.Quantity }

// Signal is one compiled tag.
type Signal struct {
	Index    int
	Tag      string
	Machine  string
	Key      Key
	Quantity Quantity
	Unit     units.Unit
	Params   quality.Params

	scale      *ScaleConfig
	baroIndex  int     // index of the barometer signal, -1 none
	sitePa     float64 // declared site pressure, NaN none
	Group      int     // index into Mapper.Groups, -1 none
	isBaro     bool
	lastBaroPa float64 // newest good barometer value (for barometer signals)
	hasBaro    bool
}

// Group is a compiled redundancy group.
type Group struct {
	Name       string
	Mode       Mode
	Members    []int // signal indices in preference order
	Divergence float64
	Machine    string
	Key        Key
}

// Mapper converts samples to SI machine inputs. The barometer state makes
// it stateful: Map is not safe for concurrent use (the align engine calls it
// from one goroutine).
type Mapper struct {
	Signals []*Signal
	Groups  []*Group
	byTag   map[string]*Signal
	cache   *[tagCacheSize]tagCacheSlot
}

// The lookup cache in front of byTag. Decoders intern tag names, so the
// samples of one tag carry the same string (same data pointer) message
// after message; a slot remembers the signal of one such string. A hit
// needs the same data pointer and length: the slot's pointer keeps the
// string's memory alive, so the address cannot be reused for other text,
// and Go strings are immutable, so same pointer and length means same
// tag. Any other string falls back to the map and takes the slot.
const tagCacheBits = 12

const tagCacheSize = 1 << tagCacheBits

type tagCacheSlot struct {
	p   *byte
	n   int
	sig *Signal // nil: the tag is not mapped
	// For MapIndex without reading the Signal: its index, and for a plain
	// signal (no scaling, not gauge, not a barometer) the conversion
	// si = v*mul + add of its unit (units.Unit.ToSI).
	idx      int32
	plain    bool
	mul, add float64
	_        [16]byte // one slot per 64-byte cache line
}

// lookup is byTag[tag] through the cache.
func (m *Mapper) lookup(tag string) (*Signal, bool) {
	if tag == "" {
		sig, ok := m.byTag[tag]
		return sig, ok
	}
	if m.cache == nil {
		m.cache = new([tagCacheSize]tagCacheSlot)
	}
	p := unsafe.StringData(tag)
	// Fibonacci hashing of the address (Knuth, TAOCP vol. 3, 6.4).
	slot := &m.cache[(uint64(uintptr(unsafe.Pointer(p)))*0x9E3779B97F4A7C15)>>(64-tagCacheBits)]
	if slot.p == p && slot.n == len(tag) {
		return slot.sig, slot.sig != nil
	}
	sig, ok := m.byTag[tag]
	*slot = tagCacheSlot{p: p, n: len(tag), sig: sig}
	if sig != nil {
		slot.idx = int32(sig.Index)
		slot.plain = sig.scale == nil && !sig.Unit.Gauge && !sig.isBaro
		slot.mul, slot.add = sig.Unit.Scale, sig.Unit.Offset
	}
	return sig, ok
}

// Compile checks cfg and builds a Mapper. All problems are reported
// together, each wrapped in ErrConfig.
func Compile(cfg Config) (*Mapper, error) {
	var errs []error
	bad := func(format string, a ...any) {
		errs = append(errs, fmt.Errorf("%w: "+format, append([]any{ErrConfig}, a...)...))
	}
	m := &Mapper{byTag: map[string]*Signal{}}
	site := math.NaN()
	if cfg.SitePressure != "" {
		v, err := units.Parse(cfg.SitePressure, units.Pressure)
		if err != nil || v <= 0 {
			bad("site_pressure %q: %v", cfg.SitePressure, err)
		} else {
			site = v
		}
	}
	ranges := map[string][2]float64{}
	for qn, rc := range cfg.Ranges {
		q, err := LookupQuantity(qn)
		if err != nil {
			bad("ranges: %v", err)
			continue
		}
		lo, hi, err := parseRange(rc, q)
		if err != nil {
			bad("ranges.%s: %v", qn, err)
			continue
		}
		ranges[qn] = [2]float64{lo, hi}
	}
	for i, tc := range cfg.Tags {
		where := fmt.Sprintf("tags[%d] %q", i, tc.Tag)
		if tc.Tag == "" {
			bad("%s: empty tag", where)
			continue
		}
		if _, dup := m.byTag[tc.Tag]; dup {
			bad("%s: tag mapped twice", where)
			continue
		}
		q, err := LookupQuantity(tc.Quantity)
		if err != nil {
			bad("%s: %v", where, err)
			continue
		}
		if tc.Machine != "" && tc.Port == "" {
			bad("%s: machine %q without port", where, tc.Machine)
		}
		s := &Signal{Index: len(m.Signals), Tag: tc.Tag, Machine: tc.Machine, Key: Key{tc.Port, tc.Quantity},
			Quantity: q, baroIndex: -1, sitePa: site, Group: -1}
		if tc.Unit == "" {
			s.Unit = units.Unit{Name: q.Kind.SIUnit(), Kind: q.Kind, Scale: 1}
		} else if u, err := units.LookupKind(tc.Unit, q.Kind); err != nil {
			bad("%s: %v", where, err)
		} else {
			s.Unit = u
		}
		if tc.SitePressure != "" {
			v, err := units.Parse(tc.SitePressure, units.Pressure)
			if err != nil || v <= 0 {
				bad("%s: site_pressure %q: %v", where, tc.SitePressure, err)
			} else {
				s.sitePa = v
			}
		}
		if s.Unit.Gauge && tc.BarometerTag == "" && math.IsNaN(s.sitePa) {
			bad("%s: gauge unit %s needs barometer_tag or site_pressure", where, s.Unit.Name)
		}
		if tc.Scale != nil {
			sc := *tc.Scale
			if sc.RawMax == sc.RawMin || math.IsNaN(sc.RawMin+sc.RawMax+sc.EngMin+sc.EngMax) || math.IsInf(sc.RawMin+sc.RawMax+sc.EngMin+sc.EngMax, 0) {
				bad("%s: scale needs raw_min != raw_max and finite numbers", where)
			}
			s.scale = &sc
		}
		lo, hi := q.Min, q.Max
		if r, ok := ranges[tc.Quantity]; ok {
			lo, hi = r[0], r[1]
		}
		if tc.Range != nil {
			l, h, err := parseRange(*tc.Range, q)
			if err != nil {
				bad("%s: range: %v", where, err)
			} else {
				lo, hi = l, h
			}
		}
		p := quality.Params{Min: lo, Max: hi, StuckPeriod: tc.Checks.StuckPeriod, SpikeWindow: tc.Checks.SpikeWindow,
			SpikeK: tc.Checks.SpikeK, StaleAfter: tc.Checks.StaleAfter, RejectUncertain: tc.Checks.RejectUncertain}
		for _, f := range []struct {
			name, text string
			dst        *float64
		}{{"stuck_tolerance", tc.Checks.StuckTolerance, &p.StuckTolerance}, {"spike_floor", tc.Checks.SpikeFloor, &p.SpikeFloor}, {"max_rate_per_s", tc.Checks.MaxRatePerS, &p.MaxRate}} {
			if f.text == "" {
				continue
			}
			v, err := parseDelta(f.text, q)
			if err != nil || v < 0 {
				bad("%s: checks.%s %q: %v", where, f.name, f.text, err)
				continue
			}
			*f.dst = v
		}
		if p.SpikeWindow != 0 && p.SpikeWindow < 3 {
			bad("%s: checks.spike_window %d: need at least 3", where, p.SpikeWindow)
		}
		if p.SpikeK < 0 || p.StuckPeriod < 0 || p.StaleAfter < 0 {
			bad("%s: negative check setting", where)
		}
		s.Params = p
		m.Signals = append(m.Signals, s)
		m.byTag[tc.Tag] = s
	}
	for i, tc := range cfg.Tags {
		s, ok := m.byTag[tc.Tag]
		if !ok || tc.BarometerTag == "" || s.Index >= len(m.Signals) || m.Signals[s.Index] != s {
			continue
		}
		b, ok := m.byTag[tc.BarometerTag]
		switch {
		case !ok:
			bad("tags[%d] %q: barometer_tag %q is not mapped", i, tc.Tag, tc.BarometerTag)
		case b.Quantity.Name != "p" || b.Unit.Gauge:
			bad("tags[%d] %q: barometer_tag %q must be an absolute pressure", i, tc.Tag, tc.BarometerTag)
		case !s.Unit.Gauge:
			bad("tags[%d] %q: barometer_tag given but unit %s is not a gauge unit", i, tc.Tag, s.Unit.Name)
		default:
			s.baroIndex = b.Index
			b.isBaro = true
		}
	}
	for gi, gc := range cfg.Groups {
		where := fmt.Sprintf("redundancy_groups[%d] %q", gi, gc.Name)
		g := &Group{Name: gc.Name, Mode: gc.Mode}
		switch gc.Mode {
		case Median3:
			if len(gc.Tags) != 3 {
				bad("%s: median3 needs exactly 3 tags", where)
			}
		case AB:
			if len(gc.Tags) != 2 {
				bad("%s: ab needs exactly 2 tags", where)
			}
		case Preferred:
			if len(gc.Tags) < 2 {
				bad("%s: preferred needs at least 2 tags", where)
			}
		default:
			bad("%s: mode %q (median3, ab, preferred)", where, gc.Mode)
		}
		for j, tn := range gc.Tags {
			s, ok := m.byTag[tn]
			if !ok {
				bad("%s: tag %q is not mapped", where, tn)
				continue
			}
			if s.Group >= 0 {
				bad("%s: tag %q is already in group %q", where, tn, m.Groups[s.Group].Name)
				continue
			}
			if j == 0 || g.Machine == "" {
				g.Machine, g.Key = s.Machine, s.Key
			} else if s.Machine != g.Machine || s.Key != g.Key {
				bad("%s: tag %q maps to %s %s, group is %s %s", where, tn, s.Machine, s.Key, g.Machine, g.Key)
				continue
			}
			s.Group = len(m.Groups)
			g.Members = append(g.Members, s.Index)
		}
		if gc.Divergence != "" && len(g.Members) > 0 {
			v, err := parseDelta(gc.Divergence, m.Signals[g.Members[0]].Quantity)
			if err != nil || v <= 0 {
				bad("%s: divergence %q: %v", where, gc.Divergence, err)
			}
			g.Divergence = v
		}
		m.Groups = append(m.Groups, g)
	}
	// Two ungrouped tags must not claim the same machine input.
	seen := map[string]string{}
	for _, s := range m.Signals {
		if s.Machine == "" || s.Group >= 0 {
			continue
		}
		k := s.Machine + "/" + s.Key.String()
		if other, dup := seen[k]; dup {
			bad("tags %q and %q both map to %s %s; put them in a redundancy group", other, s.Tag, s.Machine, s.Key)
		}
		seen[k] = s.Tag
	}
	if len(errs) > 0 {
		return nil, errors.Join(errs...)
	}
	return m, nil
}

func parseRange(rc RangeConfig, q Quantity) (float64, float64, error) {
	lo, err := units.Parse(rc.Min, q.Kind)
	if err != nil {
		return 0, 0, err
	}
	hi, err := units.Parse(rc.Max, q.Kind)
	if err != nil {
		return 0, 0, err
	}
	if !(lo < hi) {
		return 0, 0, fmt.Errorf("min %s must be below max %s", rc.Min, rc.Max)
	}
	return lo, hi, nil
}

// parseDelta reads a difference of quantity q ("0.5bar", "2K", "2degC").
func parseDelta(s string, q Quantity) (float64, error) {
	v, name, err := units.Split(s)
	if err != nil {
		return 0, err
	}
	if name == "" {
		return v, nil
	}
	u, err := units.LookupKind(name, q.Delta)
	if err != nil {
		return 0, err
	}
	return v * u.Scale, nil // a difference: no offset, gauge and absolute alike
}

// Signal returns the compiled signal of a tag.
func (m *Mapper) Signal(tag string) (*Signal, bool) {
	s, ok := m.byTag[tag]
	return s, ok
}

// Map converts the value of sample s to SI for its signal. It returns the
// signal, the SI value and a reason when the sample cannot be mapped
// (ReasonUnmapped, ReasonNoBarometer). Barometer tags update the state used
// for gauge pressures.
func (m *Mapper) Map(s *ingest.Sample) (*Signal, float64, ingest.Reason) {
	sig, ok := m.lookup(s.Tag)
	if !ok {
		return nil, 0, ingest.ReasonUnmapped
	}
	v := s.Value
	if sc := sig.scale; sc != nil {
		v = sc.EngMin + (v-sc.RawMin)*(sc.EngMax-sc.EngMin)/(sc.RawMax-sc.RawMin)
	}
	var si float64
	if sig.Unit.Gauge {
		baro := sig.sitePa
		if sig.baroIndex >= 0 {
			if b := m.Signals[sig.baroIndex]; b.hasBaro {
				baro = b.lastBaroPa
			}
		}
		if math.IsNaN(baro) {
			return sig, 0, ingest.ReasonNoBarometer
		}
		si = sig.Unit.ToSIAbsolute(v, baro)
	} else {
		si = sig.Unit.ToSI(v)
	}
	if sig.isBaro && s.Quality != ingest.Bad && si > sig.Params.Min && si < sig.Params.Max && !math.IsNaN(si) {
		sig.lastBaroPa, sig.hasBaro = si, true
	}
	return sig, si, ingest.ReasonNone
}

// MapIndex is Map returning the signal's index (Signal.Index; -1 when
// unmapped) instead of the signal. For a plain signal (no scaling, not a
// gauge, not a barometer) whose tag string hits the lookup cache it reads
// only the cache slot, not the Signal: the align engine's per-sample path.
// The Signals must not be changed after Compile.
func (m *Mapper) MapIndex(s *ingest.Sample) (int, float64, ingest.Reason) {
	if tag := s.Tag; tag != "" && m.cache != nil {
		p := unsafe.StringData(tag)
		slot := &m.cache[(uint64(uintptr(unsafe.Pointer(p)))*0x9E3779B97F4A7C15)>>(64-tagCacheBits)]
		if slot.p == p && slot.n == len(tag) && slot.plain {
			return int(slot.idx), s.Value*slot.mul + slot.add, ingest.ReasonNone
		}
	}
	sig, si, r := m.Map(s)
	if sig == nil {
		return -1, si, r
	}
	return sig.Index, si, r
}

// Tags returns the mapped tag names in configuration order.
func (m *Mapper) Tags() []string {
	out := make([]string, len(m.Signals))
	for i, s := range m.Signals {
		out[i] = s.Tag
	}
	return out
}
