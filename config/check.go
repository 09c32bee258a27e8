package config

import (
	"errors"
	"fmt"
	"net"
	"sort"
	"strings"
	"time"

	"github.com/exergywatch/exergywatch/compute/machine"
	"github.com/exergywatch/exergywatch/compute/uncert"
	"github.com/exergywatch/exergywatch/config/units"
	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/pipeline"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
	"github.com/exergywatch/exergywatch/thermo/fluids"
)

type checker struct {
	ps Problems
}

func (c *checker) add(item, msg, hint string) {
	c.ps = append(c.ps, &Problem{Item: item, Msg: msg, Hint: hint})
}

func (c *checker) addAt(v Value, item, msg, hint string) {
	c.ps = append(c.ps, &Problem{Item: item, Line: v.Line, Col: v.Col, Msg: msg, Hint: hint})
}

// FigureNames lists the derived figure names alert rules may watch.
func FigureNames() []string {
	var out []string
	for id := machine.FigureID(0); id < machine.NumFigures; id++ {
		out = append(out, id.RecordName())
	}
	return append(out, LostWorkCostFigure, DegradationPowerFigure, DegradationCostFigure)
}

// Series the daemon adds to the machine model's figures.
const (
	// LostWorkCostFigure is the cost of lost work, in the site's currency
	// per hour (present when site.energy_price_per_mwh is set).
	LostWorkCostFigure = "lost_work_cost_per_h"
	// DegradationPowerFigure is the power, W, the machine costs beyond its
	// baseline isentropic efficiency at the same duty (present when the
	// machine has a baseline for isentropic_efficiency; see compute/baseline).
	DegradationPowerFigure = "degradation_power_w"
	// DegradationCostFigure prices DegradationPowerFigure, currency per hour.
	DegradationCostFigure = "degradation_cost_per_h"
)

func reasonNames() []string {
	var out []string
	for r := ingest.Reason(1); int(r) < ingest.NumReasons; r++ {
		out = append(out, r.String())
	}
	return out
}

func contains(list []string, s string) bool {
	for _, v := range list {
		if v == s {
			return true
		}
	}
	return false
}

// check runs the cross-checks after decoding and defaults.
func (cfg *Config) check() Problems {
	c := &checker{}
	if strings.TrimSpace(cfg.Site.Name) == "" {
		c.add("site.name", "the site has no name", "set site.name; it tags every series")
	}
	if _, err := time.LoadLocation(cfg.Site.Timezone); err != nil {
		c.add("site.timezone", fmt.Sprintf("unknown time zone %q", cfg.Site.Timezone), "use an IANA name such as UTC or Europe/Oslo")
	}
	if !(cfg.Site.EnergyPrice >= 0) || !finite(cfg.Site.EnergyPrice) {
		c.add("site.energy_price_per_mwh", "must be a finite number >= 0", "")
	}
	if cfg.Evaluation.Interval.D() < 100*time.Millisecond {
		c.add("evaluation.interval", fmt.Sprintf("%v is too short", cfg.Evaluation.Interval.D()), "use at least 100ms; 5s is typical")
	}
	if t := cfg.Evaluation.Transient; t != "mark" && t != "withhold" {
		c.add("evaluation.transient", fmt.Sprintf("%q is not mark or withhold", t), "")
	}

	mapper, err := tagmap.Compile(cfg.TagMap)
	if err != nil {
		c.add("tag_map", err.Error(), "each tag needs machine, port, quantity and a unit of that quantity")
	}
	keys := cfg.Keys() // machine -> "quantity@port"
	_ = mapper

	cfg.checkSources(c)
	cfg.checkSinks(c)

	ids := map[string]bool{}
	for i := range cfg.Machines {
		m := &cfg.Machines[i]
		item := fmt.Sprintf("machines[%d]", i)
		if m.ID == "" {
			c.add(item+".id", "machine without id", "give every machine a unique id")
		} else if ids[m.ID] {
			c.add(item+".id", fmt.Sprintf("machine id %q used twice", m.ID), "ids must be unique")
		}
		ids[m.ID] = true
		cfg.checkMachine(c, m, item, keys[m.ID])
	}
	for mid := range keys {
		if mid != "" && !ids[mid] {
			c.add("tag_map.tags", fmt.Sprintf("tags refer to machine %q, which is not configured", mid), "add the machine or fix the tag's machine id")
		}
	}
	if cfg.Status.Listen != "off" {
		if _, _, err := net.SplitHostPort(cfg.Status.Listen); err != nil {
			c.add("status.listen", fmt.Sprintf("%q is not host:port", cfg.Status.Listen), "e.g. 127.0.0.1:9465, or off")
		}
	}
	return c.ps
}

func (cfg *Config) checkSources(c *checker) {
	names := map[string]bool{}
	for i, s := range cfg.Sources {
		item := fmt.Sprintf("sources[%d]", i)
		if names[s.Name] {
			c.add(item+".name", fmt.Sprintf("source name %q used twice", s.Name), "")
		}
		names[s.Name] = true
		switch s.Kind {
		case "nats":
			if s.NATS == nil || s.OPCUA != nil {
				c.add(item, "a nats source needs a nats: section and no other", "")
				continue
			}
			for _, f := range []struct{ n, v string }{{"password", s.NATS.Password}, {"token", s.NATS.Token}} {
				if f.v != "" && !isSecretRef(f.v) {
					c.add(item+".nats."+f.n, "secrets are not written in the file", "write env:VARIABLE_NAME or file:/path/to/secret")
				}
			}
			if len(s.NATS.Subjects) == 0 {
				c.add(item+".nats.subjects", "no subjects", "list the subjects carrying tag samples, e.g. plant.>")
			} else if err := s.NATS.Validate(); err != nil {
				c.add(item+".nats", err.Error(), "")
			} else if err := pipeline.CheckAckWait(*s.NATS, cfg.Evaluation.Interval.D()); err != nil {
				c.add(item+".nats.ack_wait", err.Error(), "raise ack_wait or shorten evaluation.interval")
			}
		case "opcua":
			if s.OPCUA == nil || s.NATS != nil {
				c.add(item, "an opcua source needs an opcua: section and no other", "")
				continue
			}
			if s.OPCUA.Password != "" && !isSecretRef(s.OPCUA.Password) {
				c.add(item+".opcua.password", "secrets are not written in the file", "write env:VARIABLE_NAME or file:/path/to/secret")
			}
			trustWrong := cfg.checkOPCUATrust(c, item+".opcua", s.OPCUA)
			if s.OPCUA.Endpoint == "" {
				c.add(item+".opcua.endpoint", "no endpoint", "e.g. opc.tcp://host:4840")
			} else if trustWrong {
				// reported with its position by checkOPCUATrust
			} else if err := s.OPCUA.Validate(); err != nil {
				c.add(item+".opcua", err.Error(), "")
			}
		default:
			c.add(item+".kind", fmt.Sprintf("unknown source kind %q", s.Kind), "use nats or opcua")
		}
	}
}

func (cfg *Config) checkSinks(c *checker) {
	names := map[string]bool{}
	for i := range cfg.Sinks {
		s := &cfg.Sinks[i]
		item := fmt.Sprintf("sinks[%d]", i)
		if names[s.Name] {
			c.add(item+".name", fmt.Sprintf("sink name %q used twice", s.Name), "give each sink its own name")
		}
		names[s.Name] = true
		n := 0
		for _, p := range []bool{s.InfluxDB != nil, s.NATS != nil, s.Store != nil} {
			if p {
				n++
			}
		}
		var err error
		switch s.Kind {
		case "influxdb":
			if s.InfluxDB == nil || n != 1 {
				c.add(item, "an influxdb sink needs an influxdb: section and no other", "")
				continue
			}
			s.InfluxDB.Defaults()
			err = s.InfluxDB.Validate()
		case "nats":
			if s.NATS == nil || n != 1 {
				c.add(item, "a nats sink needs a nats: section and no other", "")
				continue
			}
			s.NATS.Defaults()
			err = s.NATS.Validate()
		case "store":
			if s.Store == nil || n != 1 {
				c.add(item, "a store sink needs a store: section and no other", "")
				continue
			}
			s.Store.Defaults()
			err = s.Store.Validate()
		default:
			c.add(item+".kind", fmt.Sprintf("unknown sink kind %q", s.Kind), "use influxdb, nats or store")
			continue
		}
		cfg.checkSinkSecrets(c, item, s)
		if err != nil {
			cfg.addNode(c, item+"."+s.Kind, err.Error(), "")
		}
	}
	cfg.Fanout.Defaults()
	if err := cfg.Fanout.Validate(); err != nil {
		c.add("fanout", err.Error(), "")
	}
}

// FluidSpec returns the fluid specification of a machine.
func (m *Machine) FluidSpec() fluids.Spec {
	return fluids.Spec{Name: m.Fluid, Composition: m.Composition, ExcessAir: m.ExcessAir,
		RelativeHumidity: m.RelativeHumidity, AmbientT: m.AmbientTemperature.K, AmbientP: m.AmbientPressure.Pa}
}

var inletMethods = map[string]machine.StateMethod{"pT": machine.ByPT, "px": machine.ByPX, "ph": machine.ByPH}
var outletMethods = map[string]machine.StateMethod{"pT": machine.ByPT, "px": machine.ByPX, "energy_balance": machine.ByEnergyBalance}

// PowerKeys are the snapshot keys of measured power: shaft power at the
// coupling, electrical power at generator or motor terminals.
var (
	ShaftPowerKey       = "power@shaft"
	ElectricalPowerKeys = []string{"power@generator", "power@motor"}
	FlowKeys            = []string{"flow@inlet", "flow@outlet"}
)

func (cfg *Config) checkMachine(c *checker, m *Machine, item string, keys map[string]bool) {
	kind, err := machine.ParseKind(m.Kind)
	if err != nil {
		c.add(item+".kind", err.Error(), "use turbine, pump or compressor")
	}
	if _, err := fluids.FromSpec(m.FluidSpec()); err != nil {
		c.add(item+".fluid", err.Error(), "see `exergywatch props --fluid` for the names")
	}
	in, ok := inletMethods[m.Inlet]
	if !ok {
		c.add(item+".inlet", fmt.Sprintf("unknown inlet method %q", m.Inlet), "use pT, px or ph")
	}
	out, ok := outletMethods[m.Outlet]
	if !ok {
		c.add(item+".outlet", fmt.Sprintf("unknown outlet method %q", m.Outlet), "use pT, px or energy_balance")
	}
	need := func(key, why string) {
		if !keys[key] {
			q, port, _ := strings.Cut(key, "@")
			c.add(item, fmt.Sprintf("no tag gives %s at port %s, which %s needs", q, port, why),
				fmt.Sprintf("map a tag with machine: %s, port: %s, quantity: %s", m.ID, port, q))
		}
	}
	switch in {
	case machine.ByPT:
		need("p@inlet", "the pT inlet")
		need("T@inlet", "the pT inlet")
	case machine.ByPX:
		need("p@inlet", "the px inlet")
		need("x@inlet", "the px inlet")
	case machine.ByPH:
		need("p@inlet", "the ph inlet")
		need("h@inlet", "the ph inlet")
	}
	hasFlow := keys[FlowKeys[0]] || keys[FlowKeys[1]]
	hasShaft := keys[ShaftPowerKey]
	hasElec := keys[ElectricalPowerKeys[0]] || keys[ElectricalPowerKeys[1]]
	switch out {
	case machine.ByPT:
		need("p@outlet", "the pT outlet")
		need("T@outlet", "the pT outlet")
	case machine.ByPX:
		need("p@outlet", "the px outlet")
		need("x@outlet", "the px outlet")
	case machine.ByEnergyBalance:
		need("p@outlet", "the energy-balance outlet")
		if !hasFlow {
			c.add(item, "the energy-balance outlet needs a mass flow tag (flow@inlet)", "map the flow transmitter")
		}
		if !hasShaft && !hasElec {
			c.add(item, "the energy-balance outlet needs a power tag (power@shaft, power@generator or power@motor)", "map the power measurement")
		}
	}
	if m.WorkFromPower && (!hasFlow || (!hasShaft && !hasElec)) {
		c.add(item+".work_from_power", "the shaft-power basis needs mass flow and power tags", "")
	}
	if hasElec && !hasShaft && !(m.DriveEfficiency > 0 && m.DriveEfficiency <= 1) {
		c.add(item+".drive_efficiency", "an electrical power tag needs the generator or motor efficiency (0..1]", "set drive_efficiency, e.g. 0.985")
	}
	if (kind == machine.Compressor || kind == machine.Pump) && keys["p@inlet"] && keys["p@outlet"] {
		cfg.checkPressureOrder(c, m, item)
	}
	for _, v := range []struct {
		name string
		v    Value
		k    units.Kind
	}{{"mechanical_loss", m.MechanicalLoss, units.Power}, {"heat_flow", m.HeatFlow, units.Power},
		{"saturation_margin", m.SaturationMargin, units.TemperatureDelta}, {"efficiency_u95_limit", m.EfficiencyU95Limit, units.Fraction}} {
		if v.v.IsSet() {
			if x, err := v.v.SI(v.k); err != nil {
				c.addAt(v.v, item+"."+v.name, err.Error(), "")
			} else if x < 0 {
				c.addAt(v.v, item+"."+v.name, "must not be negative", "")
			}
		}
	}
	if _, err := m.UncertaintySpec(); err != nil {
		c.add(item+".uncertainty", err.Error(), "write a standard uncertainty such as 0.5K or 0.1%, or a class such as rtd-A or tc-K-1")
	}
	for j, r := range m.Running {
		ri := fmt.Sprintf("%s.running[%d]", item, j)
		if !keys[r.Signal] {
			c.add(ri+".signal", fmt.Sprintf("signal %q is not mapped for this machine", r.Signal), "use quantity@port of a mapped tag, e.g. flow@inlet")
			continue
		}
		if _, _, err := r.Limits(); err != nil {
			c.add(ri, err.Error(), "")
		}
	}
	sc := m.Steady.SteadyConfig()
	if err := sc.Validate(); err != nil {
		c.add(item+".steady", err.Error(), "")
	}
	for _, s := range m.Steady.Signals {
		if !keys[s] {
			c.add(item+".steady.signals", fmt.Sprintf("signal %q is not mapped for this machine", s), "use quantity@port of a mapped tag")
		}
	}
	names := map[string]bool{}
	figs := FigureNames()
	for j, a := range m.Alerts {
		ai := fmt.Sprintf("%s.alerts[%d]", item, j)
		if a.Name == "" || names[a.Name] {
			c.add(ai+".name", "alert rules need a unique name per machine", "")
		}
		names[a.Name] = true
		switch a.Class {
		case "performance":
			if !contains(figs, a.Figure) {
				c.add(ai+".figure", fmt.Sprintf("unknown figure %q", a.Figure), "one of: "+strings.Join(figs, ", "))
			}
		case "data_quality":
			if !contains(reasonNames(), a.Figure) {
				c.add(ai+".figure", fmt.Sprintf("unknown input reason %q", a.Figure), "one of: "+strings.Join(reasonNames(), ", "))
			}
		default:
			c.add(ai+".class", fmt.Sprintf("unknown class %q", a.Class), "use performance or data_quality")
		}
		if (a.Below == nil) == (a.Above == nil) {
			c.add(ai, "give exactly one of below or above", "")
		}
		switch a.Kind {
		case "threshold":
		case "deviation":
			if _, ok := m.Baseline[a.Figure]; !ok {
				c.add(ai+".kind", fmt.Sprintf("a deviation rule needs a baseline for %s", a.Figure), fmt.Sprintf("add baseline: {%s: <expected value>}", a.Figure))
			}
		case "rate":
			if a.RateWindow <= 0 {
				c.add(ai+".rate_window", "a rate rule needs a rate window", "e.g. rate_window: 1h")
			}
		default:
			c.add(ai+".kind", fmt.Sprintf("unknown kind %q", a.Kind), "use threshold, deviation or rate")
		}
		if a.Hysteresis < 0 || !finite(a.Hysteresis) {
			c.add(ai+".hysteresis", "must be >= 0", "")
		}
	}
	for f, v := range m.Baseline {
		if !contains(figs, f) {
			c.add(item+".baseline", fmt.Sprintf("unknown figure %q", f), "one of: "+strings.Join(figs, ", "))
		}
		if !finite(v) {
			c.add(item+".baseline."+f, "must be finite", "")
		}
	}
}

// checkPressureOrder refuses a compressor or pump whose configured outlet
// pressure range lies wholly below its inlet range (swapped tags).
func (cfg *Config) checkPressureOrder(c *checker, m *Machine, item string) {
	var inMin, outMax float64
	var inSet, outSet bool
	for _, t := range cfg.TagMap.Tags {
		if t.Machine != m.ID || t.Quantity != "p" || t.Range == nil {
			continue
		}
		switch t.Port {
		case "inlet":
			if v, err := units.Parse(t.Range.Min, units.Pressure); err == nil {
				inMin, inSet = v, true
			}
		case "outlet":
			if v, err := units.Parse(t.Range.Max, units.Pressure); err == nil {
				outMax, outSet = v, true
			}
		}
	}
	if inSet && outSet && outMax <= inMin {
		c.add(item, fmt.Sprintf("outlet pressure range (max %g Pa) lies at or below the inlet range (min %g Pa) of a %s", outMax, inMin, m.Kind),
			"the outlet of a compressor or pump is above its inlet: check that the tags are not swapped")
	}
}

// Limits returns the SI limits of a running condition (below 0: none).
func (r Condition) Limits() (above, below float64, err error) {
	q, _, _ := strings.Cut(r.Signal, "@")
	qty, err := tagmap.LookupQuantity(q)
	if err != nil {
		return 0, 0, err
	}
	if r.Above.IsSet() {
		if above, err = r.Above.SI(qty.Kind); err != nil {
			return 0, 0, fmt.Errorf("above: %w", err)
		}
	}
	if r.Below.IsSet() {
		if below, err = r.Below.SI(qty.Kind); err != nil {
			return 0, 0, fmt.Errorf("below: %w", err)
		}
	}
	if !r.Above.IsSet() && !r.Below.IsSet() {
		return 0, 0, errors.New("a running condition needs above or below")
	}
	return above, below, nil
}

func parseStd(v Value, k units.Kind) (machine.Std, error) {
	if !v.IsSet() {
		return machine.Std{}, nil
	}
	t := strings.TrimSpace(v.Text)
	if strings.HasSuffix(t, "%") {
		x, _, err := units.Split(strings.TrimSuffix(t, "%"))
		if err != nil || x < 0 {
			return machine.Std{}, fmt.Errorf("%q is not a relative uncertainty", t)
		}
		return machine.Std{Rel: x / 100}, nil
	}
	x, err := units.Parse(t, k)
	if err != nil {
		return machine.Std{}, err
	}
	if x < 0 {
		return machine.Std{}, fmt.Errorf("%q is negative", t)
	}
	return machine.Std{Abs: x}, nil
}

// UncertaintySpec converts the configured uncertainties.
func (m *Machine) UncertaintySpec() (machine.Uncertainty, error) {
	var u machine.Uncertainty
	var err error
	set := func(dst *machine.Std, v Value, k units.Kind, name string) {
		if err != nil {
			return
		}
		var s machine.Std
		if s, err = parseStd(v, k); err != nil {
			err = fmt.Errorf("%s: %w", name, err)
			return
		}
		*dst = s
	}
	set(&u.P1, m.Uncertainty.PInlet, units.Pressure, "p_inlet")
	set(&u.P2, m.Uncertainty.POutlet, units.Pressure, "p_outlet")
	set(&u.T1, m.Uncertainty.TInlet, units.TemperatureDelta, "T_inlet")
	set(&u.T2, m.Uncertainty.TOutlet, units.TemperatureDelta, "T_outlet")
	set(&u.MassFlow, m.Uncertainty.Flow, units.MassFlow, "flow")
	set(&u.Power, m.Uncertainty.Power, units.Power, "power")
	if err != nil {
		return u, err
	}
	if m.Uncertainty.TInletClass != "" {
		if u.T1Class, err = uncert.ParseTempClass(m.Uncertainty.TInletClass); err != nil {
			return u, fmt.Errorf("T_inlet_class: %w", err)
		}
	}
	if m.Uncertainty.TOutletClass != "" {
		if u.T2Class, err = uncert.ParseTempClass(m.Uncertainty.TOutletClass); err != nil {
			return u, fmt.Errorf("T_outlet_class: %w", err)
		}
	}
	for _, c := range []float64{m.Uncertainty.CorrT, m.Uncertainty.CorrP} {
		if !(c >= -1 && c <= 1) {
			return u, fmt.Errorf("correlations must be in [-1, 1], got %g", c)
		}
	}
	u.CorrT, u.CorrP = m.Uncertainty.CorrT, m.Uncertainty.CorrP
	return u, nil
}

// Spec builds the compute/machine specification. keys are the mapped
// signals of the machine (quantity@port).
func (m *Machine) Spec(site Site, keys map[string]bool) (*machine.Spec, error) {
	kind, err := machine.ParseKind(m.Kind)
	if err != nil {
		return nil, err
	}
	fl, err := fluids.FromSpec(m.FluidSpec())
	if err != nil {
		return nil, err
	}
	u, err := m.UncertaintySpec()
	if err != nil {
		return nil, err
	}
	s := &machine.Spec{Kind: kind, Fluid: fl, Inlet: inletMethods[m.Inlet], Outlet: outletMethods[m.Outlet],
		WorkFromPower: m.WorkFromPower, DriveEfficiency: m.DriveEfficiency, T0: site.DeadStateTemperature.K,
		HeatRejectionT: m.HeatRejectionTemperature.K, Uncertainty: u}
	switch {
	case keys[ShaftPowerKey]:
		s.Power = machine.ShaftPower
	case keys[ElectricalPowerKeys[0]] || keys[ElectricalPowerKeys[1]]:
		s.Power = machine.ElectricalPower
	}
	if m.MechanicalLoss.IsSet() {
		if s.MechanicalLoss, err = m.MechanicalLoss.SI(units.Power); err != nil {
			return nil, err
		}
	}
	if m.SaturationMargin.IsSet() {
		if s.SaturationMargin, err = m.SaturationMargin.SI(units.TemperatureDelta); err != nil {
			return nil, err
		}
	}
	if m.EfficiencyU95Limit.IsSet() {
		if s.EfficiencyU95Limit, err = m.EfficiencyU95Limit.SI(units.Fraction); err != nil {
			return nil, err
		}
	}
	return s, nil
}

// HeatFlowW returns the declared heat flow, W (0 when none).
func (m *Machine) HeatFlowW() float64 {
	if !m.HeatFlow.IsSet() {
		return 0
	}
	v, _ := m.HeatFlow.SI(units.Power)
	return v
}

// Keys returns the mapped signals (quantity@port) of each machine.
func (cfg *Config) Keys() map[string]map[string]bool {
	keys := map[string]map[string]bool{}
	add := func(mid, k string) {
		if keys[mid] == nil {
			keys[mid] = map[string]bool{}
		}
		keys[mid][k] = true
	}
	for _, t := range cfg.TagMap.Tags {
		add(t.Machine, t.Quantity+"@"+t.Port)
	}
	return keys
}

// SteadySignals returns the key signals of steady-state detection: the
// configured ones, or p@inlet, p@outlet and flow@inlet where mapped.
func (m *Machine) SteadySignals(keys map[string]bool) []string {
	if len(m.Steady.Signals) > 0 {
		return m.Steady.Signals
	}
	var out []string
	for _, k := range []string{"p@inlet", "p@outlet", "flow@inlet", "T@inlet"} {
		if keys[k] {
			out = append(out, k)
		}
	}
	sort.Strings(out)
	return out
}
