package main

import (
	"bufio"
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"net/url"
	"os"
	"strconv"
	"strings"
	"time"

	"github.com/nats-io/nats.go"
	"gopkg.in/yaml.v3"

	"github.com/exergywatch/exergywatch/cmd/exergywatch/internal/plantsim"
	"github.com/exergywatch/exergywatch/thermo/fluids"
)

func init() {
	register("simulate", "publish the simulated demo plant's tags to any NATS server (load generator), or record them to a file", cmdSimulate)
}

// simOptions returns the plant settings of a scenario: "demo" is the demo's
// story (fouling, a stuck thermocouple, a load change, flow spikes) and
// "steady" is the plant at full load, new, without faults.
func simOptions(scenario string, start time.Time, copies int, seed int64) (plantsim.Options, error) {
	var o plantsim.Options
	switch scenario {
	case "demo":
		o = plantsim.DemoOptions(start)
	case "steady":
		o = plantsim.Options{Start: start}
	default:
		return o, fmt.Errorf("--scenario %q: use demo or steady", scenario)
	}
	o.Seed, o.Copies = seed, copies
	return o, nil
}

// checkNATSURL accepts a comma-separated list of nats://, tls://, ws:// or
// wss:// URLs (or bare host:port).
func checkNATSURL(s string) error {
	if strings.TrimSpace(s) == "" {
		return errors.New("--nats URL is required (e.g. nats://127.0.0.1:4222)")
	}
	for _, one := range strings.Split(s, ",") {
		one = strings.TrimSpace(one)
		if !strings.Contains(one, "://") {
			one = "nats://" + one
		}
		u, err := url.Parse(one)
		if err != nil {
			return fmt.Errorf("--nats %q: not a URL: %v", s, err)
		}
		switch u.Scheme {
		case "nats", "tls", "ws", "wss":
		default:
			return fmt.Errorf("--nats %q: scheme %q; use nats://, tls://, ws:// or wss://", s, u.Scheme)
		}
		if u.Hostname() == "" {
			return fmt.Errorf("--nats %q: no host", s)
		}
		if p := u.Port(); p != "" {
			if n, err := strconv.Atoi(p); err != nil || n < 1 || n > 65535 {
				return fmt.Errorf("--nats %q: port %q out of range", s, p)
			}
		}
	}
	return nil
}

func cmdSimulate(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("simulate", flag.ContinueOnError)
	fs.SetOutput(stderr)
	natsURL := fs.String("nats", "", "NATS server URL(s), comma-separated (required unless --out or --print-config)")
	rate := fs.Duration("rate", time.Second, "time between two readings of every tag")
	copies := fs.Int("copies", 1, "plant size: copies of the six-machine plant (machine ids get -001, -002, ...; tags QM001., QM002., ...)")
	duration := fs.Duration("duration", 0, "stop after this long (0: until Ctrl-C; required with --out)")
	prefix := fs.String("prefix", "quillmoor.tags", "subject prefix; each machine publishes on <prefix>.<machine>")
	scenario := fs.String("scenario", "demo", "demo (fouling, stuck sensor, load change, spikes) or steady (full load, no faults)")
	seed := fs.Int64("seed", 7, "random seed of the measurement noise")
	printCfg := fs.Bool("print-config", false, "print a daemon configuration that consumes this simulator (for 'exergywatch run -c FILE') and exit")
	interval := fs.Duration("interval", 0, "with --print-config: evaluation interval and window (default 2 x --rate)")
	out := fs.String("out", "", "write the readings to this file instead of publishing: CSV (tag,time,value,quality), or line protocol when the name ends in .lp; simulated time runs from --start as fast as possible")
	startS := fs.String("start", "", "with --out: simulated start time (RFC 3339; default now)")
	quiet := fs.Bool("quiet", false, "do not print the per-second publishing statistics")
	if err := fs.Parse(args); err != nil {
		return 2
	}
	fail := func(code int, format string, a ...any) int {
		fmt.Fprintf(stderr, "exergywatch simulate: "+format+"\n", a...)
		return code
	}
	if fs.NArg() > 0 {
		return fail(2, "unexpected argument %q", fs.Arg(0))
	}
	if *rate < time.Millisecond {
		return fail(2, "--rate %v: must be at least 1ms", *rate)
	}
	if *copies < 1 || *copies > 999 {
		return fail(2, "--copies %d: must be 1..999", *copies)
	}
	if *duration < 0 {
		return fail(2, "--duration %v: must not be negative", *duration)
	}
	if *prefix == "" || strings.ContainsAny(*prefix, " \t*>") || strings.HasSuffix(*prefix, ".") || strings.HasPrefix(*prefix, ".") {
		return fail(2, "--prefix %q: must be a NATS subject without wildcards or surrounding dots", *prefix)
	}
	if *printCfg {
		iv := *interval
		if iv == 0 {
			iv = 2 * *rate
		}
		if iv <= 0 {
			return fail(2, "--interval %v: must be positive", iv)
		}
		u := *natsURL
		if u == "" {
			u = "nats://127.0.0.1:4222"
		} else if err := checkNATSURL(u); err != nil {
			return fail(2, "%v", err)
		}
		b, err := simulatorConfig(*copies, *rate, iv, *prefix, u)
		if err != nil {
			return fail(1, "%v", err)
		}
		_, _ = stdout.Write(b)
		return 0
	}
	if *out != "" {
		if *duration <= 0 {
			return fail(2, "--out needs --duration (the simulated span to record)")
		}
		start := time.Now().UTC().Truncate(time.Second)
		if *startS != "" {
			t, err := time.Parse(time.RFC3339Nano, *startS)
			if err != nil {
				return fail(2, "--start %q: use RFC 3339, e.g. 2026-06-01T00:00:00Z", *startS)
			}
			start = t.UTC()
		}
		o, err := simOptions(*scenario, start, *copies, *seed)
		if err != nil {
			return fail(2, "%v", err)
		}
		n, err := recordPlant(*out, o, *rate, *duration)
		if err != nil {
			return fail(1, "%v", err)
		}
		fmt.Fprintf(stdout, "wrote %d readings (%v of simulated time from %s, every %v) to %s\n", n, *duration, start.Format(time.RFC3339), *rate, *out)
		return 0
	}
	if err := checkNATSURL(*natsURL); err != nil {
		return fail(2, "%v", err)
	}
	o, err := simOptions(*scenario, time.Now().UTC(), *copies, *seed)
	if err != nil {
		return fail(2, "%v", err)
	}
	plant, err := plantsim.New(o, fluids.New)
	if err != nil {
		return fail(1, "simulator: %v", err)
	}
	nc, err := nats.Connect(*natsURL, nats.Name("exergywatch-simulate"), nats.Timeout(3*time.Second))
	if err != nil {
		return fail(1, "cannot connect to NATS at %s: %v", *natsURL, err)
	}
	defer nc.Close()
	ctx, stop := signalContext(*duration)
	defer stop()
	fmt.Fprintf(stdout, "exergywatch simulate: %d machines, %d tags, one reading per tag every %v, scenario %s, publishing on %s.<machine> to %s\n",
		len(plant.Machines()), len(plant.Tags()), *rate, *scenario, *prefix, nc.ConnectedUrlRedacted())
	var report func(simStats)
	if !*quiet {
		report = func(s simStats) {
			fmt.Fprintf(stdout, "t+%-6s %6d msg/s %8d samples/s %9.1f kB/s  steps %d  late steps %d  publish errors %d\n",
				s.Elapsed.Round(time.Second), s.Messages, s.Samples, float64(s.Bytes)/1e3, s.Steps, s.Late, s.Errors)
		}
	}
	total, err := simulateNATS(ctx, nc, plant, *prefix, *rate, report)
	if ferr := nc.FlushTimeout(5 * time.Second); ferr != nil && err == nil && !nc.IsClosed() {
		err = fmt.Errorf("flush: %w", ferr)
	}
	fmt.Fprintf(stdout, "published %d messages, %d samples, %.1f kB in %d steps (%d late, %d publish errors)\n",
		total.Messages, total.Samples, float64(total.Bytes)/1e3, total.Steps, total.Late, total.Errors)
	if err != nil {
		return fail(1, "%v", err)
	}
	return 0
}

// simStats counts what the simulator published (per second, or in total).
type simStats struct {
	Elapsed                        time.Duration
	Steps, Late, Messages, Samples uint64
	Bytes, Errors                  uint64
}

// simulateNATS steps the plant every rate and publishes one JSON batch per
// machine (the format publishPlant uses and ingest/payload decodes) on
// prefix.<machine>, until ctx ends. report, when set, gets the counts of
// each second. A step that starts more than one rate late is counted late
// (the machine cannot keep up with the plant size).
func simulateNATS(ctx context.Context, nc *nats.Conn, plant *plantsim.Plant, prefix string, rate time.Duration, report func(simStats)) (simStats, error) {
	machineOf := map[string]string{}
	for _, t := range plant.Tags() {
		machineOf[t.Name] = t.Machine
	}
	began := time.Now()
	var total, sec simStats
	lastReport := began
	next := began
	var buf []byte
	byMachine := map[string][]sampleJSON{}
	for ctx.Err() == nil {
		now := time.Now()
		if now.Sub(next) > rate {
			total.Late++
			sec.Late++
		}
		rs, err := plant.Step(now.UTC())
		if err != nil {
			return total, fmt.Errorf("simulator step: %w", err)
		}
		for k := range byMachine {
			byMachine[k] = byMachine[k][:0]
		}
		for _, r := range rs {
			m := machineOf[r.Tag]
			byMachine[m] = append(byMachine[m], sampleJSON{Tag: r.Tag, Value: r.Value, Quality: r.Quality})
		}
		ts := now.UTC().Format(time.RFC3339Nano)
		for m, ss := range byMachine {
			if len(ss) == 0 {
				continue
			}
			buf = appendBatchJSON(buf[:0], ts, ss)
			if err := nc.Publish(prefix+"."+m, buf); err != nil {
				total.Errors++
				sec.Errors++
				if nc.IsClosed() {
					return total, fmt.Errorf("publish: %w", err)
				}
				continue
			}
			total.Messages++
			sec.Messages++
			total.Samples += uint64(len(ss))
			sec.Samples += uint64(len(ss))
			total.Bytes += uint64(len(buf))
			sec.Bytes += uint64(len(buf))
		}
		total.Steps++
		sec.Steps++
		if report != nil && time.Since(lastReport) >= time.Second {
			sec.Elapsed = time.Since(began)
			report(sec)
			sec = simStats{}
			lastReport = time.Now()
		}
		next = next.Add(rate)
		if d := time.Until(next); d > 0 {
			t := time.NewTimer(d)
			select {
			case <-ctx.Done():
				t.Stop()
			case <-t.C:
			}
		} else if -d > rate {
			next = time.Now() // too far behind: do not try to catch up in a burst
		}
	}
	total.Elapsed = time.Since(began)
	return total, nil
}

// appendBatchJSON writes {"ts":..., "samples":[{"tag","value","quality"}...]}.
func appendBatchJSON(b []byte, ts string, ss []sampleJSON) []byte {
	b = append(b, `{"ts":`...)
	b = strconv.AppendQuote(b, ts)
	b = append(b, `,"samples":[`...)
	for i, s := range ss {
		if i > 0 {
			b = append(b, ',')
		}
		b = append(b, `{"tag":`...)
		b = strconv.AppendQuote(b, s.Tag)
		b = append(b, `,"value":`...)
		b = strconv.AppendFloat(b, s.Value, 'g', -1, 64)
		if s.Quality != "" {
			b = append(b, `,"quality":`...)
			b = strconv.AppendQuote(b, s.Quality)
		}
		b = append(b, '}')
	}
	return append(b, "]}"...)
}

// recordPlant writes the readings of span of simulated time, one step
// every rate, to a CSV file (header tag,time,value,quality; RFC 3339 times)
// or, when the name ends in .lp, line protocol ("<tag> value=<v>,
// quality=\"good\" <ns>"). It returns the number of readings.
func recordPlant(path string, o plantsim.Options, rate, span time.Duration) (int, error) {
	plant, err := plantsim.New(o, fluids.New)
	if err != nil {
		return 0, fmt.Errorf("simulator: %w", err)
	}
	f, err := os.Create(path)
	if err != nil {
		return 0, err
	}
	w := bufio.NewWriter(f)
	n, err := writeReadings(w, plant, o.Start, rate, span, strings.HasSuffix(path, ".lp"))
	if ferr := w.Flush(); err == nil {
		err = ferr
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	return n, err
}

func writeReadings(w io.Writer, plant *plantsim.Plant, start time.Time, rate, span time.Duration, lineProto bool) (int, error) {
	var b []byte
	if !lineProto {
		b = append(b, "tag,time,value,quality\n"...)
	}
	n := 0
	for e := time.Duration(0); e <= span; e += rate {
		t := start.Add(e)
		rs, err := plant.Step(t)
		if err != nil {
			return n, err
		}
		ts := t.Format(time.RFC3339Nano)
		for _, r := range rs {
			if lineProto {
				b = append(b, r.Tag...) // simulator tags need no escaping
				b = append(b, " value="...)
				b = strconv.AppendFloat(b, r.Value, 'g', 9, 64)
				b = append(b, `,quality="`...)
				b = append(b, r.Quality...)
				b = append(b, `" `...)
				b = strconv.AppendInt(b, t.UnixNano(), 10)
			} else {
				b = append(b, r.Tag...)
				b = append(b, ',')
				b = append(b, ts...)
				b = append(b, ',')
				b = strconv.AppendFloat(b, r.Value, 'g', 9, 64)
				b = append(b, ',')
				b = append(b, r.Quality...)
			}
			b = append(b, '\n')
			n++
		}
		if _, err := w.Write(b); err != nil {
			return n, err
		}
		b = b[:0]
	}
	return n, nil
}

// simulatorConfig derives, from the embedded demo configuration, a daemon
// configuration for copies copies of the plant publishing every rate on
// prefix.<machine> at natsURL: tags and machines are repeated with the
// simulator's names (QMnnn. tags, -nnn machine ids) and every time setting
// of the demo (written for one reading per second) is scaled by rate/1s;
// the evaluation interval and the alignment window are iv.
func simulatorConfig(copies int, rate, iv time.Duration, prefix, natsURL string) ([]byte, error) {
	var doc yaml.Node
	if err := yaml.Unmarshal(demoConfig, &doc); err != nil {
		return nil, fmt.Errorf("embedded demo configuration: %w", err)
	}
	if len(doc.Content) != 1 || doc.Content[0].Kind != yaml.MappingNode {
		return nil, errors.New("embedded demo configuration: not a mapping")
	}
	root := doc.Content[0]
	scale := float64(rate) / float64(time.Second)
	scaleDurations(root, scale)
	if n := mapGet(root, "evaluation", "interval"); n != nil {
		n.Value, n.LineComment = iv.String(), ""
	}
	if al := mapGet(root, "alignment"); al != nil {
		for i := 0; i+1 < len(al.Content); i += 2 {
			al.Content[i].HeadComment, al.Content[i+1].LineComment, al.Content[i+1].FootComment = "", "", ""
			if al.Content[i].Value == "window" {
				al.Content[i+1].Value = iv.String()
			}
		}
	}
	if src := mapGet(root, "sources"); src != nil && len(src.Content) > 0 {
		s := src.Content[0]
		s.HeadComment = ""
		if n := mapGet(s, "nats", "urls"); n != nil {
			var urls []*yaml.Node
			for _, u := range strings.Split(natsURL, ",") {
				urls = append(urls, &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!str", Value: strings.TrimSpace(u)})
			}
			n.Content, n.LineComment = urls, ""
		}
		if n := mapGet(s, "nats", "subjects"); n != nil {
			n.Content = []*yaml.Node{{Kind: yaml.ScalarNode, Tag: "!!str", Value: prefix + ".>"}}
		}
	}
	if copies > 1 {
		if tags := mapGet(root, "tag_map", "tags"); tags != nil {
			tags.Content = repeatItems(tags.Content, copies, func(item *yaml.Node, c int) {
				if n := mapGet(item, "tag"); n != nil {
					n.Value = copyTag(n.Value, c)
				}
				if n := mapGet(item, "machine"); n != nil {
					n.Value = fmt.Sprintf("%s-%03d", n.Value, c)
				}
			})
		}
		if ms := mapGet(root, "machines"); ms != nil {
			ms.Content = repeatItems(ms.Content, copies, func(item *yaml.Node, c int) {
				if n := mapGet(item, "id"); n != nil {
					n.Value = fmt.Sprintf("%s-%03d", n.Value, c)
				}
				if as := mapGet(item, "alerts"); as != nil {
					for _, a := range as.Content {
						if n := mapGet(a, "advice"); n != nil {
							n.Value = strings.ReplaceAll(n.Value, "QM.", fmt.Sprintf("QM%03d.", c))
						}
					}
				}
			})
		}
	}
	if n := mapGet(root, "sinks"); n != nil && len(n.Content) > 0 {
		if p := mapGet(n.Content[0], "store", "path"); p != nil {
			p.Value = "exergywatch-sim.db"
		}
	}
	if n := mapGet(root, "state", "path"); n != nil {
		n.Value = "exergywatch-sim-state.db"
	}
	doc.HeadComment, root.HeadComment = "", ""
	doc.HeadComment = fmt.Sprintf("exergywatch configuration for the simulated Quillmoor plant, generated by\n"+
		"  exergywatch simulate --print-config --copies %d --rate %v --interval %v --prefix %s --nats %s\n"+
		"%d machine(s); time settings of the demo scaled to one reading per tag every %v.\n"+
		"Run the simulator with the same --copies, --rate and --prefix, then: exergywatch run -c FILE\n\n"+
		"exergywatch is advisory monitoring, not a protection or trip system.",
		copies, rate, iv, prefix, natsURL, 6*copies, rate)
	var b strings.Builder
	enc := yaml.NewEncoder(&b)
	enc.SetIndent(2)
	if err := enc.Encode(&doc); err != nil {
		return nil, err
	}
	if err := enc.Close(); err != nil {
		return nil, err
	}
	return []byte(b.String()), nil
}

// copyTag renames a demo tag ("QM.HP1.PT101") to copy c ("QM003.HP1.PT101").
func copyTag(tag string, c int) string {
	if rest, ok := strings.CutPrefix(tag, "QM."); ok {
		return fmt.Sprintf("QM%03d.%s", c, rest)
	}
	return tag
}

// durationKeys are the demo's time settings that follow the data rate.
var durationKeys = map[string]bool{"interval": true, "window": true, "max_skew": true, "late_horizon": true, "max_future": true,
	"trend_time_constant": true, "startup_time": true, "dwell": true, "pending_for": true, "clear_for": true, "rate_window": true,
	"stuck_period": true, "stale_after": true}

func scaleDurations(n *yaml.Node, k float64) {
	switch n.Kind {
	case yaml.MappingNode:
		for i := 0; i+1 < len(n.Content); i += 2 {
			key, val := n.Content[i], n.Content[i+1]
			if val.Kind == yaml.ScalarNode && durationKeys[key.Value] {
				if d, err := time.ParseDuration(val.Value); err == nil && d > 0 {
					val.Value = time.Duration(float64(d) * k).String()
					continue
				}
			}
			scaleDurations(val, k)
		}
	case yaml.SequenceNode, yaml.DocumentNode:
		for _, c := range n.Content {
			scaleDurations(c, k)
		}
	}
}

// mapGet walks mapping keys.
func mapGet(n *yaml.Node, keys ...string) *yaml.Node {
	for _, k := range keys {
		if n == nil || n.Kind != yaml.MappingNode {
			return nil
		}
		var next *yaml.Node
		for i := 0; i+1 < len(n.Content); i += 2 {
			if n.Content[i].Value == k {
				next = n.Content[i+1]
				break
			}
		}
		n = next
	}
	return n
}

func repeatItems(items []*yaml.Node, copies int, rename func(*yaml.Node, int)) []*yaml.Node {
	var out []*yaml.Node
	for c := 1; c <= copies; c++ {
		for _, it := range items {
			cp := deepCopy(it)
			if c > 1 {
				cp.HeadComment = ""
			}
			rename(cp, c)
			out = append(out, cp)
		}
	}
	return out
}

func deepCopy(n *yaml.Node) *yaml.Node {
	if n == nil {
		return nil
	}
	cp := *n
	cp.Content = make([]*yaml.Node, len(n.Content))
	for i, c := range n.Content {
		cp.Content[i] = deepCopy(c)
	}
	return &cp
}
