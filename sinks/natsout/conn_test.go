package natsout

import (
	"bytes"
	"context"
	"log/slog"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"

	"github.com/exergywatch/exergywatch/config/natsconn"
	"github.com/exergywatch/exergywatch/config/tlsconf/tlsconftest"
)

// syncBuf is a log sink shared by nats.go's callback goroutine and the test.
type syncBuf struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (w *syncBuf) Write(p []byte) (int, error) {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.b.Write(p)
}

func (w *syncBuf) String() string {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.b.String()
}

// startServerOpts runs a real embedded nats-server (no JetStream) with the
// given options on a random loopback port.
func startServerOpts(t *testing.T, o *server.Options) (*server.Server, string) {
	t.Helper()
	o.Host, o.Port, o.NoLog, o.NoSigs = "127.0.0.1", -1, true, true
	srv, err := server.NewServer(o)
	if err != nil {
		t.Fatal(err)
	}
	go srv.Start()
	if !srv.ReadyForConnections(10 * time.Second) {
		t.Fatal("nats-server not ready")
	}
	t.Cleanup(func() { srv.Shutdown(); srv.WaitForShutdown() })
	return srv, srv.ClientURL()
}

// TestConnectAuthTLS publishes through a real nats-server that asks for a
// password, a token or TLS with a private CA (also with client
// certificates), using the connection keys shared with the NATS source. A
// subscriber connects with the same settings and must receive the record.
// Refused credentials and an untrusted server certificate end up in
// Stats().LastError with the server's or the TLS library's reason (compared
// in lower case), and the
// secrets appear neither there nor in the log.
func TestConnectAuthTLS(t *testing.T) {
	const password, token = "pw-9f3a-secret", "tok-77c1-secret"
	pki := tlsconftest.New(t, "exergywatch sink test CA")
	other := tlsconftest.New(t, "some other CA")
	tests := []struct {
		name     string
		server   func(*server.Options)
		conn     func(*natsconn.Settings)
		tlsURL   bool   // the URL scheme is tls://
		wantFail string // substring of LastError when the connection must fail
	}{
		{"user password", func(o *server.Options) { o.Username, o.Password = "exw", password },
			func(c *natsconn.Settings) { c.User, c.Password = "exw", password }, false, ""},
		{"wrong password", func(o *server.Options) { o.Username, o.Password = "exw", password },
			func(c *natsconn.Settings) { c.User, c.Password = "exw", "not-"+password }, false, "authorization violation"},
		{"token", func(o *server.Options) { o.Authorization = token },
			func(c *natsconn.Settings) { c.Token = token }, false, ""},
		{"tls private ca", func(o *server.Options) { o.TLSConfig, o.TLS = pki.ServerTLS(false), true },
			func(c *natsconn.Settings) { c.TLS = &natsconn.TLSConfig{CAFile: pki.CAFile} }, true, ""},
		{"tls private ca and password", func(o *server.Options) {
			o.TLSConfig, o.TLS = pki.ServerTLS(false), true
			o.Username, o.Password = "exw", password
		}, func(c *natsconn.Settings) {
			c.TLS = &natsconn.TLSConfig{CAFile: pki.CAFile}
			c.User, c.Password = "exw", password
		}, true, ""},
		{"mutual tls", func(o *server.Options) { o.TLSConfig, o.TLS, o.TLSVerify = pki.ServerTLS(true), true, true },
			func(c *natsconn.Settings) {
				c.TLS = &natsconn.TLSConfig{CAFile: pki.CAFile, CertFile: pki.ClientCertFile, KeyFile: pki.ClientKeyFile}
			}, true, ""},
		{"tls unknown ca", func(o *server.Options) { o.TLSConfig, o.TLS = pki.ServerTLS(false), true },
			func(c *natsconn.Settings) { c.TLS = &natsconn.TLSConfig{CAFile: other.CAFile} }, true, "certificate signed by unknown authority"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			o := &server.Options{}
			tc.server(o)
			_, url := startServerOpts(t, o)
			if tc.tlsURL {
				url = strings.Replace(url, "nats://", "tls://", 1)
			}
			cs := natsconn.Settings{URLs: []string{url}, ReconnectWait: 20 * time.Millisecond}
			tc.conn(&cs)
			logs := &syncBuf{}
			s, err := New("bus", Config{Conn: cs}, slog.New(slog.NewTextHandler(logs, &slog.HandlerOptions{Level: slog.LevelDebug})))
			if err != nil {
				t.Fatal(err)
			}
			defer s.Close(context.Background())
			defer func() {
				all := logs.String() + s.Stats().LastError
				if strings.Contains(all, password) || strings.Contains(all, token) {
					t.Errorf("a secret leaked into the log or LastError:\n%s", all)
				}
			}()
			if tc.wantFail != "" {
				deadline := time.Now().Add(10 * time.Second)
				failed := func() bool { return strings.Contains(strings.ToLower(s.Stats().LastError), tc.wantFail) }
				for !failed() && time.Now().Before(deadline) {
					time.Sleep(20 * time.Millisecond)
				}
				if le := s.Stats().LastError; !failed() {
					t.Fatalf("LastError %q, want it to contain %q", le, tc.wantFail)
				}
				if s.nc.IsConnected() {
					t.Fatal("connected although the server must refuse")
				}
				return
			}
			// The subscriber uses the same settings.
			subCS := cs
			subCS.Name = "test-subscriber"
			opts, err := subCS.Options()
			if err != nil {
				t.Fatal(err)
			}
			sub, err := nats.Connect(subCS.URL(), opts...)
			if err != nil {
				t.Fatal(err)
			}
			defer sub.Close()
			ch := make(chan *nats.Msg, 64)
			if _, err := sub.ChanSubscribe("exergywatch.>", ch); err != nil {
				t.Fatal(err)
			}
			if err := sub.Flush(); err != nil {
				t.Fatal(err)
			}
			deadline := time.Now().Add(10 * time.Second)
			for !s.nc.IsConnected() && time.Now().Before(deadline) {
				time.Sleep(10 * time.Millisecond)
			}
			if !s.nc.IsConnected() {
				t.Fatalf("sink not connected: %s", s.Stats().LastError)
			}
			if err := s.WriteRecord(context.Background(), rec(1)); err != nil {
				t.Fatal(err)
			}
			select {
			case m := <-ch:
				if m.Subject != RecordSubject("exergywatch", "north plant", "hp.1") {
					t.Errorf("subject %s", m.Subject)
				}
			case <-time.After(10 * time.Second):
				t.Fatalf("record not received; sink stats %+v", s.Stats())
			}
		})
	}
}

// A CA file that cannot be read or holds no certificate is refused by New
// with the key named, before any connection.
func TestNewTLSFileErrors(t *testing.T) {
	pki := tlsconftest.New(t, "exergywatch sink test CA")
	for _, tc := range []struct {
		name string
		tls  natsconn.TLSConfig
		want string
	}{
		{"missing ca", natsconn.TLSConfig{CAFile: pki.CAFile + ".missing"}, "tls ca_file"},
		{"key is not a CA", natsconn.TLSConfig{CAFile: pki.ClientKeyFile}, "holds no PEM certificate"},
		{"cert without key", natsconn.TLSConfig{CertFile: pki.ClientCertFile}, "cert_file and key_file go together"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			c := tc.tls
			s, err := New("bus", Config{Conn: natsconn.Settings{URLs: []string{"tls://127.0.0.1:1"}, TLS: &c}}, quiet)
			if err == nil {
				s.Close(context.Background())
				t.Fatal("accepted")
			}
			if !strings.Contains(err.Error(), tc.want) {
				t.Errorf("err = %v, want %q", err, tc.want)
			}
		})
	}
}
