package tagmap

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"gopkg.in/yaml.v3"

	"github.com/exergywatch/exergywatch/ingest"
)

func TestCompileErrors(t *testing.T) {
	tests := []struct {
		name string
		cfg  Config
		want string
	}{
		{"unknown quantity", Config{Tags: []TagConfig{{Tag: "a", Quantity: "pressure"}}}, "unknown quantity"},
		{"wrong unit kind", Config{Tags: []TagConfig{{Tag: "a", Quantity: "T", Unit: "bar"}}}, "does not fit"},
		{"gauge without barometer", Config{Tags: []TagConfig{{Tag: "a", Machine: "m", Port: "inlet", Quantity: "p", Unit: "barg"}}}, "needs barometer_tag or site_pressure"},
		{"barometer not mapped", Config{Tags: []TagConfig{{Tag: "a", Machine: "m", Port: "inlet", Quantity: "p", Unit: "barg", BarometerTag: "b"}}}, "not mapped"},
		{"barometer gauge", Config{Tags: []TagConfig{{Tag: "b", Quantity: "p", Unit: "barg", SitePressure: "1bar"},
			{Tag: "a", Machine: "m", Port: "inlet", Quantity: "p", Unit: "barg", BarometerTag: "b"}}}, "absolute pressure"},
		{"duplicate tag", Config{Tags: []TagConfig{{Tag: "a", Quantity: "p"}, {Tag: "a", Quantity: "p"}}}, "mapped twice"},
		{"two tags one input", Config{Tags: []TagConfig{{Tag: "a", Machine: "m", Port: "inlet", Quantity: "p"}, {Tag: "b", Machine: "m", Port: "inlet", Quantity: "p"}}}, "redundancy group"},
		{"bad scale", Config{Tags: []TagConfig{{Tag: "a", Quantity: "p", Scale: &ScaleConfig{RawMin: 4, RawMax: 4}}}}, "raw_min != raw_max"},
		{"bad range", Config{Tags: []TagConfig{{Tag: "a", Quantity: "T", Range: &RangeConfig{Min: "500K", Max: "300K"}}}}, "below max"},
		{"median3 with two", Config{Tags: []TagConfig{{Tag: "a", Machine: "m", Port: "i", Quantity: "p"}, {Tag: "b", Machine: "m", Port: "i", Quantity: "p"}},
			Groups: []GroupConfig{{Name: "g", Mode: Median3, Tags: []string{"a", "b"}}}}, "exactly 3"},
		{"group mixes inputs", Config{Tags: []TagConfig{{Tag: "a", Machine: "m", Port: "i", Quantity: "p"}, {Tag: "b", Machine: "m", Port: "o", Quantity: "p"}},
			Groups: []GroupConfig{{Name: "g", Mode: AB, Tags: []string{"a", "b"}}}}, "group is"},
		{"bad tolerance unit", Config{Tags: []TagConfig{{Tag: "a", Quantity: "T", Checks: CheckConfig{StuckTolerance: "2bar"}}}}, "stuck_tolerance"},
		{"spike window 2", Config{Tags: []TagConfig{{Tag: "a", Quantity: "T", Checks: CheckConfig{SpikeWindow: 2}}}}, "at least 3"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Compile(tc.cfg)
			if !errors.Is(err, ErrConfig) || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("got %v, want ErrConfig containing %q", err, tc.want)
			}
		})
	}
}

func TestMapConversions(t *testing.T) {
	m, err := Compile(Config{SitePressure: "1013.25mbar", Tags: []TagConfig{
		{Tag: "baro", Quantity: "p", Unit: "kPa"},
		{Tag: "pg", Machine: "c", Port: "discharge", Quantity: "p", Unit: "psig", BarometerTag: "baro"},
		{Tag: "tf", Machine: "c", Port: "suction", Quantity: "T", Unit: "degF"},
		{Tag: "f", Machine: "c", Port: "suction", Quantity: "flow", Unit: "kg/h"},
		{Tag: "rh", Machine: "c", Port: "ambient", Quantity: "rh", Unit: "%"},
		{Tag: "n", Machine: "c", Port: "shaft", Quantity: "speed", Unit: "rpm"},
		{Tag: "cnt", Machine: "c", Port: "shaft", Quantity: "power", Unit: "MW", Scale: &ScaleConfig{RawMin: 0, RawMax: 27648, EngMin: 0, EngMax: 20}},
	}})
	if err != nil {
		t.Fatal(err)
	}
	mp := func(tag string, v float64) (float64, ingest.Reason) {
		s := ingest.Sample{Tag: tag, Value: v}
		_, si, r := m.Map(&s)
		return si, r
	}
	// psig before any barometer sample: the declared site pressure
	// 1013.25 mbar = 101325 Pa; 100 psig = 689475.729 Pa (1 psi =
	// 6894.757293 Pa, exact by definition of the pound and inch).
	if si, _ := mp("pg", 100); math.Abs(si-(689475.7293168361+101325)) > 1e-6 {
		t.Errorf("psig with site pressure: %v", si)
	}
	mp("baro", 95)
	if si, _ := mp("pg", 100); math.Abs(si-(689475.7293168361+95000)) > 1e-6 {
		t.Errorf("psig with barometer 95 kPa: %v", si)
	}
	checks := []struct {
		tag     string
		v, want float64
	}{
		{"tf", 212, 373.15},        // 212 degF = 373.15 K (definition of the Fahrenheit scale)
		{"f", 3600, 1},             // kg/h
		{"rh", 55, 0.55},           // percent
		{"n", 3000, 100 * math.Pi}, // 3000 rpm = 100π rad/s
		{"cnt", 13824, 10e6},       // half of 0..27648 counts -> 10 MW
		{"cnt", 27648 * 1.1, 22e6}, // over-range counts extrapolate; the range check judges them
	}
	for _, c := range checks {
		si, r := mp(c.tag, c.v)
		if r != ingest.ReasonNone || math.Abs(si-c.want) > 1e-9*math.Max(1, math.Abs(c.want)) {
			t.Errorf("%s %v: got %v (%v), want %v", c.tag, c.v, si, r, c.want)
		}
	}
	if _, r := mp("unknown", 1); r != ingest.ReasonUnmapped {
		t.Errorf("unmapped tag: %v", r)
	}
}

func TestGaugeWithoutAnyBarometerValue(t *testing.T) {
	m, err := Compile(Config{Tags: []TagConfig{
		{Tag: "baro", Quantity: "p", Unit: "hPa"},
		{Tag: "pg", Machine: "c", Port: "discharge", Quantity: "p", Unit: "barg", BarometerTag: "baro"},
	}})
	if err != nil {
		t.Fatal(err)
	}
	s := ingest.Sample{Tag: "pg", Value: 1}
	if _, _, r := m.Map(&s); r != ingest.ReasonNoBarometer {
		t.Fatalf("got %v, want no_barometer", r)
	}
}

func TestYAML(t *testing.T) {
	const doc = `
site_pressure: 101.325kPa
ranges:
  T: {min: 250K, max: 900K}
tags:
  - tag: U1.PT101
    machine: hp-turbine
    port: inlet
    quantity: p
    unit: barg
    checks: {stale_after: 30s, stuck_period: 10m, stuck_tolerance: 0.01bar, spike_window: 7, max_rate_per_s: 2bar}
  - {tag: U1.TT101A, machine: hp-turbine, port: inlet, quantity: T, unit: degC}
  - {tag: U1.TT101B, machine: hp-turbine, port: inlet, quantity: T, unit: degC}
redundancy_groups:
  - {name: inlet-T, mode: ab, tags: [U1.TT101A, U1.TT101B], divergence: 3K}
`
	var cfg Config
	if err := yaml.Unmarshal([]byte(doc), &cfg); err != nil {
		t.Fatal(err)
	}
	m, err := Compile(cfg)
	if err != nil {
		t.Fatal(err)
	}
	s, _ := m.Signal("U1.PT101")
	// 0.01 bar = 1000 Pa, 2 bar/s = 2e5 Pa/s; T range 250..900 K applies to
	// T tags only (p keeps its default 0..1e8 Pa).
	if s.Params.StaleAfter != 30*time.Second || s.Params.StuckPeriod != 10*time.Minute || s.Params.StuckTolerance != 1000 ||
		s.Params.MaxRate != 2e5 || s.Params.SpikeWindow != 7 || s.Params.Max != 1e8 {
		t.Fatalf("params %+v", s.Params)
	}
	tt, _ := m.Signal("U1.TT101A")
	if tt.Params.Min != 250 || tt.Params.Max != 900 || len(m.Groups) != 1 || m.Groups[0].Divergence != 3 {
		t.Fatalf("T params %+v groups %+v", tt.Params, m.Groups)
	}
}

// TestLookupCacheAgreesWithMap: the pointer-keyed cache in front of the
// tag map must give what the map gives, for interned strings (same data
// pointer every time), fresh copies of the same text, unmapped tags, and
// enough distinct strings to make slots collide and be taken over.
func TestLookupCacheAgreesWithMap(t *testing.T) {
	var cfg Config
	for i := 0; i < 3000; i++ {
		cfg.Tags = append(cfg.Tags, TagConfig{Tag: fmt.Sprintf("u%d.t%d", i/10, i%10), Quantity: "T"})
	}
	m, err := Compile(cfg)
	if err != nil {
		t.Fatal(err)
	}
	interned := map[string]string{}
	for pass := 0; pass < 3; pass++ {
		for i := 0; i < 9000; i++ { // every third is not mapped
			text := fmt.Sprintf("u%d.t%d", i/10, i%10)
			if i%3 == 2 {
				text = "x" + text
			}
			tag := text
			if pass > 0 && i%2 == 0 {
				if s, ok := interned[text]; ok {
					tag = s // same data pointer as before
				}
			}
			interned[text] = tag
			sig, _, r := m.Map(&ingest.Sample{Tag: tag, Value: 300})
			want, ok := m.byTag[text]
			switch {
			case !ok && r != ingest.ReasonUnmapped:
				t.Fatalf("pass %d: %q is not mapped, got %v", pass, text, r)
			case ok && (r != ingest.ReasonNone || sig != want):
				t.Fatalf("pass %d: %q mapped to %v (%v), want %v", pass, text, sig, r, want.Tag)
			}
		}
	}
	if _, _, r := m.Map(&ingest.Sample{Tag: "", Value: 1}); r != ingest.ReasonUnmapped {
		t.Fatalf("empty tag: %v", r)
	}
}
