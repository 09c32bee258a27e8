// Package config loads the daemon's YAML configuration: strict (unknown
// keys are errors), with every problem named by file, line:col and item and
// a hint on how to fix it; defaults laid under the file; cross-checks
// between machines, tags, fluids, sources and sinks. Each subsystem owns its
// own section struct (ingest/tagmap, ingest/align, ingest/natsrc,
// ingest/opcuasrc, sinks/...); this package holds the file layout, the site,
// the machines and their alert rules, and hands each subsystem its section.
package config

import (
	"errors"
	"fmt"
	"math"
	"os"
	"strings"
	"time"

	"github.com/exergywatch/exergywatch/compute/steady"
	"github.com/exergywatch/exergywatch/ingest/align"
	"github.com/exergywatch/exergywatch/ingest/natsrc"
	"github.com/exergywatch/exergywatch/ingest/opcuasrc"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
	"github.com/exergywatch/exergywatch/sinks"
	"github.com/exergywatch/exergywatch/sinks/influx"
	"github.com/exergywatch/exergywatch/sinks/natsout"
	"github.com/exergywatch/exergywatch/sinks/store"
)

// Config is the whole file.
type Config struct {
	Site       Site              `yaml:"site"`
	Evaluation Evaluation        `yaml:"evaluation"`
	Alignment  align.Config      `yaml:"alignment"`
	TagMap     tagmap.Config     `yaml:"tag_map"`
	Sources    []Source          `yaml:"sources"`
	Machines   []Machine         `yaml:"machines"`
	Sinks      []Sink            `yaml:"sinks"`
	Fanout     sinks.MultiConfig `yaml:"fanout"`
	State      State             `yaml:"state"`
	Status     Status            `yaml:"status"`

	// File is the path the configuration was read from.
	File string `yaml:"-"`
	// raw is the file's text, for placing problems found after decoding.
	raw []byte
}

// Site describes the plant.
type Site struct {
	Name string `yaml:"name"`
	// DeadStateTemperature is T0 of the lost-work and exergy figures
	// (default 298.15 K).
	DeadStateTemperature Temperature `yaml:"dead_state_temperature"`
	// ReferencePressure is p0 of the exergy figures (default 101.325 kPa).
	ReferencePressure Pressure `yaml:"reference_pressure"`
	// Timezone is the IANA zone of the daily aggregates (default UTC).
	Timezone string `yaml:"timezone"`
	// EnergyPrice prices lost work: money per MWh (default 0: no cost series).
	EnergyPrice float64 `yaml:"energy_price_per_mwh"`
	// Currency labels the cost (e.g. "EUR"); default "cost units".
	Currency string `yaml:"currency"`
}

// Evaluation sets how often machines are evaluated.
type Evaluation struct {
	Interval Duration `yaml:"interval"` // default 5s
	// Transient: "mark" publishes figures computed outside steady state
	// with quality transient (default); "withhold" publishes only the
	// record's quality and reasons.
	Transient string `yaml:"transient"`
	// TrendTimeConstant of the exponentially weighted trend (default 15m).
	TrendTimeConstant Duration `yaml:"trend_time_constant"`
}

// Source is one input. Kind selects the section that applies.
type Source struct {
	Name  string           `yaml:"name"`
	Kind  string           `yaml:"kind"` // nats | opcua
	NATS  *natsrc.Config   `yaml:"nats"`
	OPCUA *opcuasrc.Config `yaml:"opcua"`
}

// Sink is one output. Kind selects the section that applies.
type Sink struct {
	Name     string          `yaml:"name"`
	Kind     string          `yaml:"kind"` // influxdb | nats | store
	QueueLen int             `yaml:"queue_len"`
	InfluxDB *influx.Config  `yaml:"influxdb"`
	NATS     *natsout.Config `yaml:"nats"`
	Store    *store.Config   `yaml:"store"`
}

// State is where the daemon keeps alert states, filter states and the last
// good figures across restarts (an embedded store file).
type State struct {
	Path string `yaml:"path"` // default ./exergywatch-state.db
}

// Status is the HTTP endpoint of /metrics, /healthz, /readyz and /status.
type Status struct {
	// Listen address; default 127.0.0.1:9465 (localhost only). Empty
	// string "off" disables it.
	Listen string `yaml:"listen"`
}

// Machine is one monitored machine.
type Machine struct {
	ID    string `yaml:"id"`
	Kind  string `yaml:"kind"`  // turbine | pump | compressor
	Fluid string `yaml:"fluid"` // see `exergywatch props --fluid`
	// Composition in mole fractions (natural-gas, ideal-gas, and the fuel
	// of flue-gas).
	Composition map[string]float64 `yaml:"composition"`
	// ExcessAir of flue-gas, fraction.
	ExcessAir float64 `yaml:"excess_air"`
	// RelativeHumidity (fraction), AmbientTemperature and AmbientPressure
	// fix humid-air.
	RelativeHumidity   float64     `yaml:"relative_humidity"`
	AmbientTemperature Temperature `yaml:"ambient_temperature"`
	AmbientPressure    Pressure    `yaml:"ambient_pressure"`

	// Inlet: pT (default), px or ph. Outlet: pT (default), px or
	// energy_balance.
	Inlet  string `yaml:"inlet"`
	Outlet string `yaml:"outlet"`
	// WorkFromPower puts a (p,T) outlet on the shaft-power basis (cooled
	// compressors): the measured power is the work.
	WorkFromPower bool `yaml:"work_from_power"`
	// DriveEfficiency of the generator or motor, fraction, for an
	// electrical power tag.
	DriveEfficiency float64 `yaml:"drive_efficiency"`
	// MechanicalLoss between coupling and fluid, e.g. 0.6MW.
	MechanicalLoss Value `yaml:"mechanical_loss"`
	// HeatFlow leaving the stream (casing loss, cooling duty), e.g. 50kW.
	HeatFlow Value `yaml:"heat_flow"`
	// HeatRejectionTemperature of that heat (default T0).
	HeatRejectionTemperature Temperature `yaml:"heat_rejection_temperature"`
	// SaturationMargin for the near-saturation flag (default 5K).
	SaturationMargin Value `yaml:"saturation_margin"`
	// EfficiencyU95Limit: above it a method is unusable (default 5 %).
	EfficiencyU95Limit Value `yaml:"efficiency_u95_limit"`

	Uncertainty Uncertainty `yaml:"uncertainty"`

	// Running conditions; all must hold. Empty: always running.
	Running     []Condition `yaml:"running"`
	StartupTime Duration    `yaml:"startup_time"`
	Steady      Steady      `yaml:"steady"`
	// Baseline: expected values of figures (e.g. isentropic_efficiency:
	// 0.86), the reference of deviation alerts and of the cost of
	// degradation.
	Baseline map[string]float64 `yaml:"baseline"`
	Alerts   []Alert            `yaml:"alerts"`
}

// Uncertainty gives instrument uncertainties of one machine. Each value is
// a standard uncertainty (k = 1) as an absolute value with a unit ("0.5K",
// "5kPa", "0.2kg/s") or a relative one ("0.1%"); temperatures may also name
// a class (rtd-A, tc-K-1) whose tolerance is taken as a rectangular
// half-width.
type Uncertainty struct {
	PInlet       Value   `yaml:"p_inlet"`
	POutlet      Value   `yaml:"p_outlet"`
	TInlet       Value   `yaml:"T_inlet"`
	TOutlet      Value   `yaml:"T_outlet"`
	TInletClass  string  `yaml:"T_inlet_class"`
	TOutletClass string  `yaml:"T_outlet_class"`
	Flow         Value   `yaml:"flow"`
	Power        Value   `yaml:"power"`
	CorrT        float64 `yaml:"correlation_T"` // matched temperature sensors, -1..1
	CorrP        float64 `yaml:"correlation_p"`
}

// Condition is one running condition: signal (quantity@port) above a limit.
type Condition struct {
	Signal string `yaml:"signal"` // e.g. flow@inlet, speed@shaft
	Above  Value  `yaml:"above"`
	Below  Value  `yaml:"below"`
}

// Steady configures steady-state detection (Cao-Rhinehart R-statistic).
type Steady struct {
	Signals   []string `yaml:"signals"` // quantity@port; default p@inlet, p@outlet, flow@inlet where mapped
	Lambda1   float64  `yaml:"lambda1"`
	Lambda2   float64  `yaml:"lambda2"`
	Lambda3   float64  `yaml:"lambda3"`
	RCritical float64  `yaml:"r_critical"`
	Warmup    int      `yaml:"warmup_samples"`
	Dwell     Duration `yaml:"dwell"`
}

// SteadyConfig returns the compute/steady settings.
func (s Steady) SteadyConfig() steady.Config {
	return steady.Config{Lambda1: s.Lambda1, Lambda2: s.Lambda2, Lambda3: s.Lambda3, RCritical: s.RCritical, Warmup: s.Warmup, Dwell: s.Dwell.D()}
}

// Alert is one alert rule.
type Alert struct {
	Name string `yaml:"name"`
	// Class: performance (default) or data_quality.
	Class string `yaml:"class"`
	// Figure: a derived figure name (isentropic_efficiency, ...), or for
	// data_quality rules an input reason code (stuck, spike, stale, ...).
	Figure string `yaml:"figure"`
	// Kind: threshold (default), deviation (from the machine's baseline)
	// or rate (per hour).
	Kind string `yaml:"kind"`
	// Exactly one of Below or Above: the limit, in the figure's SI unit.
	Below      *float64 `yaml:"below"`
	Above      *float64 `yaml:"above"`
	Hysteresis float64  `yaml:"hysteresis"`
	PendingFor Duration `yaml:"pending_for"`
	ClearFor   Duration `yaml:"clear_for"`
	RateWindow Duration `yaml:"rate_window"`
	Advice     string   `yaml:"advice"`
}

// Defaults.
const (
	DefaultInterval     = 5 * time.Second
	DefaultStatusListen = "127.0.0.1:9465"
	DefaultStatePath    = "exergywatch-state.db"
	DefaultTrendTau     = 15 * time.Minute
)

func (c *Config) applyDefaults() {
	if c.Site.DeadStateTemperature.K == 0 {
		c.Site.DeadStateTemperature.K = 298.15
	}
	if c.Site.ReferencePressure.Pa == 0 {
		c.Site.ReferencePressure.Pa = 101325
	}
	if c.Site.Timezone == "" {
		c.Site.Timezone = "UTC"
	}
	if c.Site.Currency == "" {
		c.Site.Currency = "cost units"
	}
	if c.Evaluation.Interval == 0 {
		c.Evaluation.Interval = Duration(DefaultInterval)
	}
	if c.Evaluation.Transient == "" {
		c.Evaluation.Transient = "mark"
	}
	if c.Evaluation.TrendTimeConstant == 0 {
		c.Evaluation.TrendTimeConstant = Duration(DefaultTrendTau)
	}
	if c.State.Path == "" {
		c.State.Path = DefaultStatePath
	}
	if c.Status.Listen == "" {
		c.Status.Listen = DefaultStatusListen
	}
	for i := range c.Machines {
		m := &c.Machines[i]
		if m.Inlet == "" {
			m.Inlet = "pT"
		}
		if m.Outlet == "" {
			m.Outlet = "pT"
		}
		for j := range m.Alerts {
			a := &m.Alerts[j]
			if a.Class == "" {
				a.Class = "performance"
			}
			if a.Kind == "" {
				a.Kind = "threshold"
			}
		}
	}
	for i := range c.Sinks {
		s := &c.Sinks[i]
		if s.Name == "" {
			s.Name = s.Kind
		}
	}
	for i := range c.Sources {
		s := &c.Sources[i]
		if s.Name == "" {
			s.Name = s.Kind
		}
	}
}

// Load reads, decodes and checks a configuration file. The error is a
// Problems list (errors.Is(err, ErrInvalid)) when the file was read.
func Load(path string) (*Config, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("read configuration: %w", err)
	}
	return Parse(path, data)
}

// Parse decodes and checks a configuration held in memory; file names it in
// messages.
func Parse(file string, data []byte) (*Config, error) {
	var c Config
	if ps := decodeStrict(file, data, &c); ps != nil {
		return nil, ps
	}
	c.File, c.raw = file, data
	c.applyDefaults()
	if ps := c.check(); len(ps) > 0 {
		for _, p := range ps {
			if p.File == "" {
				p.File = file
			}
		}
		return nil, ps
	}
	return &c, nil
}

// ErrSecret is wrapped when a secret cannot be resolved.
var ErrSecret = errors.New("secret not available")

// ResolveSecrets replaces "env:NAME" and "file:/path" references in the
// credential fields of sources and sinks (see Sink.SecretFields) with their
// values. Literal credentials in the file were refused by the checks.
// Errors name the source or sink and the reference, never a value.
func (c *Config) ResolveSecrets() error {
	for i := range c.Sources {
		s := &c.Sources[i]
		var fields []*string
		if s.NATS != nil {
			fields = append(fields, &s.NATS.Password, &s.NATS.Token)
		}
		if s.OPCUA != nil {
			fields = append(fields, &s.OPCUA.Password)
		}
		for _, f := range fields {
			if *f == "" {
				continue
			}
			sec := Secret{Source: *f}
			if err := sec.Resolve(); err != nil {
				return fmt.Errorf("source %s: %w: %w", s.Name, ErrSecret, err)
			}
			*f = sec.Value()
		}
	}
	return c.resolveSinkSecrets()
}

func isSecretRef(s string) bool {
	return strings.HasPrefix(s, "env:") || strings.HasPrefix(s, "file:")
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
