// Package plantsim simulates the sensor tags of an invented plant, the
// Quillmoor demonstration works: a two-section steam turbine (HP, and LP
// with a wet exhaust), a boiler feed pump, an air compressor, a natural-gas
// booster compressor and an oil-cooled ammonia refrigeration compressor.
//
// The tags are computed from real fluid properties: each machine has a true
// isentropic efficiency that depends on load and degrades with time, and its
// outlet state follows from it. Sensors add noise, and some fail on purpose
// (a stuck thermocouple, spikes), so the demo shows every kind of doubt the
// daemon must handle. Nothing here describes a real site.
package plantsim

import (
	"fmt"
	"maps"
	"math"
	"math/rand/v2"
	"slices"
	"time"

	"github.com/exergywatch/exergywatch/thermo"
)

// FluidFunc builds a property model from a config fluid name and an optional
// composition (mole fractions).
type FluidFunc func(name string, composition map[string]float64) (thermo.Fluid, error)

// Tag describes one simulated sensor.
type Tag struct {
	Name     string // tag name as published, e.g. "QM.HP1.TT102"
	Machine  string // machine id, e.g. "hp-turbine"
	Port     string // inlet, outlet, shaft, generator, ambient
	Quantity string // p, T, flow, power (port shaft, generator or motor)
	Unit     string // the unit the value is published in (config/units name)
	Noise    float64
	// noise is the standard deviation of the measurement noise, in Unit.
}

// Options sets the simulation.
type Options struct {
	Seed int64
	// Start is the simulated time origin. Sim time = Start + elapsed*Speed.
	Start time.Time
	// Copies repeats the machine set (ids get a numeric suffix) for load
	// generation. 0 or 1 means one plant.
	Copies int
	// LoadChangeAfter is when the load drops from 100 % to 70 % (ramp of
	// LoadRamp), and LoadRestoreAfter when it returns. Zero disables.
	LoadChangeAfter, LoadRestoreAfter, LoadRamp time.Duration
	// LoadDrop is the fraction of load lost in the load change (default 0.3).
	LoadDrop float64
	// DegradeAfter is when fouling starts on the air compressor and erosion
	// on the HP turbine; DegradeRate is the air compressor's loss of
	// isentropic efficiency per minute, as a fraction (0.01 = one point per
	// minute); the HP turbine loses a tenth of that.
	DegradeAfter time.Duration
	DegradeRate  float64
	// DegradeMax caps the loss of efficiency (fraction; 0: no cap).
	DegradeMax float64
	// StuckSensorAfter makes the gas compressor's discharge thermocouple
	// freeze for StuckFor. Zero disables.
	StuckSensorAfter, StuckFor time.Duration
	// SpikeProbability is the chance per published value of a spike on the
	// feed-pump flow transmitter.
	SpikeProbability float64
	// Noiseless turns measurement noise off (tests).
	Noiseless bool
}

// DemoOptions returns the settings used by `exergywatch demo`: fouling of
// the air compressor from t+10 s at 2 points per minute (capped at 6
// points), a stuck thermocouple at t+60 s for 2 minutes, a load drop to
// 75 % at t+120 s and back at t+240 s.
func DemoOptions(start time.Time) Options {
	return Options{
		Seed: 7, Start: start,
		LoadChangeAfter: 120 * time.Second, LoadRestoreAfter: 240 * time.Second, LoadRamp: 20 * time.Second, LoadDrop: 0.25,
		DegradeAfter: 10 * time.Second, DegradeRate: 0.02, DegradeMax: 0.06,
		StuckSensorAfter: 60 * time.Second, StuckFor: 120 * time.Second,
		SpikeProbability: 0.01,
	}
}

// Reading is one published value.
type Reading struct {
	Tag   string
	Time  time.Time
	Value float64 // in the tag's Unit
	// Quality is "good", or "bad" when the simulated transmitter reports a
	// fault (a stuck sensor does not know it is stuck: it stays "good").
	Quality string
}

type machine struct {
	id, kind string
	fluid    thermo.Fluid
	// design point (SI)
	p1, T1, p2, flow  float64
	eta0              float64 // isentropic efficiency at full load, new
	degrades          float64 // share of Options.DegradeRate this machine loses (0: none)
	genEff, mechLossW float64 // turbine with generator power tag
	coolFrac          float64 // compressor: share of shaft work removed by oil cooling
	motorEff          float64 // pump/compressor: power tag is shaft power / this
	wetExhaust        bool
	tags              map[string]*Tag // quantity@port -> tag
	stuck             *stuck
}

type stuck struct {
	value float64
	set   bool
}

// Plant is the simulated works.
type Plant struct {
	opts     Options
	rng      *rand.Rand
	machines []*machine
	tags     []*Tag
}

// New builds the plant. fluids supplies the property models.
func New(opts Options, fluids FluidFunc) (*Plant, error) {
	if opts.Start.IsZero() {
		opts.Start = time.Now().UTC()
	}
	copies := max(opts.Copies, 1)
	p := &Plant{opts: opts, rng: rand.New(rand.NewPCG(uint64(opts.Seed), 0x9e3779b97f4a7c15))}
	for c := 0; c < copies; c++ {
		suffix, tagPrefix := "", "QM."
		if copies > 1 {
			suffix = fmt.Sprintf("-%03d", c+1)
			tagPrefix = fmt.Sprintf("QM%03d.", c+1)
		}
		for _, d := range designs {
			f, err := fluids(d.fluid, d.composition)
			if err != nil {
				return nil, fmt.Errorf("plantsim: machine %s: fluid %s: %w", d.id, d.fluid, err)
			}
			m := &machine{id: d.id + suffix, kind: d.kind, fluid: f, p1: d.p1, T1: d.T1, p2: d.p2, flow: d.flow,
				eta0: d.eta, degrades: d.degrades, genEff: d.genEff, mechLossW: d.mechLossW,
				coolFrac: d.coolFrac, motorEff: d.motorEff, wetExhaust: d.wetExhaust, tags: map[string]*Tag{}}
			if d.id == "gas-compressor" {
				m.stuck = &stuck{}
			}
			for _, t := range d.tags {
				tt := t
				tt.Name = tagPrefix + t.Name
				tt.Machine = m.id
				m.tags[tt.Quantity+"@"+tt.Port] = &tt
				p.tags = append(p.tags, &tt)
			}
			p.machines = append(p.machines, m)
		}
	}
	// Evaluate once at the design point so a broken fluid fails here.
	if _, err := p.Step(opts.Start); err != nil {
		return nil, err
	}
	return p, nil
}

// Tags lists every simulated sensor.
func (p *Plant) Tags() []Tag {
	out := make([]Tag, len(p.tags))
	for i, t := range p.tags {
		out[i] = *t
	}
	return out
}

// Machines lists the machine ids with their kind and fluid name.
func (p *Plant) Machines() [][3]string {
	var out [][3]string
	for _, m := range p.machines {
		out = append(out, [3]string{m.id, m.kind, m.fluid.Name()})
	}
	return out
}

// Load returns the plant load fraction (0..1] at elapsed time e.
func (p *Plant) Load(e time.Duration) float64 {
	o := p.opts
	if o.LoadChangeAfter <= 0 {
		return 1
	}
	ramp := o.LoadRamp.Seconds()
	if ramp <= 0 {
		ramp = 1
	}
	down := math.Min(math.Max((e-o.LoadChangeAfter).Seconds()/ramp, 0), 1)
	up := 0.0
	if o.LoadRestoreAfter > 0 {
		up = math.Min(math.Max((e-o.LoadRestoreAfter).Seconds()/ramp, 0), 1)
	}
	drop := o.LoadDrop
	if drop == 0 {
		drop = 0.3
	}
	return 1 - drop*down + drop*up
}

// TrueEfficiency is the simulated isentropic efficiency of machine m at
// elapsed time e (for tests and the demo's answer key).
func (p *Plant) TrueEfficiency(id string, e time.Duration) (float64, bool) {
	for _, m := range p.machines {
		if m.id == id {
			return p.eta(m, e), true
		}
	}
	return 0, false
}

func (p *Plant) eta(m *machine, e time.Duration) float64 {
	load := p.Load(e)
	// Part-load penalty, quadratic in the load deficit (common practice for
	// a plausible curve, no source).
	eta := m.eta0 - 0.05*(1-load)*(1-load)
	if m.degrades > 0 && p.opts.DegradeRate > 0 && e > p.opts.DegradeAfter {
		loss := m.degrades * p.opts.DegradeRate * (e - p.opts.DegradeAfter).Minutes()
		if p.opts.DegradeMax > 0 {
			loss = math.Min(loss, p.opts.DegradeMax)
		}
		eta -= loss
	}
	return math.Max(eta, 0.3)
}

// Step computes every tag's value at simulated time now.
func (p *Plant) Step(now time.Time) ([]Reading, error) {
	e := now.Sub(p.opts.Start)
	load := p.Load(e)
	var out []Reading
	for _, m := range p.machines {
		vals, err := p.machineValues(m, e, load)
		if err != nil {
			return nil, fmt.Errorf("plantsim: machine %s at %v: %w", m.id, e, err)
		}
		// Sorted keys: the noise stream must land on the same tags every
		// run for a given seed.
		for _, key := range slices.Sorted(maps.Keys(vals)) {
			v := vals[key]
			t, ok := m.tags[key]
			if !ok {
				continue
			}
			u, err := unitOf(t.Unit)
			if err != nil {
				return nil, err
			}
			val := u.FromSI(v)
			if !p.opts.Noiseless {
				val += t.Noise * p.rng.NormFloat64()
			}
			q := "good"
			// The stuck discharge thermocouple of the gas compressor.
			if m.kind == "compressor" && m.stuck != nil && key == "T@outlet" {
				if p.opts.StuckSensorAfter > 0 && e >= p.opts.StuckSensorAfter && e < p.opts.StuckSensorAfter+p.opts.StuckFor {
					if !m.stuck.set {
						m.stuck.value, m.stuck.set = val, true
					}
					val = m.stuck.value
				} else {
					m.stuck.set = false
				}
			}
			// Spikes on the feed-pump flow transmitter.
			if m.kind == "pump" && key == "flow@inlet" && p.opts.SpikeProbability > 0 && p.rng.Float64() < p.opts.SpikeProbability {
				val *= 1.6
			}
			out = append(out, Reading{Tag: t.Name, Time: now, Value: val, Quality: q})
		}
	}
	return out, nil
}

// machineValues returns the true SI values keyed "quantity@port".
func (p *Plant) machineValues(m *machine, e time.Duration, load float64) (map[string]float64, error) {
	eta := p.eta(m, e)
	flow := m.flow * load
	p1, T1, p2 := m.p1, m.T1, m.p2
	switch m.kind {
	case "turbine":
		// Outlet pressure follows flow (Stodola's cone law, simplified to a
		// proportion; common practice for a plausible simulation, no source).
		if !m.wetExhaust {
			p2 = m.p2 * load
		}
	case "compressor", "pump":
		// Discharge pressure held by the process; suction fixed.
	}
	in, err := m.fluid.Flash(thermo.PT, p1, T1)
	if err != nil {
		return nil, fmt.Errorf("inlet: %w", err)
	}
	iso, err := m.fluid.Flash(thermo.PS, p2, in.S)
	if err != nil {
		return nil, fmt.Errorf("isentropic outlet: %w", err)
	}
	vals := map[string]float64{"p@inlet": p1, "T@inlet": T1, "p@outlet": p2, "flow@inlet": flow}
	var h2 float64
	switch m.kind {
	case "turbine":
		h2 = in.H - eta*(in.H-iso.H)
		w := flow * (in.H - h2) // shaft power, W
		if m.genEff > 0 {
			vals["power@generator"] = m.genEff * (w - m.mechLossW)
		}
		vals["power@shaft"] = w
	default:
		wIdeal := iso.H - in.H
		wShaft := wIdeal / eta // specific shaft work, J/kg
		q := m.coolFrac * wShaft
		h2 = in.H + wShaft - q
		vals["power@shaft"] = flow * wShaft
		if m.motorEff > 0 {
			vals["power@motor"] = flow * wShaft / m.motorEff
		}
	}
	out, err := m.fluid.Flash(thermo.PH, p2, h2)
	if err != nil {
		return nil, fmt.Errorf("outlet: %w", err)
	}
	if out.Phase != thermo.PhaseTwoPhase {
		vals["T@outlet"] = out.T
	}
	return vals, nil
}
