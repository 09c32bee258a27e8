package tagmap

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
	"unsafe"

	"github.com/exergywatch/exergywatch/ingest"
)

// TestMapIndexAgreesWithMap: two mappers compiled from one configuration
// (plain tags in several units, scaled tags, gauge tags with a barometer
// tag and with the site pressure, the barometer itself, unmapped tags),
// fed the same random samples, one through Map and one through MapIndex,
// give the same index, the same SI value bit for bit and the same reason
// at every step (the barometer state advances alike); interned and fresh
// tag strings, enough of them for cache slots to be taken over.
func TestMapIndexAgreesWithMap(t *testing.T) {
	cfg := Config{SitePressure: "101.325kPa"}
	units := []struct{ qty, unit string }{{"p", "bar"}, {"T", "degC"}, {"T", "K"}, {"flow", "t/h"}, {"power", "MW"}, {"speed", "rpm"}, {"x", "%"}}
	cfg.Tags = append(cfg.Tags, TagConfig{Tag: "baro", Quantity: "p", Unit: "hPa"})
	for i := 0; i < 3000; i++ {
		tc := TagConfig{Tag: fmt.Sprintf("m%d.t%d", i/10, i%10)}
		switch i % 10 {
		case 0:
			tc.Quantity, tc.Unit, tc.BarometerTag = "p", "barg", "baro"
		case 1:
			tc.Quantity, tc.Unit = "p", "kPag"
		case 2:
			tc.Quantity, tc.Unit, tc.Scale = "T", "degC", &ScaleConfig{RawMin: 4, RawMax: 20, EngMin: 0, EngMax: 600}
		default:
			u := units[i%len(units)]
			tc.Quantity, tc.Unit = u.qty, u.unit
		}
		cfg.Tags = append(cfg.Tags, tc)
	}
	ma, err := Compile(cfg)
	if err != nil {
		t.Fatal(err)
	}
	mb, err := Compile(cfg)
	if err != nil {
		t.Fatal(err)
	}
	interned := map[string]string{}
	r := rand.New(rand.NewPCG(5, 9))
	hits := 0
	for step := 0; step < 60000; step++ {
		text := fmt.Sprintf("m%d.t%d", r.IntN(330), r.IntN(10))
		switch r.IntN(20) {
		case 0:
			text = "baro"
		case 1:
			text = "nope." + text
		}
		tag := text
		if s, ok := interned[text]; ok && r.IntN(8) != 0 {
			tag = s
		}
		interned[text] = tag
		s := ingest.Sample{Tag: tag, Value: (r.Float64() - 0.2) * 2000, Quality: ingest.Quality(r.IntN(3))}
		if text == "baro" {
			s.Value = 900 + r.Float64()*200
		}
		sig, wantSI, wantR := ma.Map(&s)
		wantIdx := -1
		if sig != nil {
			wantIdx = sig.Index
		}
		if mb.cache != nil {
			p := unsafe.StringData(tag)
			slot := &mb.cache[(uint64(uintptr(unsafe.Pointer(p)))*0x9E3779B97F4A7C15)>>(64-tagCacheBits)]
			if slot.p == p && slot.n == len(tag) && slot.plain {
				hits++
			}
		}
		idx, si, rr := mb.MapIndex(&s)
		if idx != wantIdx || math.Float64bits(si) != math.Float64bits(wantSI) || rr != wantR {
			t.Fatalf("step %d tag %q value %v: MapIndex %d %v %v, Map %d %v %v", step, text, s.Value, idx, si, rr, wantIdx, wantSI, wantR)
		}
	}
	if hits < 10000 {
		t.Fatalf("only %d samples took the slot-only path", hits)
	}
	if unsafe.Sizeof(tagCacheSlot{}) != 64 {
		t.Fatalf("cache slot is %d bytes, want 64 (one cache line)", unsafe.Sizeof(tagCacheSlot{}))
	}
}
