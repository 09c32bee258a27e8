package config

import (
	"bytes"
	"errors"
	"log/slog"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/config/natsconn"
	"github.com/exergywatch/exergywatch/sinks/store"
)

// sinkDoc is a minimal file with one sink section (indented as a list item
// of sinks) and the fan-out.
func sinkDoc(sink string) string {
	return "site: {name: a}\nfanout: {write_timeout: 45s}\nsinks:\n" + sink
}

const allSinks = `  - name: tsdb
    kind: influxdb
    influxdb:
      url: https://influx.example:8086
      bucket: b
      token: env:EXW_TEST_INFLUX_TOKEN
      tls: {ca_file: /etc/exw/ca.pem, server_name: influx.example}
      flush_interval: 250ms
      request_timeout: 15s
      retry_initial: 100ms
      retry_max: 1m
      spool_dir: /var/lib/exw/spool
  - name: bus
    kind: nats
    nats:
      urls: [tls://n1:4222, tls://n2:4222]
      name: exw-out
      user: exergywatch
      password: file:PWFILE
      tls: {ca_file: /etc/exw/nats-ca.pem, cert_file: /etc/exw/c.pem, key_file: /etc/exw/k.pem}
      reconnect_wait: 2s
      reconnect_buffer_bytes: 1048576
      jetstream: true
      publish_timeout: 3s
      retry_max: 500ms
      create_stream: true
      stream_max_age: 720h
  - name: history
    kind: store
    store: {path: /var/lib/exw/h.db, retention: 2160h, prune_interval: 5m, flush_interval: 100ms}
`

// Every sink key of the shared vocabulary decodes to the SI duration or
// the reference as written; secrets resolve from env: and file:.
func TestSinkKeys(t *testing.T) {
	pwFile := filepath.Join(t.TempDir(), "nats-password")
	if err := os.WriteFile(pwFile, []byte("pw-from-file-7c2\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	c, err := Parse("sinks.yaml", []byte(sinkDoc(strings.Replace(allSinks, "PWFILE", pwFile, 1))))
	if err != nil {
		t.Fatal(err)
	}
	in, nt, st := c.Sinks[0].InfluxDB, c.Sinks[1].NATS, c.Sinks[2].Store
	if in.Token != "env:EXW_TEST_INFLUX_TOKEN" || nt.Conn.Password != "file:"+pwFile {
		t.Errorf("before resolution: token %q, password %q, want the references", in.Token, nt.Conn.Password)
	}
	if in.TLS == nil || in.TLS.CAFile != "/etc/exw/ca.pem" || in.TLS.ServerName != "influx.example" {
		t.Errorf("influx tls %+v", in.TLS)
	}
	if in.FlushInterval != 250*time.Millisecond || in.RequestTimeout != 15*time.Second || in.RetryInitial != 100*time.Millisecond || in.RetryMax != time.Minute {
		t.Errorf("influx durations %v %v %v %v", in.FlushInterval, in.RequestTimeout, in.RetryInitial, in.RetryMax)
	}
	wantConn := natsconn.Settings{URLs: []string{"tls://n1:4222", "tls://n2:4222"}, Name: "exw-out", User: "exergywatch", Password: "file:" + pwFile,
		TLS:           &natsconn.TLSConfig{CAFile: "/etc/exw/nats-ca.pem", CertFile: "/etc/exw/c.pem", KeyFile: "/etc/exw/k.pem"},
		ReconnectWait: 2 * time.Second, ReconnectBufferBytes: 1 << 20}
	if !reflect.DeepEqual(nt.Conn, wantConn) {
		t.Errorf("nats connection\n got %+v\nwant %+v", nt.Conn, wantConn)
	}
	if nt.PublishTimeout != 3*time.Second || nt.RetryMax != 500*time.Millisecond || nt.StreamMaxAge != 720*time.Hour || !nt.JetStream || !nt.CreateStream {
		t.Errorf("nats sink %+v", nt)
	}
	if (*st != store.Config{Path: "/var/lib/exw/h.db", Retention: 2160 * time.Hour, PruneInterval: 5 * time.Minute, FlushInterval: 100 * time.Millisecond, BatchItems: 1000}) {
		t.Errorf("store %+v", *st)
	}
	if c.Fanout.WriteTimeout != 45*time.Second {
		t.Errorf("fanout write_timeout %v", c.Fanout.WriteTimeout)
	}

	t.Setenv("EXW_TEST_INFLUX_TOKEN", "tok-from-env-91d")
	if err := c.ResolveSecrets(); err != nil {
		t.Fatal(err)
	}
	if in.Token != "tok-from-env-91d" || nt.Conn.Password != "pw-from-file-7c2" {
		t.Errorf("resolved token %q, password %q", in.Token, nt.Conn.Password)
	}
}

// Defaults of the duration keys when they are left out (the values the doc
// comments name).
func TestSinkDurationDefaults(t *testing.T) {
	doc := sinkDoc("  - {kind: influxdb, influxdb: {url: http://h:8086, bucket: b, spool_dir: /s}}\n" +
		"  - {kind: nats, nats: {urls: [nats://h:4222]}}\n  - {kind: store, store: {path: /h.db}}\n")
	doc = strings.Replace(doc, "fanout: {write_timeout: 45s}\n", "", 1)
	c, err := Parse("d.yaml", []byte(doc))
	if err != nil {
		t.Fatal(err)
	}
	in, nt, st := c.Sinks[0].InfluxDB, c.Sinks[1].NATS, c.Sinks[2].Store
	got := []time.Duration{in.FlushInterval, in.RequestTimeout, in.RetryInitial, in.RetryMax,
		nt.Conn.ReconnectWait, nt.PublishTimeout, nt.RetryMax, nt.StreamMaxAge,
		st.Retention, st.PruneInterval, st.FlushInterval, c.Fanout.WriteTimeout}
	// The defaults of the earlier integer keys, unchanged (sinks/*: Defaults).
	want := []time.Duration{time.Second, 10 * time.Second, 250 * time.Millisecond, 30 * time.Second,
		time.Second, 5 * time.Second, 2 * time.Second, 168 * time.Hour,
		720 * time.Hour, 10 * time.Minute, 200 * time.Millisecond, 30 * time.Second}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("defaults\n got %v\nwant %v", got, want)
	}
	if nt.Conn.ReconnectBufferBytes != 8<<20 {
		t.Errorf("nats sink reconnect_buffer_bytes default %d, want 8 MiB", nt.Conn.ReconnectBufferBytes)
	}
}

// The keys of the earlier sink dialect are unknown now; the hint names the
// new key where it is a prefix or close.
func TestOldSinkKeysRefused(t *testing.T) {
	tests := []struct {
		sink, item, hint string
		line, col        int
	}{
		{"  - {kind: influxdb, influxdb: {url: http://h:8086, bucket: b, spool_dir: /s, token_env: T}}\n", "sinks[0].influxdb.token_env", `did you mean "token"? write token: env:`, 4, 79},
		{"  - {kind: influxdb, influxdb: {url: http://h:8086, bucket: b, spool_dir: /s, token_file: /t}}\n", "sinks[0].influxdb.token_file", `did you mean "token"?`, 4, 79},
		{"  - {kind: influxdb, influxdb: {url: http://h:8086, bucket: b, spool_dir: /s, flush_interval_ms: 100}}\n", "sinks[0].influxdb.flush_interval_ms", `did you mean "flush_interval"? write a duration`, 4, 79},
		{"  - {kind: influxdb, influxdb: {url: http://h:8086, bucket: b, spool_dir: /s, request_timeout_ms: 100}}\n", "sinks[0].influxdb.request_timeout_ms", `did you mean "request_timeout"?`, 4, 79},
		{"  - {kind: influxdb, influxdb: {url: http://h:8086, bucket: b, spool_dir: /s, retry_initial_ms: 100}}\n", "sinks[0].influxdb.retry_initial_ms", `did you mean "retry_initial"?`, 4, 79},
		{"  - {kind: influxdb, influxdb: {url: http://h:8086, bucket: b, spool_dir: /s, retry_max_ms: 100}}\n", "sinks[0].influxdb.retry_max_ms", `did you mean "retry_max"?`, 4, 79},
		{"  - {kind: nats, nats: {url: nats://h:4222}}\n", "sinks[0].nats.url", `did you mean "urls"?`, 4, 25},
		{"  - {kind: nats, nats: {urls: [nats://h:4222], creds_file: /c}}\n", "sinks[0].nats.creds_file", "credentials_file", 4, 48},
		{"  - {kind: nats, nats: {urls: [nats://h:4222], token_env: T}}\n", "sinks[0].nats.token_env", `did you mean "token"?`, 4, 48},
		{"  - {kind: nats, nats: {urls: [nats://h:4222], reconnect_wait_ms: 50}}\n", "sinks[0].nats.reconnect_wait_ms", `did you mean "reconnect_wait"?`, 4, 48},
		{"  - {kind: nats, nats: {urls: [nats://h:4222], publish_timeout_ms: 50}}\n", "sinks[0].nats.publish_timeout_ms", `did you mean "publish_timeout"?`, 4, 48},
		{"  - {kind: nats, nats: {urls: [nats://h:4222], retry_max_ms: 50}}\n", "sinks[0].nats.retry_max_ms", `did you mean "retry_max"?`, 4, 48},
		{"  - {kind: nats, nats: {urls: [nats://h:4222], stream_max_age_hours: 5}}\n", "sinks[0].nats.stream_max_age_hours", `did you mean "stream_max_age"?`, 4, 48},
		{"  - {kind: nats, nats: {urls: [nats://h:4222], reconnect_buf_bytes: 65536}}\n", "sinks[0].nats.reconnect_buf_bytes", "reconnect_buffer_bytes", 4, 48},
		{"  - {kind: store, store: {path: /h.db, retention_hours: 24}}\n", "sinks[0].store.retention_hours", `did you mean "retention"?`, 4, 40},
		{"  - {kind: store, store: {path: /h.db, prune_interval_s: 60}}\n", "sinks[0].store.prune_interval_s", `did you mean "prune_interval"?`, 4, 40},
		{"  - {kind: store, store: {path: /h.db, flush_interval_ms: 60}}\n", "sinks[0].store.flush_interval_ms", `did you mean "flush_interval"?`, 4, 40},
	}
	for _, tc := range tests {
		t.Run(tc.item, func(t *testing.T) {
			_, err := Parse("old.yaml", []byte(sinkDoc(tc.sink)))
			var ps Problems
			if !errors.As(err, &ps) || len(ps) != 1 {
				t.Fatalf("err = %v, want one problem", err)
			}
			p := ps[0]
			if p.Item != tc.item || p.Line != tc.line || p.Col != tc.col || !strings.Contains(p.Msg, "unknown key") || !strings.Contains(p.Hint, tc.hint) {
				t.Errorf("got %v (line %d col %d), want %s at %d:%d, unknown key, hint containing %q", p, p.Line, p.Col, tc.item, tc.line, tc.col, tc.hint)
			}
		})
	}
	// the old fan-out key too
	_, err := Parse("old.yaml", []byte("site: {name: a}\nfanout: {write_timeout_ms: 100}\n"))
	if err == nil || !strings.Contains(err.Error(), `old.yaml:2:10: fanout.write_timeout_ms: unknown key "write_timeout_ms" (fix: did you mean "write_timeout"?`) {
		t.Errorf("fanout write_timeout_ms: %v", err)
	}
}

// A duration written without a unit, or negative, is refused where it is
// written.
func TestSinkDurationsNeedUnits(t *testing.T) {
	tests := []struct{ sink, want string }{
		{"  - {kind: store, store: {path: /h.db, retention: 720}}\n", `old.yaml:4:51: sinks[0].store.retention: "720" is not a duration (fix: write a number with a unit`},
		{"  - {kind: store, store: {path: /h.db, retention: 30d}}\n", `old.yaml:4:51: sinks[0].store.retention: "30d" is not a duration`},
		{"  - {kind: nats, nats: {urls: [nats://h:4222], publish_timeout: -1s}}\n", `old.yaml:4:65: sinks[0].nats.publish_timeout: duration "-1s" is negative`},
		{"  - {kind: influxdb, influxdb: {url: http://h:8086, bucket: b, spool_dir: /s, flush_interval: 0}}\n", `old.yaml:4:95: sinks[0].influxdb.flush_interval: "0" is not a duration`},
	}
	for _, tc := range tests {
		_, err := Parse("old.yaml", []byte(sinkDoc(tc.sink)))
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: err = %v, want %q", strings.TrimSpace(tc.sink), err, tc.want)
		}
	}
}

// Literal secrets in sink sections are refused at file:line:col of the
// value, and the message does not repeat the value.
func TestSinkLiteralSecretRefused(t *testing.T) {
	tests := []struct{ sink, want string }{
		{"  - kind: influxdb\n    influxdb:\n      url: http://h:8086\n      bucket: b\n      spool_dir: /s\n      token: hunter2-influx\n",
			"lit.yaml:9:14: sinks[0].influxdb.token: secrets are not written in the file (fix: write env:VARIABLE_NAME or file:/path/to/secret)"},
		{"  - kind: nats\n    nats:\n      urls: [nats://h:4222]\n      user: exw\n      password: hunter2-nats\n",
			"lit.yaml:8:17: sinks[0].nats.password: secrets are not written in the file"},
		{"  - kind: nats\n    nats:\n      urls: [nats://h:4222]\n      token: hunter2-tok\n",
			"lit.yaml:7:14: sinks[0].nats.token: secrets are not written in the file"},
	}
	for _, tc := range tests {
		_, err := Parse("lit.yaml", []byte(sinkDoc(tc.sink)))
		if err == nil || !errors.Is(err, ErrInvalid) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("err = %v, want %q", err, tc.want)
			continue
		}
		if strings.Contains(err.Error(), "hunter2") {
			t.Errorf("the message repeats the secret: %v", err)
		}
	}
}

// Sink secrets resolve from env: and file:; a missing one is ErrSecret
// naming the sink and key; the errors, logged, carry none of the secrets
// (also not the one resolved before the failure).
func TestResolveSinkSecrets(t *testing.T) {
	dir := t.TempDir()
	tokFile := filepath.Join(dir, "nats-token")
	if err := os.WriteFile(tokFile, []byte("nats-tok-from-file-3b8\r\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	doc := sinkDoc("  - {name: tsdb, kind: influxdb, influxdb: {url: http://h:8086, bucket: b, spool_dir: /s, token: env:EXW_TEST_SINK_TOKEN}}\n" +
		"  - {name: bus, kind: nats, nats: {urls: [nats://h:4222], token: file:" + tokFile + "}}\n")
	t.Setenv("EXW_TEST_SINK_TOKEN", "influx-tok-from-env-e41")
	c, err := Parse("s.yaml", []byte(doc))
	if err != nil {
		t.Fatal(err)
	}
	if err := c.ResolveSecrets(); err != nil {
		t.Fatal(err)
	}
	if c.Sinks[0].InfluxDB.Token != "influx-tok-from-env-e41" || c.Sinks[1].NATS.Conn.Token != "nats-tok-from-file-3b8" {
		t.Errorf("resolved %q and %q", c.Sinks[0].InfluxDB.Token, c.Sinks[1].NATS.Conn.Token)
	}
	// A second resolution of the same file with one secret missing.
	var logs bytes.Buffer
	lg := slog.New(slog.NewTextHandler(&logs, nil))
	for _, tc := range []struct{ unset, want string }{
		{"env", "sink tsdb: influxdb.token: secret not available: environment variable EXW_TEST_SINK_TOKEN is not set"},
		{"file", "sink bus: nats.token: secret not available: read secret:"},
	} {
		c2, err := Parse("s.yaml", []byte(doc))
		if err != nil {
			t.Fatal(err)
		}
		if tc.unset == "env" {
			os.Unsetenv("EXW_TEST_SINK_TOKEN")
		} else {
			t.Setenv("EXW_TEST_SINK_TOKEN", "influx-tok-from-env-e41")
			c2.Sinks[1].NATS.Conn.Token = "file:" + filepath.Join(dir, "missing")
		}
		err = c2.ResolveSecrets()
		if !errors.Is(err, ErrSecret) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s missing: err = %v, want ErrSecret with %q", tc.unset, err, tc.want)
		}
		lg.Error("secrets", "err", err)
	}
	for _, secret := range []string{"nats-tok-from-file-3b8", "influx-tok-from-env-e41"} {
		if strings.Contains(logs.String(), secret) {
			t.Errorf("a resolved secret reached the log:\n%s", logs.String())
		}
	}
	// natsout refuses user with token, also when both come from references.
	bad := sinkDoc("  - {kind: nats, nats: {urls: [nats://h:4222], user: u, token: env:X}}\n")
	if _, err := Parse("s.yaml", []byte(bad)); err == nil || !strings.Contains(err.Error(), "use one authentication method") {
		t.Errorf("user with token: %v", err)
	}
}
