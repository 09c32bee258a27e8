package influx

import (
	"fmt"
	"net/url"
	"time"

	"github.com/exergywatch/exergywatch/config/tlsconf"
)

// Config configures the InfluxDB v2 sink. Token holds the API token itself
// once the configuration's secret references were resolved
// (config.ResolveSecrets): in the file it is written as "env:NAME" or
// "file:/path", literal tokens are refused by the configuration checks. It
// is never logged.
type Config struct {
	URL    string `yaml:"url"`    // base URL of the server, e.g. http://127.0.0.1:8086 or https://...
	Org    string `yaml:"org"`    // v2 organisation (ignored by VictoriaMetrics)
	Bucket string `yaml:"bucket"` // v2 bucket
	// Token is the API token (env:NAME or file:/path in the file); empty
	// for servers without authentication. Never logged.
	Token string `yaml:"token"`
	// TLS for https URLs: a private CA (ca_file), a client certificate
	// (cert_file, key_file) and the server name to verify (server_name).
	// Without it the system's roots verify the server.
	TLS *tlsconf.Config `yaml:"tls"`

	// MeasurementPrefix starts every measurement name: <prefix>_machine,
	// <prefix>_reason, <prefix>_alert. Default "exw".
	MeasurementPrefix string `yaml:"measurement_prefix"`

	BatchPoints int `yaml:"batch_points"` // points per write request; default 5000
	// FlushInterval is the longest time a point waits in memory before a
	// write (a duration such as 1s); default 1 s.
	FlushInterval   time.Duration `yaml:"flush_interval"`
	MaxQueuedPoints int           `yaml:"max_queued_points"` // bound of the in-memory queue (points); default 100000
	// RequestTimeout is the timeout of one HTTP write (a duration such as
	// 10s, whole seconds: the client's unit); default 10 s.
	RequestTimeout time.Duration `yaml:"request_timeout"`

	// Retries: delay n is min(RetryMax, RetryInitial * 2^n) with full
	// jitter in [delay/2, delay]. A fresh batch is tried DirectAttempts
	// times, then it goes to the spool; the spool is retried forever.
	RetryInitial   time.Duration `yaml:"retry_initial"`   // first retry delay (a duration such as 250ms); default 250 ms
	RetryMax       time.Duration `yaml:"retry_max"`       // cap of the retry delay (a duration such as 30s); default 30 s
	DirectAttempts int           `yaml:"direct_attempts"` // default 3

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
	setD := func(p *time.Duration, v time.Duration) {
		if *p == 0 {
			*p = v
		}
	}
	if c.MeasurementPrefix == "" {
		c.MeasurementPrefix = "exw"
	}
	set(&c.BatchPoints, 5000)
	setD(&c.FlushInterval, time.Second)
	set(&c.MaxQueuedPoints, 100000)
	setD(&c.RequestTimeout, 10*time.Second)
	setD(&c.RetryInitial, 250*time.Millisecond)
	setD(&c.RetryMax, 30*time.Second)
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
	if err := c.TLS.Validate(); err != nil {
		return fmt.Errorf("influx: %w", err)
	}
	if c.TLS != nil && u.Scheme != "https" {
		return fmt.Errorf("influx: tls is set but url %q is not https: write https://host:port or remove tls", c.URL)
	}
	if !validName(c.MeasurementPrefix) {
		return fmt.Errorf("influx: measurement_prefix %q: use letters, digits and '_'", c.MeasurementPrefix)
	}
	pos := []struct {
		name string
		v    int
	}{{"batch_points", c.BatchPoints}, {"max_queued_points", c.MaxQueuedPoints}, {"direct_attempts", c.DirectAttempts}}
	for _, p := range pos {
		if p.v < 1 {
			return fmt.Errorf("influx: %s = %d: must be at least 1", p.name, p.v)
		}
	}
	durs := []struct {
		name string
		v    time.Duration
		min  time.Duration
	}{{"flush_interval", c.FlushInterval, time.Millisecond}, {"request_timeout", c.RequestTimeout, time.Second},
		{"retry_initial", c.RetryInitial, time.Millisecond}, {"retry_max", c.RetryMax, time.Millisecond}}
	for _, d := range durs {
		if d.v < d.min {
			return fmt.Errorf("influx: %s = %v: must be at least %v", d.name, d.v, d.min)
		}
	}
	if c.MaxQueuedPoints < c.BatchPoints {
		return fmt.Errorf("influx: max_queued_points %d is below batch_points %d: raise it", c.MaxQueuedPoints, c.BatchPoints)
	}
	if c.RetryMax < c.RetryInitial {
		return fmt.Errorf("influx: retry_max %v is below retry_initial %v: raise retry_max", c.RetryMax, c.RetryInitial)
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
