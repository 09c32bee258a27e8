package influx

import (
	"context"
	"io"
	"log"
	"net/http/httptest"
	"net/http/httputil"
	"net/url"
	"strings"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/config/tlsconf"
	"github.com/exergywatch/exergywatch/config/tlsconf/tlsconftest"
	"github.com/exergywatch/exergywatch/sinks/vmtest"
)

// tlsProxy puts an HTTPS listener with a certificate of pki's CA in front
// of the real server at target; with clientAuth it requires a client
// certificate of that CA.
func tlsProxy(t *testing.T, target string, pki *tlsconftest.PKI, clientAuth bool) string {
	t.Helper()
	u, err := url.Parse(target)
	if err != nil {
		t.Fatal(err)
	}
	srv := httptest.NewUnstartedServer(httputil.NewSingleHostReverseProxy(u))
	srv.TLS = pki.ServerTLS(clientAuth)
	srv.Config.ErrorLog = log.New(io.Discard, "", 0) // refused handshakes are expected
	srv.StartTLS()
	t.Cleanup(srv.Close)
	return srv.URL
}

// waitStats polls the sink until cond holds or 10 s pass.
func waitStats(t *testing.T, s *Sink, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(10 * time.Second)
	for !cond() && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond)
	}
	if !cond() {
		t.Fatalf("%s: stats %+v", what, s.Stats())
	}
}

// TestVMTLS writes to a real VictoriaMetrics behind an HTTPS proxy whose
// certificate comes from a private CA. Trusting another CA, the handshake
// is refused: a configuration error that says to set tls.ca_file, the
// points wait in the spool (none dropped). Reopened on the same spool with
// the right ca_file, the spool is replayed and every point lands (read
// back). A server that requires a client certificate refuses the sink
// without one (kept in the spool again) and accepts it with
// tls.cert_file/key_file. The proxy is Go's net/http/httputil; the numbers
// are synthetic records ("common practice, no source", see testRecord).
func TestVMTLS(t *testing.T) {
	vm := vmtest.StartServer(t)
	pki := tlsconftest.New(t, "exergywatch influx test CA")
	other := tlsconftest.New(t, "some other CA")
	httpsURL := tlsProxy(t, vm.URL, pki, false)
	if !strings.HasPrefix(httpsURL, "https://127.0.0.1:") {
		t.Fatalf("proxy URL %s", httpsURL)
	}
	ctx := context.Background()
	want := map[string][]sample{}
	k := 0
	write := func(s *Sink, n int) {
		t.Helper()
		for end := k + n; k < end; k++ {
			r := testRecord(2, k)
			if err := s.WriteRecord(ctx, r); err != nil {
				t.Fatal(err)
			}
			expectRecord(want, r)
		}
	}
	spool := t.TempDir()

	// 1. The server's CA is not trusted.
	cfg := testConfig(httpsURL, spool)
	cfg.TLS = &tlsconf.Config{CAFile: other.CAFile}
	s, err := New("vm-tls", cfg, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	write(s, 30)
	waitStats(t, s, "untrusted server: points spooled", func() bool { return s.Stats().SpooledItems > 0 })
	st := s.Stats()
	if st.Dropped != 0 || st.Written != 0 {
		t.Errorf("untrusted server: stats %+v, want nothing dropped or written", st)
	}
	if !strings.Contains(st.LastError, "certificate signed by unknown authority") || !strings.Contains(st.LastError, "tls.ca_file") {
		t.Errorf("last error %q: want the TLS reason and the key to fix", st.LastError)
	}
	if got := classify(probeWrite(t, s)); got != classConfig {
		t.Errorf("refused certificate classified %d, want classConfig", got)
	}
	cctx, cancel := context.WithTimeout(ctx, 5*time.Second)
	if err := s.Close(cctx); err != nil {
		t.Fatal(err)
	}
	cancel()

	// 2. Fixed: the right CA; the spool is replayed, new points follow.
	cfg.TLS = &tlsconf.Config{CAFile: pki.CAFile}
	s, err = New("vm-tls", cfg, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Ping(ctx); err != nil {
		t.Fatalf("ping over TLS: %v", err)
	}
	write(s, 30)
	flushAll(t, s, 20*time.Second)
	if st := s.Stats(); st.Dropped != 0 || st.SpooledItems != 0 {
		t.Errorf("trusted server: stats %+v", st)
	}
	if err := s.Close(ctx); err != nil {
		t.Fatal(err)
	}

	// 3. Mutual TLS: refused without a client certificate, accepted with.
	mtlsURL := tlsProxy(t, vm.URL, pki, true)
	cfg = testConfig(mtlsURL, t.TempDir())
	cfg.TLS = &tlsconf.Config{CAFile: pki.CAFile}
	s, err = New("vm-mtls", cfg, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	write(s, 10)
	waitStats(t, s, "no client certificate: points spooled", func() bool { return s.Stats().SpooledItems > 0 })
	// With TLS 1.3 the client's handshake ends before the server checks
	// for a certificate; the refusal arrives as an alert or as a closed
	// connection, whichever the client reads first, so it may count as
	// retryable. Either way the points wait in the spool.
	if st := s.Stats(); st.Dropped != 0 || st.LastError == "" {
		t.Errorf("no client certificate: stats %+v, want spooled, none dropped, an error", st)
	}
	cctx, cancel = context.WithTimeout(ctx, 5*time.Second)
	if err := s.Close(cctx); err != nil {
		t.Fatal(err)
	}
	cancel()
	cfg.TLS = &tlsconf.Config{CAFile: pki.CAFile, CertFile: pki.ClientCertFile, KeyFile: pki.ClientKeyFile}
	s, err = New("vm-mtls", cfg, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	write(s, 10)
	flushAll(t, s, 20*time.Second)
	if err := s.Close(ctx); err != nil {
		t.Fatal(err)
	}

	vm.ForceFlush(t)
	compareExport(t, vm.Export(t, `{__name__=~"exw_.*"}`), want)
}

// probeWrite makes one write through the sink's client and returns its error:
// the writer keeps only the text of the last error.
func probeWrite(t *testing.T, s *Sink) error {
	t.Helper()
	return s.writeOnce([]byte("exw_probe v=1 1\n"))
}
