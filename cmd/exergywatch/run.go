package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"reflect"
	"syscall"

	"github.com/exergywatch/exergywatch/config"
)

func init() {
	register("run", "run the monitoring daemon on a configuration file", cmdRun)
	register("check", "validate a configuration file without connecting to anything", cmdCheck)
}

func newLogger(w io.Writer, level, format string) (*slog.Logger, error) {
	var lv slog.Level
	if err := lv.UnmarshalText([]byte(level)); err != nil {
		return nil, fmt.Errorf("--log-level %q: use debug, info, warn or error", level)
	}
	opts := &slog.HandlerOptions{Level: lv}
	switch format {
	case "text":
		return slog.New(slog.NewTextHandler(w, opts)), nil
	case "json":
		return slog.New(slog.NewJSONHandler(w, opts)), nil
	}
	return nil, fmt.Errorf("--log-format %q: use text or json", format)
}

func cmdCheck(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("check", flag.ContinueOnError)
	fs.SetOutput(stderr)
	file := fs.String("c", "", "configuration file (YAML)")
	if err := fs.Parse(args); err != nil {
		return 2
	}
	if *file == "" {
		fmt.Fprintln(stderr, "exergywatch check: -c FILE is required")
		return 2
	}
	cfg, err := config.Load(*file)
	if err != nil {
		reportConfigError(stderr, err)
		return 2
	}
	nTags := len(cfg.TagMap.Tags)
	fmt.Fprintf(stdout, "%s: configuration is valid: site %s, %d machines, %d tags, %d sources, %d sinks\n",
		*file, cfg.Site.Name, len(cfg.Machines), nTags, len(cfg.Sources), len(cfg.Sinks))
	return 0
}

// liveFields are the settings that cannot change on reload.
func liveFieldsChanged(a, b *config.Config) string {
	switch {
	case a.State.Path != b.State.Path:
		return "state.path"
	case a.Status.Listen != b.Status.Listen:
		return "status.listen"
	case !reflect.DeepEqual(a.Site.Name, b.Site.Name):
		return "site.name"
	}
	return ""
}

func cmdRun(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("run", flag.ContinueOnError)
	fs.SetOutput(stderr)
	file := fs.String("c", "", "configuration file (YAML)")
	level := fs.String("log-level", "info", "log level: debug, info, warn, error")
	format := fs.String("log-format", "text", "log format: text or json")
	if err := fs.Parse(args); err != nil {
		return 2
	}
	if *file == "" {
		fmt.Fprintln(stderr, "exergywatch run: -c FILE is required")
		return 2
	}
	log, err := newLogger(stderr, *level, *format)
	if err != nil {
		fmt.Fprintln(stderr, "exergywatch run:", err)
		return 2
	}
	cfg, err := config.Load(*file)
	if err != nil {
		reportConfigError(stderr, err)
		return 2
	}
	ctx, stop := signal.NotifyContext(context.Background(), syscall.SIGINT, syscall.SIGTERM)
	defer stop()
	hup := make(chan os.Signal, 1)
	signal.Notify(hup, syscall.SIGHUP)
	defer func() { signal.Stop(hup); close(hup) }() // ends the forwarding goroutine below
	reload := make(chan struct{}, 1)
	go func() {
		for range hup {
			select {
			case reload <- struct{}{}:
			default:
			}
		}
	}()
	if err := runDaemon(ctx, cfg, reload, func() (*config.Config, error) { return config.Load(*file) }, pipelineOptions{log: log}, nil); err != nil {
		log.Error("exergywatch stopped with an error", "err", err)
		return 1
	}
	return 0
}

// runDaemon runs cfg until ctx ends. Each value on reload re-reads the
// configuration with load: all or nothing — the new file is validated in
// full, the running pipeline drains and stops, and the new one starts; if
// the new one cannot start, the old configuration is started again. Alert
// and filter states survive through the state file. started, when not nil,
// receives the status server once it listens.
func runDaemon(ctx context.Context, cfg *config.Config, reload <-chan struct{}, load func() (*config.Config, error), opt pipelineOptions, started func(*statusServer)) error {
	log := opt.log
	st, err := newStatusServer(cfg.Status.Listen, log.With("component", "status"))
	if err != nil {
		return fmt.Errorf("status endpoint %s: %w", cfg.Status.Listen, err)
	}
	defer st.shutdown()
	if started != nil {
		started(st)
	}
	cur := cfg
	p, err := buildPipeline(cur, opt)
	if err != nil {
		st.reloadOK.Set(0)
		return err
	}
	st.reloadOK.Set(1)
	st.reloadTime.SetToCurrentTime()
	log.Info("exergywatch running (advisory monitoring, not a protection system)", "site", cur.Site.Name,
		"machines", len(cur.Machines), "status", st.addr())
	for {
		st.cur.Store(p)
		pctx, cancel := context.WithCancel(ctx)
		done := make(chan error, 1)
		go func(p *pipeline) { done <- p.run(pctx) }(p)
		var next *config.Config
	wait:
		for {
			select {
			case <-ctx.Done():
				cancel()
				err := <-done
				log.Info("exergywatch stopped; sinks flushed")
				return err
			case err := <-done:
				cancel()
				return err
			case <-reload:
				n, lerr := load()
				if lerr == nil {
					if f := liveFieldsChanged(cur, n); f != "" {
						lerr = fmt.Errorf("%s cannot change while running; restart the daemon to change it", f)
					}
				}
				if lerr != nil {
					st.reloadOK.Set(0)
					log.Error("configuration reload refused; the running configuration is kept", "err", lerr)
					continue
				}
				next = n
				break wait
			}
		}
		// The new file is valid: drain and stop the running pipeline, then
		// start the new one (state carries over through the state file).
		cancel()
		if err := <-done; err != nil {
			log.Warn("pipeline stopped with an error before reload", "err", err)
		}
		np, berr := buildPipeline(next, opt)
		if berr != nil {
			st.reloadOK.Set(0)
			log.Error("new configuration could not start; the previous one is started again", "err", berr)
			if p, err = buildPipeline(cur, opt); err != nil {
				return fmt.Errorf("restart of the previous configuration failed: %w", err)
			}
			continue
		}
		p, cur = np, next
		st.reloadOK.Set(1)
		st.reloadTime.SetToCurrentTime()
		log.Info("configuration reloaded", "machines", len(cur.Machines))
	}
}

// reportConfigError prints a configuration error: the list of problems as
// they are (each names file, line:col and item), anything else with the
// command's prefix.
func reportConfigError(w io.Writer, err error) {
	if errors.Is(err, config.ErrInvalid) {
		fmt.Fprintln(w, err)
		return
	}
	fmt.Fprintln(w, "exergywatch:", err)
}
