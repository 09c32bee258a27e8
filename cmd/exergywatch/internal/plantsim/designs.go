package plantsim

import (
	"github.com/exergywatch/exergywatch/config/units"
)

// BarometerPa is the site barometric pressure the simulated gauge
// transmitters are referred to (standard atmosphere; the demo config
// declares the same value).
const BarometerPa = 101325.0

// NaturalGas is the invented pipeline-gas composition of the demo (mole
// fractions).
var NaturalGas = map[string]float64{"CH4": 0.90, "C2H6": 0.05, "C3H8": 0.01, "N2": 0.02, "CO2": 0.02}

type design struct {
	id, kind, fluid   string
	composition       map[string]float64
	p1, T1, p2, flow  float64 // Pa, K, Pa, kg/s at full load
	eta               float64
	degrades          float64
	genEff, mechLossW float64
	coolFrac          float64
	motorEff          float64
	wetExhaust        bool
	tags              []Tag
}

// designs is the Quillmoor demonstration works (invented). Tag names follow
// the ISA-5.1 letter convention (PT pressure, TT temperature, FT flow,
// JT power), numbered our own way.
var designs = []design{
	{
		id: "hp-turbine", kind: "turbine", fluid: "water",
		p1: 16e6, T1: 811.15, p2: 4e6, flow: 250, eta: 0.86, degrades: 0.1,
		tags: []Tag{
			{Name: "HP1.PT101", Port: "inlet", Quantity: "p", Unit: "MPa", Noise: 0.01},
			{Name: "HP1.TT101", Port: "inlet", Quantity: "T", Unit: "degC", Noise: 0.3},
			{Name: "HP1.PT102", Port: "outlet", Quantity: "p", Unit: "MPa", Noise: 0.004},
			{Name: "HP1.TT102", Port: "outlet", Quantity: "T", Unit: "degC", Noise: 0.3},
			{Name: "HP1.FT101", Port: "inlet", Quantity: "flow", Unit: "t/h", Noise: 2.0},
		},
	},
	{
		id: "lp-turbine", kind: "turbine", fluid: "water", wetExhaust: true,
		p1: 0.5e6, T1: 573.15, p2: 7e3, flow: 200, eta: 0.88, genEff: 0.985, mechLossW: 0.6e6,
		tags: []Tag{
			{Name: "LP1.PT201", Port: "inlet", Quantity: "p", Unit: "kPa", Noise: 0.5},
			{Name: "LP1.TT201", Port: "inlet", Quantity: "T", Unit: "degC", Noise: 0.3},
			{Name: "LP1.PT202", Port: "outlet", Quantity: "p", Unit: "kPa", Noise: 0.02},
			{Name: "LP1.FT201", Port: "inlet", Quantity: "flow", Unit: "kg/s", Noise: 0.5},
			{Name: "LP1.JT201", Port: "generator", Quantity: "power", Unit: "MW", Noise: 0.1},
		},
	},
	{
		id: "feed-pump", kind: "pump", fluid: "water",
		p1: 1.0e6, T1: 438.15, p2: 18e6, flow: 250, eta: 0.80, motorEff: 0.965,
		tags: []Tag{
			{Name: "FP1.PT301", Port: "inlet", Quantity: "p", Unit: "bar", Noise: 0.02},
			{Name: "FP1.TT301", Port: "inlet", Quantity: "T", Unit: "degC", Noise: 0.05},
			{Name: "FP1.PT302", Port: "outlet", Quantity: "p", Unit: "MPa", Noise: 0.01},
			{Name: "FP1.TT302", Port: "outlet", Quantity: "T", Unit: "degC", Noise: 0.05},
			{Name: "FP1.FT301", Port: "inlet", Quantity: "flow", Unit: "t/h", Noise: 2.0},
			{Name: "FP1.JT301", Port: "motor", Quantity: "power", Unit: "MW", Noise: 0.02},
		},
	},
	{
		id: "air-compressor", kind: "compressor", fluid: "air",
		p1: 99e3, T1: 288.15, p2: 0.8e6, flow: 50, eta: 0.84, degrades: 1, motorEff: 0.97,
		tags: []Tag{
			{Name: "AC1.PT401", Port: "inlet", Quantity: "p", Unit: "kPa", Noise: 0.05},
			{Name: "AC1.TT401", Port: "inlet", Quantity: "T", Unit: "degC", Noise: 0.2},
			{Name: "AC1.PT402", Port: "outlet", Quantity: "p", Unit: "barg", Noise: 0.005},
			{Name: "AC1.TT402", Port: "outlet", Quantity: "T", Unit: "degC", Noise: 0.3},
			{Name: "AC1.FT401", Port: "inlet", Quantity: "flow", Unit: "kg/s", Noise: 0.1},
			{Name: "AC1.JT401", Port: "motor", Quantity: "power", Unit: "kW", Noise: 20},
		},
	},
	{
		id: "gas-compressor", kind: "compressor", fluid: "natural-gas", composition: NaturalGas,
		p1: 4e6, T1: 293.15, p2: 7e6, flow: 40, eta: 0.78,
		tags: []Tag{
			{Name: "GC1.PT501", Port: "inlet", Quantity: "p", Unit: "MPa", Noise: 0.003},
			{Name: "GC1.TT501", Port: "inlet", Quantity: "T", Unit: "degC", Noise: 0.2},
			{Name: "GC1.PT502", Port: "outlet", Quantity: "p", Unit: "MPa", Noise: 0.005},
			{Name: "GC1.TT502", Port: "outlet", Quantity: "T", Unit: "degC", Noise: 0.3},
			{Name: "GC1.FT501", Port: "inlet", Quantity: "flow", Unit: "kg/s", Noise: 0.1},
			{Name: "GC1.JT501", Port: "shaft", Quantity: "power", Unit: "kW", Noise: 10},
		},
	},
	{
		id: "nh3-compressor", kind: "compressor", fluid: "ammonia",
		p1: 0.19e6, T1: 261.15, p2: 1.2e6, flow: 2, eta: 0.75, coolFrac: 0.25,
		tags: []Tag{
			{Name: "RC1.PT601", Port: "inlet", Quantity: "p", Unit: "kPa", Noise: 0.3},
			{Name: "RC1.TT601", Port: "inlet", Quantity: "T", Unit: "degC", Noise: 0.2},
			{Name: "RC1.PT602", Port: "outlet", Quantity: "p", Unit: "kPa", Noise: 1.0},
			{Name: "RC1.TT602", Port: "outlet", Quantity: "T", Unit: "degC", Noise: 0.3},
			{Name: "RC1.FT601", Port: "inlet", Quantity: "flow", Unit: "kg/h", Noise: 20},
			{Name: "RC1.JT601", Port: "shaft", Quantity: "power", Unit: "kW", Noise: 1},
		},
	},
}

// unitOf returns the conversion for a published unit; gauge units are
// referred to BarometerPa.
func unitOf(name string) (units.Unit, error) {
	u, err := units.Lookup(name)
	if err != nil {
		return u, err
	}
	if u.Gauge {
		u.Offset = BarometerPa
		u.Gauge = false
	}
	return u, nil
}
