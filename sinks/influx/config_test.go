package influx

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
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
		"both token kinds":  func(c *Config) { c.TokenEnv, c.TokenFile = "A", "/f" },
		"bad prefix":        func(c *Config) { c.MeasurementPrefix = "a-b" },
		"no spool":          func(c *Config) { c.SpoolDir = "" },
		"zero batch":        func(c *Config) { c.BatchPoints = -1 },
		"queue below batch": func(c *Config) { c.MaxQueuedPoints = 10; c.BatchPoints = 100 },
		"retry max < init":  func(c *Config) { c.RetryMaxMS = 10; c.RetryInitialMS = 100 },
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

func TestToken(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "token")
	if err := os.WriteFile(file, []byte("s3cret-from-file\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	t.Setenv("EXW_TEST_TOKEN", "s3cret-from-env")
	tests := []struct {
		c       Config
		want    string
		wantErr bool
	}{
		{Config{}, "", false},
		{Config{TokenEnv: "EXW_TEST_TOKEN"}, "s3cret-from-env", false},
		{Config{TokenFile: file}, "s3cret-from-file", false},
		{Config{TokenEnv: "EXW_TEST_TOKEN_MISSING"}, "", true},
		{Config{TokenFile: filepath.Join(dir, "missing")}, "", true},
	}
	for i, tc := range tests {
		got, err := tc.c.token()
		if got != tc.want || (err != nil) != tc.wantErr {
			t.Errorf("case %d: %q, %v", i, got, err)
		}
		if err != nil && strings.Contains(err.Error(), "s3cret") {
			t.Errorf("case %d: error leaks the token: %v", i, err)
		}
	}
}
