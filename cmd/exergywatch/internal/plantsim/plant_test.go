package plantsim

import (
	"math"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/config/units"
	"github.com/exergywatch/exergywatch/thermo"
	"github.com/exergywatch/exergywatch/thermo/fluids"
)

// The simulator must be consistent with the physics the daemon applies:
// from noise-free tags, the isentropic efficiency computed the standard way
// (turbine (h1-h2)/(h1-h2s), compressor/pump (h2s-h1)/(h2-h1); the
// definitions of ASME PTC 6 / PTC 10, from memory) equals the simulated
// true efficiency.
func TestTagsReproduceTrueEfficiency(t *testing.T) {
	start := time.Date(2026, 5, 4, 8, 0, 0, 0, time.UTC)
	o := DemoOptions(start)
	o.Noiseless, o.SpikeProbability, o.StuckSensorAfter = true, 0, 0
	p, err := New(o, fluids.New)
	if err != nil {
		t.Fatal(err)
	}
	for _, at := range []time.Duration{0, 75 * time.Second, 5 * time.Minute} {
		now := start.Add(at)
		rs, err := p.Step(now)
		if err != nil {
			t.Fatal(err)
		}
		byTag := map[string]float64{}
		for _, r := range rs {
			byTag[r.Tag] = r.Value
		}
		for _, m := range p.machines {
			si := map[string]float64{}
			for key, tag := range m.tags {
				u, err := unitOf(tag.Unit)
				if err != nil {
					t.Fatal(err)
				}
				if v, ok := byTag[tag.Name]; ok {
					si[key] = u.ToSI(v)
				}
			}
			if m.wetExhaust || m.coolFrac > 0 {
				continue // outlet fixed by an energy balance; checked below
			}
			in, err := m.fluid.Flash(thermo.PT, si["p@inlet"], si["T@inlet"])
			if err != nil {
				t.Fatal(err)
			}
			out, err := m.fluid.Flash(thermo.PT, si["p@outlet"], si["T@outlet"])
			if err != nil {
				t.Fatalf("%s outlet: %v", m.id, err)
			}
			iso, err := m.fluid.Flash(thermo.PS, si["p@outlet"], in.S)
			if err != nil {
				t.Fatal(err)
			}
			var eta float64
			if m.kind == "turbine" {
				eta = (in.H - out.H) / (in.H - iso.H)
			} else {
				eta = (iso.H - in.H) / (out.H - in.H)
			}
			want, _ := p.TrueEfficiency(m.id, at)
			if math.Abs(eta-want) > 1e-6 {
				t.Errorf("%s at %v: efficiency from tags %.8f, simulated %.8f", m.id, at, eta, want)
			}
		}
	}
}

func TestLoadProfileAndFaults(t *testing.T) {
	start := time.Date(2026, 5, 4, 8, 0, 0, 0, time.UTC)
	o := DemoOptions(start)
	p, err := New(o, fluids.New)
	if err != nil {
		t.Fatal(err)
	}
	if l := p.Load(0); l != 1 {
		t.Errorf("load at start %v", l)
	}
	if l := p.Load(o.LoadChangeAfter + o.LoadRamp); math.Abs(l-0.75) > 1e-12 {
		t.Errorf("load after the change %v, want 0.75", l)
	}
	// The stuck thermocouple repeats its value exactly.
	var vals []float64
	for i := 0; i < 5; i++ {
		rs, _ := p.Step(start.Add(o.StuckSensorAfter + time.Duration(i)*time.Second))
		for _, r := range rs {
			if r.Tag == "QM.GC1.TT502" {
				vals = append(vals, r.Value)
			}
		}
	}
	for _, v := range vals[1:] {
		if v != vals[0] {
			t.Fatalf("stuck sensor moved: %v", vals)
		}
	}
	// Gauge tag is published as gauge: about 7 barg for 8 bar absolute.
	rs, _ := p.Step(start)
	for _, r := range rs {
		if r.Tag == "QM.AC1.PT402" {
			u, _ := units.Lookup("barg")
			if abs := u.ToSIAbsolute(r.Value, BarometerPa); math.Abs(abs-0.8e6) > 2e3 {
				t.Errorf("air compressor discharge %v barg -> %v Pa abs, want about 0.8 MPa", r.Value, abs)
			}
		}
	}
	if len(p.Tags()) != 34 {
		t.Errorf("%d tags, want 34", len(p.Tags()))
	}
}

// The same seed gives the same readings, value for value.
func TestSeedReproducible(t *testing.T) {
	start := time.Date(2026, 5, 4, 8, 0, 0, 0, time.UTC)
	run := func() []Reading {
		p, err := New(DemoOptions(start), fluids.New)
		if err != nil {
			t.Fatal(err)
		}
		var out []Reading
		for i := 1; i <= 5; i++ {
			rs, err := p.Step(start.Add(time.Duration(i) * time.Second))
			if err != nil {
				t.Fatal(err)
			}
			out = append(out, rs...)
		}
		return out
	}
	a, b := run(), run()
	if len(a) != len(b) {
		t.Fatalf("%d vs %d readings", len(a), len(b))
	}
	for i := range a {
		if a[i] != b[i] {
			t.Fatalf("reading %d differs: %+v vs %+v", i, a[i], b[i])
		}
	}
}
