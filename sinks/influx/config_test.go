package influx

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/config/tlsconf"
)

func TestConfigValidate(t *testing.T) {
	good := Config{URL: "http://127.0.0.1:8428", Bucket: "b", SpoolDir: "/tmp/x"}
	good.Defaults()
	if err := good.Validate(); err != nil {
		t.Fatalf("defaults: %v", err)
	}
	tests := map[string]func(c *Config){
		"no url":            func(c *Config) { c.URL = "" },
		"bad scheme":        func(c *Config) { c.URL = "ftp://x" },
		"no bucket":         func(c *Config) { c.Bucket = "" },
		"tls on http":       func(c *Config) { c.TLS = &tlsconf.Config{CAFile: "/ca.pem"} },
		"cert without key":  func(c *Config) { c.URL = "https://x:8086"; c.TLS = &tlsconf.Config{CertFile: "/c.pem"} },
		"negative flush":    func(c *Config) { c.FlushInterval = -time.Second },
		"timeout below 1s":  func(c *Config) { c.RequestTimeout = 500 * time.Millisecond },
		"bad prefix":        func(c *Config) { c.MeasurementPrefix = "a-b" },
		"no spool":          func(c *Config) { c.SpoolDir = "" },
		"zero batch":        func(c *Config) { c.BatchPoints = -1 },
		"queue below batch": func(c *Config) { c.MaxQueuedPoints = 10; c.BatchPoints = 100 },
		"retry max < init":  func(c *Config) { c.RetryMax = 10 * time.Millisecond; c.RetryInitial = 100 * time.Millisecond },
		"cap below 2 segs":  func(c *Config) { c.SpoolMaxBytes = c.SpoolSegmentBytes },
		"tiny segment":      func(c *Config) { c.SpoolSegmentBytes = 100 },
	}
	for name, f := range tests {
		c := good
		f(&c)
		if err := c.Validate(); err == nil {
			t.Errorf("%s: accepted", name)
		}
	}
}

// New reads the TLS files before it touches the spool: a missing or empty CA
// file is a configuration error naming the key.
func TestNewTLSFiles(t *testing.T) {
	dir := t.TempDir()
	empty := filepath.Join(dir, "empty.pem")
	if err := os.WriteFile(empty, []byte("not a certificate\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name, ca, want string
	}{
		{"missing ca_file", filepath.Join(dir, "missing.pem"), "tls ca_file"},
		{"no certificate in ca_file", empty, "holds no PEM certificate"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			cfg := Config{URL: "https://127.0.0.1:1", Bucket: "b", SpoolDir: filepath.Join(dir, "spool"), TLS: &tlsconf.Config{CAFile: tc.ca}}
			s, err := New("tls", cfg, nil)
			if err == nil {
				s.Close(context.Background())
				t.Fatal("accepted")
			}
			if !errors.Is(err, tlsconf.ErrTLS) || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("err = %v, want ErrTLS mentioning %q", err, tc.want)
			}
		})
	}
}
