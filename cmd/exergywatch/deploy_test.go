package main

// The files in deploy/ must not rot: every example configuration loads
// with config.Load and passes `exergywatch check`, its sources pass their
// constructors' validation, its secrets are references; the systemd unit
// keeps its hardening (and passes systemd-analyze where installed); the
// compose file keeps its shape and mounts a configuration that loads and
// maps every simulated tag.

import (
	"bufio"
	"bytes"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"gopkg.in/yaml.v3"

	"github.com/exergywatch/exergywatch/cmd/exergywatch/internal/plantsim"
	"github.com/exergywatch/exergywatch/config"
	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/natsrc"
	"github.com/exergywatch/exergywatch/ingest/opcuasrc"
)

const deployDir = "../../deploy"

// stateDir is the unit's StateDirectory; every path the daemon writes must
// lie inside it (ProtectSystem=strict makes the rest read-only).
const stateDir = "/var/lib/exergywatch/"

// Not parallel: it sets environment variables (t.Setenv).
func TestDeployExampleConfigs(t *testing.T) {
	files, _ := filepath.Glob(filepath.Join(deployDir, "examples", "*.yaml"))
	files = append(files, filepath.Join(deployDir, "compose", "exergywatch.yaml"))
	if len(files) < 3 {
		t.Fatalf("found %v; want the two examples and the compose configuration", files)
	}
	for _, f := range files {
		t.Run(filepath.Base(f), func(t *testing.T) {
			cfg, err := config.Load(f)
			if err != nil {
				t.Fatalf("config.Load: %v", err)
			}
			var out, errb bytes.Buffer
			if code := dispatch([]string{"check", "-c", f}, &out, &errb); code != 0 {
				t.Fatalf("exergywatch check: exit %d: %s", code, errb.String())
			}
			if cfg.Site.Name != "quillmoor" {
				t.Errorf("site %q", cfg.Site.Name)
			}
			// Sources pass their own validation (no connection is made).
			for _, s := range cfg.Sources {
				switch s.Kind {
				case "nats":
					if _, err := natsrc.New(*s.NATS, ingest.NewQueue(1, nil), nil, nil, nil); err != nil {
						t.Errorf("source %s: %v", s.Name, err)
					}
				case "opcua":
					o := *s.OPCUA
					if o.SecurityPolicy != "Basic256Sha256" || o.SecurityMode != "SignAndEncrypt" || o.Auth != "username" {
						t.Errorf("OPC UA source %s: %s/%s/%s, want Basic256Sha256/SignAndEncrypt/username", s.Name, o.SecurityPolicy, o.SecurityMode, o.Auth)
					}
					if !strings.HasPrefix(o.CertFile, stateDir) || !strings.HasPrefix(o.KeyFile, stateDir) {
						t.Errorf("OPC UA certificate outside %s: %s %s", stateDir, o.CertFile, o.KeyFile)
					}
					// The certificate files exist only on the plant; the
					// constructor makes an ephemeral one without them.
					o.CertFile, o.KeyFile = "", ""
					if _, err := opcuasrc.New(o, ingest.NewQueue(1, nil), nil, nil, nil); err != nil {
						t.Errorf("source %s: %v", s.Name, err)
					}
				}
			}
			// Secrets are references, resolved from the environment.
			var envs []string
			for _, s := range cfg.Sources {
				if s.OPCUA != nil && s.OPCUA.Password != "" {
					if !strings.HasPrefix(s.OPCUA.Password, "env:") {
						t.Errorf("OPC UA password %q is not an env: reference", s.OPCUA.Password)
					}
					envs = append(envs, strings.TrimPrefix(s.OPCUA.Password, "env:"))
				}
			}
			for i := range cfg.Sinks {
				for _, f := range cfg.Sinks[i].SecretFields() {
					if *f.Value == "" {
						continue
					}
					if !strings.HasPrefix(*f.Value, "env:") {
						t.Errorf("sink %s %s %q is not an env: reference", cfg.Sinks[i].Name, f.Item, *f.Value)
					}
					envs = append(envs, strings.TrimPrefix(*f.Value, "env:"))
				}
			}
			for _, env := range envs {
				for _, e := range envs {
					t.Setenv(e, "s3cret")
				}
				c2, _ := config.Load(f)
				os.Unsetenv(env)
				if err := c2.ResolveSecrets(); !errors.Is(err, config.ErrSecret) {
					t.Errorf("with %s unset, ResolveSecrets: %v, want ErrSecret", env, err)
				}
				t.Setenv(env, "s3cret")
				c3, _ := config.Load(f)
				if err := c3.ResolveSecrets(); err != nil {
					t.Errorf("with %s set: %v", env, err)
				}
			}
			// Everything written lies in the state directory.
			if !strings.HasPrefix(cfg.State.Path, stateDir) {
				t.Errorf("state.path %s outside %s", cfg.State.Path, stateDir)
			}
			kinds := map[string]bool{}
			for _, s := range cfg.Sinks {
				kinds[s.Kind] = true
				switch s.Kind {
				case "influxdb":
					if !strings.HasPrefix(s.InfluxDB.Token, "env:") || !strings.HasPrefix(s.InfluxDB.SpoolDir, stateDir) {
						t.Errorf("sink %s: token %q (want an env: reference), spool_dir %q", s.Name, s.InfluxDB.Token, s.InfluxDB.SpoolDir)
					}
				case "store":
					if !strings.HasPrefix(s.Store.Path, stateDir) {
						t.Errorf("sink %s: path %s outside %s", s.Name, s.Store.Path, stateDir)
					}
				}
			}
			switch filepath.Base(f) {
			case "quillmoor-opcua-influx.yaml":
				if !kinds["influxdb"] || !kinds["store"] || !kinds["nats"] || cfg.Sources[0].Kind != "opcua" {
					t.Errorf("sinks %v, source %s: want influxdb, store and nats from opcua", kinds, cfg.Sources[0].Kind)
				}
			case "quillmoor-nats-jetstream.yaml":
				if cfg.Sources[0].Kind != "nats" || cfg.Sources[0].NATS.Mode != "jetstream" {
					t.Errorf("source %+v: want a NATS JetStream source", cfg.Sources[0])
				}
			case "exergywatch.yaml":
				// The compose configuration consumes the simulator: every tag mapped.
				mapped := map[string]bool{}
				for _, tg := range cfg.TagMap.Tags {
					mapped[tg.Tag] = true
				}
				for _, tg := range newPlant(t, plantsim.Options{Start: time.Now()}).Tags() {
					if !mapped[tg.Name] {
						t.Errorf("simulated tag %s is not mapped in the compose configuration", tg.Name)
					}
				}
			}
			if cfg.Status.Listen != "127.0.0.1:9465" && filepath.Base(f) != "exergywatch.yaml" {
				t.Errorf("status.listen %q, want localhost", cfg.Status.Listen)
			}
		})
	}
}

// unitKeys reads a systemd unit into key -> values (in order).
func unitKeys(t *testing.T, path string) map[string][]string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	keys := map[string][]string{}
	sc := bufio.NewScanner(bytes.NewReader(b))
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		if line == "" || line[0] == '#' || line[0] == '[' {
			continue
		}
		k, v, ok := strings.Cut(line, "=")
		if !ok {
			t.Fatalf("unit line %q", line)
		}
		keys[k] = append(keys[k], v)
	}
	return keys
}

func TestDeploySystemdUnit(t *testing.T) {
	t.Parallel()
	path := filepath.Join(deployDir, "systemd", "exergywatch.service")
	keys := unitKeys(t, path)
	for k, want := range map[string]string{
		"DynamicUser": "yes", "ProtectSystem": "strict", "StateDirectory": "exergywatch", "NoNewPrivileges": "yes",
		"CapabilityBoundingSet": "", "AmbientCapabilities": "", "ReadWritePaths": "/var/lib/exergywatch",
		"ExecReload": "/bin/kill -HUP $MAINPID", "Restart": "on-failure", "KillSignal": "SIGTERM",
		"ProtectHome": "yes", "PrivateTmp": "yes", "PrivateDevices": "yes", "RestrictAddressFamilies": "AF_INET AF_INET6 AF_UNIX",
	} {
		if v := keys[k]; len(v) != 1 || v[0] != want {
			t.Errorf("%s=%q, want %q", k, v, want)
		}
	}
	if f := keys["SystemCallFilter"]; len(f) == 0 || f[0] != "@system-service" {
		t.Errorf("SystemCallFilter %q, want @system-service first", f)
	}
	if s := keys["ExecStart"]; len(s) != 1 || !strings.Contains(s[0], "exergywatch run -c /etc/exergywatch/exergywatch.yaml") {
		t.Errorf("ExecStart %q", s)
	}
	if s := keys["ExecStartPre"]; len(s) != 1 || !strings.Contains(s[0], "exergywatch check -c") {
		t.Errorf("ExecStartPre %q: want a check of the configuration", s)
	}

	sa, err := exec.LookPath("systemd-analyze")
	if err != nil {
		t.Skip("SKIPPED the systemd-analyze part: systemd-analyze not installed (the key checks above ran)")
	}
	// verify needs the executable to exist: point ExecStart at this test binary.
	self, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	b, _ := os.ReadFile(path)
	dir := t.TempDir()
	unit := filepath.Join(dir, "exergywatch.service")
	if err := os.WriteFile(unit, bytes.ReplaceAll(b, []byte("/usr/local/bin/exergywatch"), []byte(self)), 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command(sa, "verify", unit).CombinedOutput()
	if err != nil || len(bytes.TrimSpace(out)) != 0 {
		t.Errorf("systemd-analyze verify: %v\n%s", err, out)
	}
	out, err = exec.Command(sa, "security", "--offline=true", "--threshold=25", unit).CombinedOutput()
	if err != nil {
		t.Errorf("systemd-analyze security: exposure above 2.5 or failure: %v\n%s", err, out)
	}
	for _, line := range strings.Split(string(out), "\n") {
		if strings.Contains(line, "Overall exposure level") {
			t.Log(strings.TrimSpace(line))
		}
	}
}

func TestDeployCompose(t *testing.T) {
	t.Parallel()
	b, err := os.ReadFile(filepath.Join(deployDir, "compose", "compose.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	var c struct {
		Services map[string]struct {
			Image       string            `yaml:"image"`
			Command     []string          `yaml:"command"`
			Ports       []string          `yaml:"ports"`
			Volumes     []string          `yaml:"volumes"`
			Environment map[string]string `yaml:"environment"`
			Build       struct {
				Context    string `yaml:"context"`
				Dockerfile string `yaml:"dockerfile"`
			} `yaml:"build"`
		} `yaml:"services"`
	}
	if err := yaml.Unmarshal(b, &c); err != nil {
		t.Fatalf("compose.yaml: %v", err)
	}
	for _, name := range []string{"nats", "influxdb", "plant-sim", "exergywatch"} {
		if _, ok := c.Services[name]; !ok {
			t.Errorf("no service %s", name)
		}
	}
	if !strings.Contains(strings.Join(c.Services["nats"].Command, " "), "--jetstream") {
		t.Error("nats without JetStream")
	}
	if !strings.HasPrefix(c.Services["influxdb"].Image, "influxdb:2.") {
		t.Errorf("influxdb image %q, want 2.x", c.Services["influxdb"].Image)
	}
	sim := c.Services["plant-sim"]
	if _, err := os.Stat(filepath.Join(deployDir, "compose", sim.Build.Context, sim.Build.Dockerfile)); err != nil {
		t.Errorf("Dockerfile of the build: %v", err)
	}
	if c.Services["exergywatch"].Environment["QUILLMOOR_INFLUX_TOKEN"] == "" {
		t.Error("the daemon gets no InfluxDB token")
	}
	for name, s := range c.Services {
		for _, p := range s.Ports {
			if !strings.HasPrefix(p, "127.0.0.1:") {
				t.Errorf("service %s publishes %s beyond the loopback interface", name, p)
			}
		}
	}
	mounted := false
	for _, v := range c.Services["exergywatch"].Volumes {
		if strings.HasPrefix(v, "./exergywatch.yaml:") {
			mounted = true
		}
	}
	if !mounted {
		t.Error("the daemon's configuration (compose/exergywatch.yaml, checked in TestDeployExampleConfigs) is not mounted")
	}
	// Every flag the compose file passes to the binary exists: parse the
	// arguments followed by -h, which stops before anything runs.
	for _, s := range []string{"plant-sim", "exergywatch"} {
		args := c.Services[s].Command
		if _, ok := commands[args[0]]; !ok {
			t.Errorf("service %s runs unknown command %q", s, args[0])
			continue
		}
		var out, errb bytes.Buffer
		_ = dispatch(append(append([]string(nil), args...), "-h"), &out, &errb)
		if strings.Contains(errb.String(), "not defined") || strings.Contains(errb.String(), "invalid value") {
			t.Errorf("service %s: %s", s, strings.SplitN(errb.String(), "\n", 2)[0])
		}
	}
}
