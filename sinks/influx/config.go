package influx

import (
	"fmt"
	"net/url"
	"os"
	"strings"
	"time"
)

// Config configures the InfluxDB v2 sink. The token is never part of the
// struct: it is read from the environment variable TokenEnv or the file
// TokenFile when the sink opens, and never logged.
type Config struct {
	URL       string `yaml:"url"`        // base URL of the server, e.g. http://127.0.0.1:8086
	Org       string `yaml:"org"`        // v2 organisation (ignored by VictoriaMetrics)
	Bucket    string `yaml:"bucket"`     // v2 bucket
	TokenEnv  string `yaml:"token_env"`  // name of the environment variable holding the API token
	TokenFile string `yaml:"token_file"` // path of a file holding the API token (trailing newline ignored)

	// MeasurementPrefix starts every measurement name: <prefix>_machine,
	// <prefix>_reason, <prefix>_alert. Default "exw".
	MeasurementPrefix string `yaml:"measurement_prefix"`

	BatchPoints      int `yaml:"batch_points"`       // points per write request; default 5000
	FlushIntervalMS  int `yaml:"flush_interval_ms"`  // longest time a point waits in memory before a write (ms); default 1000
	MaxQueuedPoints  int `yaml:"max_queued_points"`  // bound of the in-memory queue (points); default 100000
	RequestTimeoutMS int `yaml:"request_timeout_ms"` // timeout of one HTTP write (ms); default 10000

	// Retries: delay n is min(RetryMaxMS, RetryInitialMS * 2^n) with full
	// jitter in [delay/2, delay]. A fresh batch is tried DirectAttempts
	// times, then it goes to the spool; the spool is retried forever.
	RetryInitialMS int `yaml:"retry_initial_ms"` // default 250
	RetryMaxMS     int `yaml:"retry_max_ms"`     // default 30000
	DirectAttempts int `yaml:"direct_attempts"`  // default 3

	SpoolDir          string `yaml:"spool_dir"`           // directory of the on-disk spool; required
	SpoolMaxBytes     int64  `yaml:"spool_max_bytes"`     // cap of the spool (bytes); oldest points are dropped beyond it; default 1 GiB
	SpoolSegmentBytes int64  `yaml:"spool_segment_bytes"` // size at which a new segment file starts (bytes); default 8 MiB
	SpoolNoFsync      bool   `yaml:"spool_no_fsync"`      // skip fsync after each spool append (faster, may lose the last batch on power loss)
}

// Defaults fills zero fields with defaults.
func (c *Config) Defaults() {
	set := func(p *int, v int) {
		if *p == 0 {
			*p = v
		}
	}
	if c.MeasurementPrefix == "" {
		c.MeasurementPrefix = "exw"
	}
	set(&c.BatchPoints, 5000)
	set(&c.FlushIntervalMS, 1000)
	set(&c.MaxQueuedPoints, 100000)
	set(&c.RequestTimeoutMS, 10000)
	set(&c.RetryInitialMS, 250)
	set(&c.RetryMaxMS, 30000)
	set(&c.DirectAttempts, 3)
	if c.SpoolMaxBytes == 0 {
		c.SpoolMaxBytes = 1 << 30
	}
	if c.SpoolSegmentBytes == 0 {
		c.SpoolSegmentBytes = 8 << 20
	}
}

// Validate checks the settings; every message says how to fix the value.
func (c Config) Validate() error {
	u, err := url.Parse(c.URL)
	if err != nil || (u.Scheme != "http" && u.Scheme != "https") || u.Host == "" {
		return fmt.Errorf("influx: url %q: want http://host:port or https://host:port", c.URL)
	}
	if c.Bucket == "" {
		return fmt.Errorf("influx: bucket is empty: set the v2 bucket name")
	}
	if c.TokenEnv != "" && c.TokenFile != "" {
		return fmt.Errorf("influx: set token_env or token_file, not both")
	}
	if !validName(c.MeasurementPrefix) {
		return fmt.Errorf("influx: measurement_prefix %q: use letters, digits and '_'", c.MeasurementPrefix)
	}
	pos := []struct {
		name string
		v    int
	}{{"batch_points", c.BatchPoints}, {"flush_interval_ms", c.FlushIntervalMS}, {"max_queued_points", c.MaxQueuedPoints},
		{"request_timeout_ms", c.RequestTimeoutMS}, {"retry_initial_ms", c.RetryInitialMS}, {"retry_max_ms", c.RetryMaxMS}, {"direct_attempts", c.DirectAttempts}}
	for _, p := range pos {
		if p.v < 1 {
			return fmt.Errorf("influx: %s = %d: must be at least 1", p.name, p.v)
		}
	}
	if c.MaxQueuedPoints < c.BatchPoints {
		return fmt.Errorf("influx: max_queued_points %d is below batch_points %d: raise it", c.MaxQueuedPoints, c.BatchPoints)
	}
	if c.RetryMaxMS < c.RetryInitialMS {
		return fmt.Errorf("influx: retry_max_ms %d is below retry_initial_ms %d", c.RetryMaxMS, c.RetryInitialMS)
	}
	if c.SpoolDir == "" {
		return fmt.Errorf("influx: spool_dir is empty: set a directory for points kept while the database is down")
	}
	if c.SpoolSegmentBytes < 4096 {
		return fmt.Errorf("influx: spool_segment_bytes %d: use at least 4096", c.SpoolSegmentBytes)
	}
	if c.SpoolMaxBytes < 2*c.SpoolSegmentBytes {
		return fmt.Errorf("influx: spool_max_bytes %d must be at least twice spool_segment_bytes %d", c.SpoolMaxBytes, c.SpoolSegmentBytes)
	}
	return nil
}

func ms(v int) time.Duration { return time.Duration(v) * time.Millisecond }

// token reads the API token from TokenEnv or TokenFile; "" when neither is
// set (servers without authentication). The value is never logged.
func (c Config) token() (string, error) {
	switch {
	case c.TokenEnv != "":
		t, ok := os.LookupEnv(c.TokenEnv)
		if !ok || t == "" {
			return "", fmt.Errorf("influx: environment variable %s (token_env) is not set or empty", c.TokenEnv)
		}
		return t, nil
	case c.TokenFile != "":
		b, err := os.ReadFile(c.TokenFile)
		if err != nil {
			return "", fmt.Errorf("influx: token_file: %w", err)
		}
		t := strings.TrimSpace(string(b))
		if t == "" {
			return "", fmt.Errorf("influx: token_file %s is empty", c.TokenFile)
		}
		return t, nil
	}
	return "", nil
}
