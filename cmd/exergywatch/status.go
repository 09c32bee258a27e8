package main

import (
	"context"
	"encoding/json"
	"errors"
	"log/slog"
	"math"
	"net"
	"net/http"
	"sort"
	"sync/atomic"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/compute/trend"
	"github.com/exergywatch/exergywatch/ingest/opcuasrc"
	"github.com/exergywatch/exergywatch/sinks"
)

// statusServer serves /healthz, /readyz, /metrics and the JSON status API
// for whichever pipeline is current (it survives reloads).
type statusServer struct {
	cur        atomic.Pointer[pipeline]
	base       *prometheus.Registry
	reloadOK   prometheus.Gauge
	reloadTime prometheus.Gauge
	srv        *http.Server
	ln         net.Listener
	log        *slog.Logger
}

func newStatusServer(addr string, log *slog.Logger) (*statusServer, error) {
	s := &statusServer{base: prometheus.NewRegistry(), log: log}
	s.reloadOK = prometheus.NewGauge(prometheus.GaugeOpts{Name: "exergywatch_config_last_reload_successful",
		Help: "1 if the last configuration (re)load succeeded, 0 if it failed and the previous configuration is kept."})
	s.reloadTime = prometheus.NewGauge(prometheus.GaugeOpts{Name: "exergywatch_config_last_reload_success_timestamp_seconds",
		Help: "Time of the last successful configuration load."})
	s.base.MustRegister(s.reloadOK, s.reloadTime, prometheus.NewGoCollector(), prometheus.NewProcessCollector(prometheus.ProcessCollectorOpts{}))
	if addr == "off" || addr == "" {
		return s, nil
	}
	ln, err := net.Listen("tcp", addr)
	if err != nil {
		return nil, err
	}
	s.ln = ln
	mux := http.NewServeMux()
	mux.HandleFunc("GET /healthz", func(w http.ResponseWriter, r *http.Request) { _, _ = w.Write([]byte("ok\n")) })
	mux.HandleFunc("GET /readyz", func(w http.ResponseWriter, r *http.Request) {
		if p := s.cur.Load(); p != nil && p.ready.Load() {
			_, _ = w.Write([]byte("ready\n"))
			return
		}
		http.Error(w, "not ready", http.StatusServiceUnavailable)
	})
	mux.Handle("GET /metrics", http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		g := prometheus.Gatherers{s.base}
		if p := s.cur.Load(); p != nil {
			g = append(g, p.reg)
		}
		promhttp.HandlerFor(g, promhttp.HandlerOpts{}).ServeHTTP(w, r)
	}))
	mux.HandleFunc("GET /status", func(w http.ResponseWriter, r *http.Request) {
		p := s.cur.Load()
		if p == nil {
			http.Error(w, "starting", http.StatusServiceUnavailable)
			return
		}
		writeJSON(w, p.status())
	})
	mux.HandleFunc("GET /status/alerts", func(w http.ResponseWriter, r *http.Request) {
		p := s.cur.Load()
		if p == nil {
			http.Error(w, "starting", http.StatusServiceUnavailable)
			return
		}
		writeJSON(w, p.alertsView(50))
	})
	s.srv = &http.Server{Handler: mux, ReadHeaderTimeout: 5 * time.Second}
	go func() {
		if err := s.srv.Serve(ln); err != nil && !errors.Is(err, http.ErrServerClosed) {
			log.Error("status server stopped", "err", err)
		}
	}()
	return s, nil
}

func (s *statusServer) addr() string {
	if s.ln == nil {
		return ""
	}
	return s.ln.Addr().String()
}

func (s *statusServer) shutdown() {
	if s.srv == nil {
		return
	}
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	_ = s.srv.Shutdown(ctx)
}

func writeJSON(w http.ResponseWriter, v any) {
	w.Header().Set("Content-Type", "application/json")
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	_ = enc.Encode(v)
}

// figureView is a figure as the status API shows it. Value is null when
// the figure is bad.
type figureView struct {
	Value   *float64 `json:"value"`
	U95     *float64 `json:"u95,omitempty"`
	Quality string   `json:"quality"`
	Trend   *float64 `json:"trend,omitempty"`
}

type machineView struct {
	ID            string                `json:"id"`
	Kind          string                `json:"kind"`
	Mode          string                `json:"mode"`
	ModeDetail    string                `json:"mode_detail,omitempty"`
	Steady        bool                  `json:"steady"`
	R             map[string]float64    `json:"r_statistic,omitempty"`
	Time          time.Time             `json:"time"`
	Quality       string                `json:"quality"`
	Reasons       []string              `json:"reasons"`
	Figures       map[string]figureView `json:"figures"`
	Baseline      map[string]float64    `json:"baseline,omitempty"`
	Deviation     map[string]float64    `json:"deviation_from_baseline,omitempty"`
	LastGoodTime  *time.Time            `json:"last_good_time,omitempty"`
	Today         *trend.Day            `json:"today,omitempty"`
	Inputs        map[string]float64    `json:"inputs_si"`
	InputProblems map[string]string     `json:"input_problems,omitempty"`
	// SensitivityAge: where the U95s' sensitivity coefficients come from,
	// in evaluations (0: computed for these inputs; n: reused from an
	// evaluation n ticks back at a nearby operating point); absent when
	// the last tick did not run the model.
	SensitivityAge *int `json:"u95_sensitivity_age,omitempty"`
}

type statusView struct {
	Site     string        `json:"site"`
	Advisory string        `json:"advisory"`
	Time     time.Time     `json:"time"`
	Machines []machineView `json:"machines"`
	Alerts   []alertView   `json:"active_alerts"`
	Sinks    []sinks.Stats `json:"sinks"`
	Ingest   ingestView    `json:"ingest"`
	Sources  []sourceView  `json:"sources"`
}

// sourceView is one configured source; OPC UA sources add what they know
// of the server's certificate.
type sourceView struct {
	Name  string                `json:"name"`
	Kind  string                `json:"kind"`
	Trust *opcuasrc.TrustStatus `json:"server_certificate,omitempty"`
	// LastRefusal says why the server's certificate was last refused
	// (with its thumbprints), until a trusted connection follows.
	LastRefusal string `json:"last_certificate_refusal,omitempty"`
}

type ingestView struct {
	Received     uint64 `json:"samples_received"`
	Accepted     uint64 `json:"samples_accepted"`
	DecodeErrors uint64 `json:"decode_errors"`
	QueueDropped uint64 `json:"queue_dropped_batches"`
	Reconnects   uint64 `json:"reconnects"`
	Evaluations  uint64 `json:"evaluations"`
}

const advisoryNote = "Advisory performance monitoring only; not a protection or trip system. Act under site procedures, local codes and licensed engineers."

func finitePtr(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

func (p *pipeline) status() statusView {
	v := statusView{Site: p.cfg.Site.Name, Advisory: advisoryNote, Time: time.Now().UTC(), Alerts: []alertView{}}
	for _, id := range p.order {
		p.lockedEval(id, func(e *evaluator) { p.machineStatus(&v, id, e) })
	}
	v.Sinks = p.multi.Stats()
	m := p.metrics
	v.Ingest = ingestView{Received: m.Received.Load(), Accepted: m.Accepted.Load(), DecodeErrors: m.DecodeErrors.Load(),
		QueueDropped: m.QueueDropped.Load(), Reconnects: m.Reconnects.Load(), Evaluations: p.evaluated.Load()}
	v.Sources = []sourceView{}
	for i, s := range p.sources {
		sv := sourceView{Name: s.name, Kind: p.cfg.Sources[i].Kind}
		if u, ok := s.src.(*opcuasrc.Source); ok {
			st := u.TrustStatus()
			sv.Trust = &st
			if st.LastRefusal != nil {
				sv.LastRefusal = st.LastRefusal.Error()
			}
		}
		v.Sources = append(v.Sources, sv)
	}
	return v
}

// machineStatus adds machine id to v; the caller holds e's lock.
func (p *pipeline) machineStatus(v *statusView, id string, e *evaluator) {
	mv := machineView{ID: id, Kind: e.kind.String(), Mode: e.lastMode.String(), ModeDetail: e.modeWhy, Steady: e.lastSteady, R: e.lastR,
		Time: e.last.Time, Quality: e.last.Quality.String(), Reasons: e.last.Reasons, Figures: map[string]figureView{},
		Baseline: e.baseline, Deviation: map[string]float64{}, Inputs: e.inputs, InputProblems: e.inputWhy}
	if mv.Reasons == nil {
		mv.Reasons = []string{}
	}
	for _, f := range e.last.Figures {
		fv := figureView{Quality: f.Quality.String()}
		if f.Quality != compute.QualityBad {
			fv.Value = finitePtr(f.Value)
			if f.HasU95 {
				fv.U95 = finitePtr(f.U95)
			}
		}
		if t, ok := e.trends[f.Name]; ok && t.N > 0 {
			fv.Trend = finitePtr(t.Value)
		}
		mv.Figures[f.Name] = fv
		if b, ok := e.baseline[f.Name]; ok && fv.Value != nil {
			mv.Deviation[f.Name] = *fv.Value - b
		}
	}
	if d, ok := e.daily.Current(); ok {
		mv.Today = &d
	}
	if e.sensAge >= 0 && e.last.Quality != compute.QualityBad {
		a := e.sensAge
		mv.SensitivityAge = &a
	}
	if e.hasGood {
		t := e.lastGood.Time
		mv.LastGoodTime = &t
	}
	v.Machines = append(v.Machines, mv)
	v.Alerts = append(v.Alerts, e.activeAlerts()...)
}

type alertsView struct {
	Advisory string            `json:"advisory"`
	Active   []alertView       `json:"active"`
	Recent   []sinks.EventJSON `json:"recent_events"`
}

func (p *pipeline) alertsView(n int) alertsView {
	v := alertsView{Advisory: advisoryNote, Active: []alertView{}, Recent: []sinks.EventJSON{}}
	for _, id := range p.order {
		p.lockedEval(id, func(e *evaluator) { v.Active = append(v.Active, e.activeAlerts()...) })
	}
	if ev, err := p.state.RecentEvents("", n); err == nil {
		for _, e := range ev {
			if j, err := sinks.EventToJSON(e); err == nil {
				v.Recent = append(v.Recent, j)
			}
		}
	}
	sort.Slice(v.Active, func(i, j int) bool { return v.Active[i].Since.Before(v.Active[j].Since) })
	return v
}
