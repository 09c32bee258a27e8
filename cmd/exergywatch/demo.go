package main

import (
	"context"
	_ "embed"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"

	"github.com/exergywatch/exergywatch/cmd/exergywatch/internal/plantsim"
	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/config"
	"github.com/exergywatch/exergywatch/thermo/fluids"
)

//go:embed demo.yaml
var demoConfig []byte

func init() {
	register("demo", "run the daemon on a simulated plant with an embedded NATS server (no other software)", cmdDemo)
}

// startEmbeddedNATS starts an in-process NATS server on a free loopback port.
func startEmbeddedNATS(storeDir string) (*server.Server, error) {
	opts := &server.Options{Host: "127.0.0.1", Port: -1, NoLog: true, NoSigs: true, MaxPayload: 8 << 20}
	if storeDir != "" {
		opts.JetStream, opts.StoreDir = true, storeDir
	}
	ns, err := server.NewServer(opts)
	if err != nil {
		return nil, fmt.Errorf("embedded NATS server: %w", err)
	}
	go ns.Start()
	if !ns.ReadyForConnections(10 * time.Second) {
		ns.Shutdown()
		return nil, fmt.Errorf("embedded NATS server did not become ready")
	}
	return ns, nil
}

// sampleJSON is the payload the simulator publishes: one JSON batch per
// machine and second, in the format ingest/payload decodes.
type sampleJSON struct {
	Tag     string  `json:"tag"`
	Value   float64 `json:"value"`
	Quality string  `json:"quality,omitempty"`
}

type batchJSON struct {
	TS      string       `json:"ts"`
	Samples []sampleJSON `json:"samples"`
}

// publishPlant steps the simulator every period and publishes the tags to
// subject prefix.<machine> until ctx ends.
func publishPlant(ctx context.Context, nc *nats.Conn, plant *plantsim.Plant, prefix string, period time.Duration, log *slog.Logger) error {
	machineOf := map[string]string{}
	for _, t := range plant.Tags() {
		machineOf[t.Name] = t.Machine
	}
	tick := time.NewTicker(period)
	defer tick.Stop()
	for {
		now := time.Now().UTC()
		rs, err := plant.Step(now)
		if err != nil {
			log.Error("simulator step failed", "err", err)
		} else {
			byMachine := map[string][]sampleJSON{}
			for _, r := range rs {
				m := machineOf[r.Tag]
				byMachine[m] = append(byMachine[m], sampleJSON{Tag: r.Tag, Value: r.Value, Quality: r.Quality})
			}
			for m, ss := range byMachine {
				b, _ := json.Marshal(batchJSON{TS: now.Format(time.RFC3339Nano), Samples: ss})
				if err := nc.Publish(prefix+"."+m, b); err != nil {
					log.Warn("publish failed", "machine", m, "err", err)
				}
			}
		}
		select {
		case <-ctx.Done():
			return nil
		case <-tick.C:
		}
	}
}

func cmdDemo(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("demo", flag.ContinueOnError)
	fs.SetOutput(stderr)
	duration := fs.Duration("duration", 0, "stop after this long (0: run until Ctrl-C)")
	listen := fs.String("status", "127.0.0.1:9465", "address of the JSON status API and /metrics (localhost); \"off\" disables it")
	dataDir := fs.String("data-dir", "", "where the embedded store and state live (default: a temporary directory, removed at exit)")
	every := fs.Duration("print-every", 5*time.Second, "console summary interval")
	printCfg := fs.Bool("print-config", false, "print the demo configuration and exit")
	level := fs.String("log-level", "warn", "log level of the daemon's own log on stderr")
	if err := fs.Parse(args); err != nil {
		return 2
	}
	if *printCfg {
		_, _ = stdout.Write(demoConfig)
		return 0
	}
	log, err := newLogger(stderr, *level, "text")
	if err != nil {
		fmt.Fprintln(stderr, "exergywatch demo:", err)
		return 2
	}
	dir := *dataDir
	if dir == "" {
		if dir, err = os.MkdirTemp("", "exergywatch-demo-"); err != nil {
			fmt.Fprintln(stderr, "exergywatch demo:", err)
			return 1
		}
		defer os.RemoveAll(dir)
	} else if err := os.MkdirAll(dir, 0o755); err != nil {
		fmt.Fprintln(stderr, "exergywatch demo:", err)
		return 1
	}

	cfg, err := config.Parse("demo.yaml (embedded)", demoConfig)
	if err != nil {
		fmt.Fprintln(stderr, "exergywatch demo: embedded configuration:", err)
		return 1
	}
	ns, err := startEmbeddedNATS("")
	if err != nil {
		fmt.Fprintln(stderr, "exergywatch demo:", err)
		return 1
	}
	defer ns.Shutdown()
	cfg.Sources[0].NATS.URLs = []string{ns.ClientURL()}
	cfg.Sinks[0].Store.Path = filepath.Join(dir, "history.db")
	cfg.State.Path = filepath.Join(dir, "state.db")
	cfg.Status.Listen = *listen

	start := time.Now().UTC()
	plant, err := plantsim.New(plantsim.DemoOptions(start), fluids.New)
	if err != nil {
		fmt.Fprintln(stderr, "exergywatch demo: simulator:", err)
		return 1
	}
	nc, err := nats.Connect(ns.ClientURL(), nats.Name("exergywatch-demo-simulator"))
	if err != nil {
		fmt.Fprintln(stderr, "exergywatch demo:", err)
		return 1
	}
	defer nc.Close()

	ctx, stop := signalContext(*duration)
	defer stop()
	fmt.Fprintf(stdout, "exergywatch demo: Quillmoor demonstration works (an invented plant), %d machines, %d tags\n", len(plant.Machines()), len(plant.Tags()))
	fmt.Fprintf(stdout, "%s\n", advisoryNote)
	fmt.Fprintf(stdout, "Scenario: the air compressor fouls from t+10s (2 points/min), the HP turbine erodes slowly, the gas compressor's discharge\n")
	fmt.Fprintf(stdout, "thermocouple sticks at t+60s for 2 min, load drops to 75 %% at t+120s and returns at t+240s, and the feed-pump flow transmitter spikes now and then.\n")

	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		_ = publishPlant(ctx, nc, plant, "quillmoor.tags", time.Second, log)
	}()
	var events []compute.Event
	var evMu sync.Mutex
	opt := pipelineOptions{log: log, onEvent: func(e compute.Event) {
		evMu.Lock()
		events = append(events, e)
		evMu.Unlock()
	}}
	var st *statusServer
	ready := make(chan struct{})
	wg.Add(1)
	go func() { // console summary
		defer wg.Done()
		select {
		case <-ready:
		case <-ctx.Done():
			return
		}
		if a := st.addr(); a != "" {
			fmt.Fprintf(stdout, "Status API: http://%s/status  alerts: http://%s/status/alerts  metrics: http://%s/metrics\n\n", a, a, a)
		}
		t := time.NewTicker(*every)
		defer t.Stop()
		for {
			select {
			case <-ctx.Done():
				return
			case <-t.C:
				if p := st.cur.Load(); p != nil {
					evMu.Lock()
					evs := events
					events = nil
					evMu.Unlock()
					printSummary(stdout, p.status(), time.Since(start), plant.Load(time.Since(start)), cfg.Site.Currency, evs)
				}
			}
		}
	}()
	err = runDaemon(ctx, cfg, nil, nil, opt, func(s *statusServer) { st = s; close(ready) })
	stop()
	wg.Wait()
	if err != nil {
		fmt.Fprintln(stderr, "exergywatch demo:", err)
		return 1
	}
	fmt.Fprintln(stdout, "demo stopped; everything written was flushed to the embedded store")
	return 0
}

// printSummary writes the console view: one line per machine.
func printSummary(w io.Writer, v statusView, elapsed time.Duration, load float64, currency string, events []compute.Event) {
	var b strings.Builder
	fmt.Fprintf(&b, "--- t+%-5s load %3.0f %% ------------------------------------------------------------------------------------\n", elapsed.Round(time.Second), 100*load)
	fmt.Fprintf(&b, "%-15s %-11s %-9s %8s %7s %9s %10s %9s %9s %10s  %s\n", "machine", "mode", "state", "eta_s %", "±U95", "vs base", "Sgen kW/K", "lost kW", "drift kW", "drift "+currency+"/h", "quality / reasons")
	for _, m := range v.Machines {
		state := "transient"
		if m.Steady {
			state = "steady"
		}
		if m.Mode != "running" {
			state = "-"
		}
		eta, u, dev := "-", "", ""
		if f, ok := m.Figures["isentropic_efficiency"]; ok && f.Value != nil {
			eta = fmt.Sprintf("%.2f", 100**f.Value)
			if f.U95 != nil {
				u = fmt.Sprintf("±%.2f", 100**f.U95)
			}
		}
		if d, ok := m.Deviation["isentropic_efficiency"]; ok {
			dev = fmt.Sprintf("%+.2f pt", 100*d)
		}
		sgen, lost, drift, cost := "-", "-", "-", "-"
		if f, ok := m.Figures["entropy_generation_rate_w_per_k"]; ok && f.Value != nil {
			sgen = fmt.Sprintf("%.2f", *f.Value/1e3)
		}
		if f, ok := m.Figures["lost_work_rate_w"]; ok && f.Value != nil {
			lost = fmt.Sprintf("%.0f", *f.Value/1e3)
		}
		if f, ok := m.Figures[config.DegradationPowerFigure]; ok && f.Value != nil {
			drift = fmt.Sprintf("%.0f", *f.Value/1e3)
		}
		if f, ok := m.Figures[config.DegradationCostFigure]; ok && f.Value != nil {
			cost = fmt.Sprintf("%.1f", *f.Value)
		}
		fmt.Fprintf(&b, "%-15s %-11s %-9s %8s %7s %9s %10s %9s %9s %10s  %s%s\n", m.ID, m.Mode, state, eta, u, dev, sgen, lost, drift, cost, m.Quality, shortReasons(m.Reasons))
	}
	for _, a := range v.Alerts {
		what := a.Figure
		switch a.Kind {
		case "deviation":
			what = "deviation of " + a.Figure + " from baseline"
		case "rate":
			what = "rate of " + a.Figure + " per hour"
		}
		fmt.Fprintf(&b, "ALERT %-7s %s %s (%s): %s = %.4g, limit %.4g, since %s\n", a.State, a.Machine, a.Rule, a.Class, what, a.Value, a.Limit, a.Since.Format("15:04:05"))
	}
	for _, e := range events {
		if e.To == compute.AlertFiring || e.To == compute.AlertResolved {
			fmt.Fprintf(&b, "EVENT %s -> %s  %s\n", e.From, e.To, e.Reason)
		}
	}
	fmt.Fprint(w, b.String())
}

func shortReasons(rs []string) string {
	seen := map[string]bool{}
	var out []string
	for _, r := range rs {
		if r == reasonTransient {
			continue
		}
		if strings.HasPrefix(r, "input:") {
			parts := strings.Split(r, ":")
			r = parts[len(parts)-1] + "(" + parts[1] + ")"
		}
		if !seen[r] {
			seen[r] = true
			out = append(out, r)
		}
	}
	sort.Strings(out)
	if len(out) == 0 {
		return ""
	}
	s := " " + strings.Join(out, ",")
	if len(s) > 60 {
		s = s[:57] + "..."
	}
	return s
}
