package main

import (
	"encoding/json"
	"fmt"
	"math"
	"slices"
	"sort"
	"time"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/compute/alert"
	"github.com/exergywatch/exergywatch/compute/baseline"
	"github.com/exergywatch/exergywatch/compute/machine"
	"github.com/exergywatch/exergywatch/compute/mode"
	"github.com/exergywatch/exergywatch/compute/steady"
	"github.com/exergywatch/exergywatch/compute/trend"
	"github.com/exergywatch/exergywatch/config"
	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/align"
)

// Reason codes the evaluator adds to records.
const (
	reasonNotRunning = "not_running"
	reasonStarting   = "starting"
	reasonTransient  = "transient"
	reasonWithheld   = "withheld_transient"
)

// evaluator turns the snapshots of one machine into records and alert
// events: operating mode, steady-state gating, the machine model, cost,
// alert rules and trends. It is used by one goroutine at a time.
type evaluator struct {
	id, site  string
	kind      machine.Kind
	spec      *machine.Spec
	heatFlowW float64
	withhold  bool
	price     float64 // money per MWh of lost work; 0: no cost series
	baseline  map[string]float64

	mode   mode.Detector
	steady *steady.Detector
	// sens carries the uncertainty sensitivities of the machine model from
	// tick to tick (machine.EvaluateWith); a new evaluator (start, reload)
	// starts without, and a stop forgets them.
	sens machine.Sensitivities
	// sensAge is the last evaluation's Result.SensitivityAge (0: fresh
	// sensitivities; n: reused from n evaluations back), -1 when the last
	// tick did not evaluate the model (for /status).
	sensAge int
	signals []string
	rules   []*alert.Machine
	trends  map[string]*trend.EWMA
	tau     time.Duration
	daily   *trend.Daily

	// status view
	last       compute.Record
	lastMode   mode.Mode
	modeWhy    string // why the machine is not running, for people
	lastSteady bool
	lastR      map[string]float64
	lastGood   compute.Record
	hasGood    bool
	inputs     map[string]float64
	// pendingDaily holds completed daily aggregates not yet written.
	pendingDaily []compute.Record
	inputWhy     map[string]string
}

func newEvaluator(cfg *config.Config, m *config.Machine, keys map[string]bool) (*evaluator, error) {
	spec, err := m.Spec(cfg.Site, keys)
	if err != nil {
		return nil, fmt.Errorf("machine %s: %w", m.ID, err)
	}
	e := &evaluator{id: m.ID, site: cfg.Site.Name, kind: spec.Kind, spec: spec, heatFlowW: m.HeatFlowW(),
		withhold: cfg.Evaluation.Transient == "withhold", price: cfg.Site.EnergyPrice, baseline: m.Baseline,
		trends: map[string]*trend.EWMA{}, tau: cfg.Evaluation.TrendTimeConstant.D(), sensAge: -1}
	for _, c := range m.Running {
		above, below, err := c.Limits()
		if err != nil {
			return nil, fmt.Errorf("machine %s: running condition %s: %w", m.ID, c.Signal, err)
		}
		e.mode.Conditions = append(e.mode.Conditions, mode.Condition{Signal: c.Signal, Above: above, Below: below})
	}
	e.mode.StartupTime = m.StartupTime.D()
	e.signals = m.SteadySignals(keys)
	if len(e.signals) > 0 {
		if e.steady, err = steady.NewDetector(m.Steady.SteadyConfig(), e.signals); err != nil {
			return nil, fmt.Errorf("machine %s: %w", m.ID, err)
		}
	}
	for _, a := range m.Alerts {
		r := alert.Rule{Name: a.Name, Machine: m.ID, Class: compute.AlertClass(a.Class), Figure: a.Figure,
			Kind: alert.Kind(a.Kind), Hysteresis: a.Hysteresis, RateWindow: a.RateWindow.D(),
			PendingFor: a.PendingFor.D(), ClearFor: a.ClearFor.D(), Advice: a.Advice, Baseline: m.Baseline[a.Figure]}
		if a.Below != nil {
			r.Below, r.Limit = true, *a.Below
		} else if a.Above != nil {
			r.Limit = *a.Above
		}
		am, err := alert.New(cfg.Site.Name, r)
		if err != nil {
			return nil, fmt.Errorf("machine %s: %w", m.ID, err)
		}
		e.rules = append(e.rules, am)
	}
	if e.daily, err = trend.NewDaily(cfg.Site.Timezone); err != nil {
		return nil, err
	}
	return e, nil
}

// inputs maps a snapshot onto the model inputs. Bad values are left out
// (the model then fails with a clear reason); uncertain and stale values
// are named so the result is at best uncertain.
func (e *evaluator) inputsFrom(s *align.Snapshot) (machine.Inputs, map[string]float64, map[string]ingest.Reasons) {
	var in machine.Inputs
	vals := map[string]float64{}
	reasons := map[string]ingest.Reasons{}
	e.inputWhy = map[string]string{}
	for k, v := range s.Values {
		key := k.Quantity + "@" + k.Port
		reasons[key] = v.Reasons
		if v.Quality == ingest.Bad || math.IsNaN(v.SI) || math.IsInf(v.SI, 0) {
			e.inputWhy[key] = "bad: " + v.Reasons.String()
			continue
		}
		vals[key] = v.SI
		if v.Quality == ingest.Uncertain || v.Reasons != 0 {
			e.inputWhy[key] = v.Reasons.String()
		}
	}
	name := map[string]string{"p@inlet": "p1", "T@inlet": "T1", "h@inlet": "h1", "x@inlet": "x1",
		"p@outlet": "p2", "T@outlet": "T2", "x@outlet": "x2", "flow@inlet": "flow", "flow@outlet": "flow",
		"power@shaft": "power", "power@generator": "power", "power@motor": "power"}
	set := func(key string, dst *float64) {
		if v, ok := vals[key]; ok {
			*dst = v
			if r := reasons[key]; r.Has(ingest.ReasonStale) {
				in.Stale = append(in.Stale, name[key])
			} else if why := e.inputWhy[key]; why != "" {
				in.Doubtful = append(in.Doubtful, name[key])
			}
		}
	}
	set("p@inlet", &in.P1)
	set("T@inlet", &in.T1)
	set("h@inlet", &in.H1)
	set("x@inlet", &in.X1)
	set("p@outlet", &in.P2)
	set("T@outlet", &in.T2)
	set("x@outlet", &in.X2)
	set("flow@outlet", &in.MassFlow)
	set("flow@inlet", &in.MassFlow)
	set("power@shaft", &in.ShaftPower)
	set("power@generator", &in.ElectricalPower)
	set("power@motor", &in.ElectricalPower)
	in.HeatFlow = e.heatFlowW
	slices.Sort(in.Stale)
	in.Stale = slices.Compact(in.Stale)
	slices.Sort(in.Doubtful)
	in.Doubtful = slices.Compact(in.Doubtful)
	return in, vals, reasons
}

// evaluate runs one tick.
func (e *evaluator) evaluate(s *align.Snapshot) (compute.Record, []compute.Event) {
	now := s.At
	in, vals, reasons := e.inputsFrom(s)
	e.inputs = vals

	md, why := e.mode.Update(now, vals)
	e.lastMode, e.modeWhy = md, why
	steadyNow := false
	if e.steady != nil {
		sv := map[string]float64{}
		for _, k := range e.signals {
			if v, ok := vals[k]; ok {
				sv[k] = v
			}
		}
		if md == mode.Running {
			v := e.steady.Update(now, sv)
			steadyNow, e.lastR = v.Steady, v.R
		} else {
			// A verdict must not outlive a stop: after a restart at a new
			// load the machine proves steady state afresh.
			e.steady.Reset()
			e.lastR = nil
		}
	} else {
		steadyNow = md == mode.Running
	}
	e.lastSteady = steadyNow

	var rec compute.Record
	if md != mode.Running {
		e.sens.Reset()
		code := reasonNotRunning
		if md == mode.Starting {
			code = reasonStarting
		}
		rec = compute.Record{Time: now.UTC(), Site: e.site, Machine: e.id, MachineKind: e.kind.String(),
			Quality: compute.QualityBad, Reasons: []string{code}}
	} else {
		res, err := machine.EvaluateWith(e.spec, &in, &e.sens)
		e.sensAge = -1
		if err != nil {
			rec = machine.BadRecord(now, e.site, e.id, e.kind, err)
		} else {
			e.sensAge = res.SensitivityAge
			rec = res.Record(now, e.site, e.id)
			e.addDegradation(&rec)
			e.addCost(&rec)
		}
		if !steadyNow && rec.Quality != compute.QualityBad {
			rec.Reasons = append(rec.Reasons, reasonTransient)
			rec.Quality = compute.Worse(rec.Quality, compute.QualityTransient)
			for i := range rec.Figures {
				f := &rec.Figures[i]
				if f.Quality != compute.QualityBad {
					f.Quality = compute.Worse(f.Quality, compute.QualityTransient)
				}
			}
			if e.withhold {
				rec.Reasons = append(rec.Reasons, reasonWithheld)
				rec.Figures = nil
			}
		}
	}
	// Input doubts travel with the record (as reason codes "input:<key>:<reason>").
	var inKeys []string
	for k := range reasons {
		inKeys = append(inKeys, k)
	}
	sort.Strings(inKeys)
	for _, k := range inKeys {
		for _, r := range reasons[k].List() {
			rec.Reasons = append(rec.Reasons, "input:"+k+":"+r.String())
		}
	}

	events := e.observeAlerts(now, &rec, reasons)
	e.updateTrends(now, &rec, steadyNow)
	e.last = rec
	if rec.Quality == compute.QualityGood || rec.Quality == compute.QualityUncertain {
		e.lastGood, e.hasGood = rec, true
	}
	return rec, events
}

// addDegradation adds the power the machine costs beyond its baseline
// isentropic efficiency (compute/baseline), and its price.
func (e *evaluator) addDegradation(rec *compute.Record) {
	base, ok := e.baseline[machine.IsentropicEfficiency.RecordName()]
	if !ok {
		return
	}
	var eta, pw *compute.Figure
	for i := range rec.Figures {
		switch rec.Figures[i].Name {
		case machine.IsentropicEfficiency.RecordName():
			eta = &rec.Figures[i]
		case machine.Power.RecordName():
			pw = &rec.Figures[i]
		}
	}
	if eta == nil || pw == nil {
		return
	}
	q := compute.Worse(eta.Quality, pw.Quality)
	reasons := append(append([]string(nil), eta.Reasons...), pw.Reasons...)
	f := compute.Figure{Name: config.DegradationPowerFigure, Quality: q, Reasons: reasons, Value: math.NaN()}
	if q != compute.QualityBad {
		dp, u, err := baseline.DegradationPower(baseline.Expansion(e.kind == machine.Turbine), eta.Value, eta.U95, math.Abs(pw.Value), pw.U95, base)
		if err != nil {
			f.Quality, f.Reasons = compute.QualityBad, append(f.Reasons, "degradation_not_computable")
		} else {
			f.Value, f.U95, f.HasU95 = dp, u, eta.HasU95
		}
	}
	rec.Figures = append(rec.Figures, f)
	if e.price > 0 {
		c := compute.Figure{Name: config.DegradationCostFigure, Quality: f.Quality, Reasons: f.Reasons, Value: math.NaN()}
		if f.Quality != compute.QualityBad {
			c.Value, c.U95, c.HasU95 = f.Value/1e6*e.price, f.U95/1e6*e.price, f.HasU95
		}
		rec.Figures = append(rec.Figures, c)
	}
}

func (e *evaluator) addCost(rec *compute.Record) {
	if e.price <= 0 {
		return
	}
	for _, f := range rec.Figures {
		if f.Name != machine.LostWorkRate.RecordName() {
			continue
		}
		c := compute.Figure{Name: config.LostWorkCostFigure, Quality: f.Quality, Reasons: f.Reasons}
		if f.Quality == compute.QualityBad {
			c.Value = math.NaN()
		} else {
			// W -> MW, times money per MWh, gives money per hour.
			c.Value = f.Value / 1e6 * e.price
			if f.HasU95 {
				c.U95, c.HasU95 = f.U95/1e6*e.price, true
			}
		}
		rec.Figures = append(rec.Figures, c)
		return
	}
}

func (e *evaluator) observeAlerts(now time.Time, rec *compute.Record, reasons map[string]ingest.Reasons) []compute.Event {
	var out []compute.Event
	for _, r := range e.rules {
		var ev *compute.Event
		var err error
		if r.Rule.Class == compute.AlertDataQuality {
			v := 0.0
			for _, rs := range reasons {
				for _, x := range rs.List() {
					if x.String() == r.Rule.Figure {
						v = 1
					}
				}
			}
			ev, err = r.Observe(now, v, 0, compute.QualityGood)
		} else {
			for _, f := range rec.Figures {
				if f.Name == r.Rule.Figure {
					ev, err = r.Observe(now, f.Value, f.U95, f.Quality)
					break
				}
			}
		}
		if err == nil && ev != nil {
			out = append(out, *ev)
		}
	}
	return out
}

func (e *evaluator) updateTrends(now time.Time, rec *compute.Record, steadyNow bool) {
	updated := map[string]compute.Quality{}
	for _, f := range rec.Figures {
		if f.Quality != compute.QualityGood && f.Quality != compute.QualityUncertain {
			continue
		}
		t := e.trends[f.Name]
		if t == nil {
			t = &trend.EWMA{Tau: e.tau}
			e.trends[f.Name] = t
		}
		if t.Add(now, f.Value) == nil {
			updated[f.Name] = f.Quality
		}
	}
	// The trend lines of the key figures travel with the records that
	// update them (good or uncertain values only; transient and bad ones
	// neither move nor carry the trend), with the quality of that value.
	for _, name := range trendFigures {
		if q, ok := updated[name]; ok {
			rec.Figures = append(rec.Figures, compute.Figure{Name: name + trendSuffix, Value: e.trends[name].Value, Quality: q})
		}
	}
	name := machine.IsentropicEfficiency.RecordName()
	eta, ok := figureValue(rec, name)
	days, err := e.daily.Add(now, eta, ok && steadyNow)
	if err != nil {
		return
	}
	for _, d := range days {
		e.pendingDaily = append(e.pendingDaily, e.dailyRecord(d))
	}
}

// trendFigures are the figures whose EWMA trend line is written with every
// record, as "<name>_trend".
var trendFigures = []string{
	machine.IsentropicEfficiency.RecordName(),
	machine.EntropyGenerationRate.RecordName(),
	machine.LostWorkRate.RecordName(),
	config.DegradationPowerFigure,
}

const trendSuffix = "_trend"

// Daily aggregate series names.
const (
	dailySuffixMean   = "_daily_mean"
	dailySuffixMedian = "_daily_median"
	dailySuffixMin    = "_daily_min"
	dailySuffixMax    = "_daily_max"
	dailyCoverage     = "steady_coverage_daily"
	reasonDaily       = "daily_aggregate"
)

// dailyRecord is the record of one completed local day: statistics of the
// steady isentropic efficiency and the share of the day the machine was
// running and steady. Its time is the end of the day.
func (e *evaluator) dailyRecord(d trend.Day) compute.Record {
	name := machine.IsentropicEfficiency.RecordName()
	rec := compute.Record{Time: d.End.UTC(), Site: e.site, Machine: e.id, MachineKind: e.kind.String(),
		Quality: compute.QualityGood, Reasons: []string{reasonDaily}}
	rec.Figures = append(rec.Figures, compute.Figure{Name: dailyCoverage, Value: d.SteadyCoverage, Quality: compute.QualityGood})
	if d.N == 0 {
		return rec
	}
	for _, f := range []struct {
		suffix string
		v      float64
	}{{dailySuffixMean, d.Mean}, {dailySuffixMedian, d.Median}, {dailySuffixMin, d.Min}, {dailySuffixMax, d.Max}} {
		rec.Figures = append(rec.Figures, compute.Figure{Name: name + f.suffix, Value: f.v, Quality: compute.QualityGood})
	}
	return rec
}

// takeDaily returns and clears the daily records completed so far.
func (e *evaluator) takeDaily() []compute.Record {
	out := e.pendingDaily
	e.pendingDaily = nil
	return out
}

func figureValue(rec *compute.Record, name string) (float64, bool) {
	for _, f := range rec.Figures {
		if f.Name == name && (f.Quality == compute.QualityGood || f.Quality == compute.QualityUncertain) {
			return f.Value, true
		}
	}
	return 0, false
}

// persisted is what survives a restart.
type persisted struct {
	Mode     mode.State                    `json:"mode"`
	Steady   map[string]steady.FilterState `json:"steady,omitempty"`
	Alerts   map[string]alert.State        `json:"alerts,omitempty"`
	Trends   map[string]*trend.EWMA        `json:"trends,omitempty"`
	LastGood *compute.Record               `json:"last_good,omitempty"`
	// Daily is the day in progress of the daily aggregates, so a restart
	// in mid-day neither loses the morning nor credits the downtime.
	Daily *trend.DailyState `json:"daily,omitempty"`
}

func (e *evaluator) marshalState() ([]byte, error) {
	p := persisted{Mode: e.mode.S, Alerts: map[string]alert.State{}, Trends: e.trends}
	if e.steady != nil {
		p.Steady = e.steady.States()
	}
	for _, r := range e.rules {
		p.Alerts[r.Rule.Name] = r.S
	}
	if e.hasGood {
		g := e.lastGood
		p.LastGood = &g
	}
	ds := e.daily.State()
	p.Daily = &ds
	return json.Marshal(p)
}

// restoreState applies a state saved by marshalState. An unreadable state
// changes nothing; a daily aggregate that no longer fits (the site's time
// zone changed) is dropped with an error after everything else was applied.
func (e *evaluator) restoreState(b []byte) error {
	var p persisted
	if err := json.Unmarshal(b, &p); err != nil {
		return err
	}
	e.mode.S = p.Mode
	if e.steady != nil && p.Steady != nil {
		e.steady.Restore(p.Steady)
	}
	for _, r := range e.rules {
		if s, ok := p.Alerts[r.Rule.Name]; ok {
			r.S = s
		}
	}
	for k, t := range p.Trends {
		if t != nil {
			t.Tau = e.tau
			e.trends[k] = t
		}
	}
	if p.LastGood != nil {
		e.lastGood, e.hasGood = *p.LastGood, true
	}
	if p.Daily != nil {
		if err := e.daily.Restore(*p.Daily); err != nil {
			return fmt.Errorf("%w: the rest of the state was restored; the daily aggregate starts afresh", err)
		}
	}
	return nil
}

// activeAlerts lists the rules that are pending or firing.
func (e *evaluator) activeAlerts() []alertView {
	var out []alertView
	for _, r := range e.rules {
		if r.S.State == compute.AlertPending || r.S.State == compute.AlertFiring {
			out = append(out, alertView{Machine: e.id, Rule: r.Rule.Name, Class: string(r.Rule.Class), Kind: string(r.Rule.Kind), Figure: r.Rule.Figure,
				State: r.S.State.String(), Since: r.S.Since, Value: r.S.LastValue, Limit: r.Rule.Limit, U95: r.S.LastU95})
		}
	}
	return out
}

type alertView struct {
	Machine string    `json:"machine"`
	Rule    string    `json:"rule"`
	Class   string    `json:"class"`
	Kind    string    `json:"kind"` // threshold, deviation (value is the deviation from the baseline) or rate (per hour)
	Figure  string    `json:"figure"`
	State   string    `json:"state"`
	Since   time.Time `json:"since"`
	Value   float64   `json:"value"`
	Limit   float64   `json:"limit"`
	U95     float64   `json:"u95"`
}
