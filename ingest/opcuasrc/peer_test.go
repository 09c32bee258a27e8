package opcuasrc

import (
	"bufio"
	"context"
	"crypto/x509"
	"encoding/pem"
	"errors"
	"fmt"
	"io"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
	"github.com/gopcua/opcua/ua"
)

// peerDir holds the node-opcua peer server (testdata/opcua-peer).
var peerDir = filepath.Join("..", "..", "testdata", "opcua-peer")

// requirePeer skips (loudly) when the node-opcua peer is not installed, and
// fails instead under CI=true, so that a missing install never passes as a
// skipped test. Install: cd testdata/opcua-peer && npm ci.
func requirePeer(t *testing.T) {
	t.Helper()
	var missing string
	if _, err := exec.LookPath("node"); err != nil {
		missing = "node (Node.js) is not on PATH"
	} else if _, err := os.Stat(filepath.Join(peerDir, "node_modules", "node-opcua", "package.json")); err != nil {
		missing = "node-opcua is not installed in testdata/opcua-peer (run: cd testdata/opcua-peer && npm ci)"
	}
	if missing == "" {
		return
	}
	msg := "!!! OPC UA security/authentication tests NOT RUN: " + missing + " !!!"
	if os.Getenv("CI") == "true" {
		t.Fatal(msg)
	}
	fmt.Fprintln(os.Stderr, msg)
	t.Skip(msg)
}

type peer struct {
	endpoint string
	// cert is the file the peer wrote its own certificate to (DER), the
	// client's trust list in these tests.
	cert  string
	cmd   *exec.Cmd
	stdin io.WriteCloser
	done  chan error
}

const peerUser, peerPassword = "ew", "ew-secret"

// startPeer starts testdata/opcua-peer/server.js on a free port and waits
// for its READY line; the test cleanup stops it.
func startPeer(t *testing.T) *peer {
	t.Helper()
	requirePeer(t)
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	port := l.Addr().(*net.TCPAddr).Port
	l.Close()
	cmd := exec.Command("node", "server.js")
	cmd.Dir = peerDir
	pki := t.TempDir()
	cmd.Env = append(os.Environ(), fmt.Sprintf("PEER_PORT=%d", port), "PEER_PKI="+pki,
		"PEER_USER="+peerUser, "PEER_PASSWORD="+peerPassword)
	stdin, err := cmd.StdinPipe()
	if err != nil {
		t.Fatal(err)
	}
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	var stderr strings.Builder
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	p := &peer{cmd: cmd, stdin: stdin, done: make(chan error, 1)}
	ready := make(chan string, 1)
	go func() {
		sc := bufio.NewScanner(stdout)
		for sc.Scan() {
			if line := sc.Text(); strings.HasPrefix(line, "READY ") {
				ready <- strings.TrimPrefix(line, "READY ")
			}
		}
		p.done <- cmd.Wait()
	}()
	t.Cleanup(func() {
		_ = stdin.Close()
		_ = cmd.Process.Signal(syscall.SIGTERM)
		select {
		case <-p.done:
		case <-time.After(10 * time.Second):
			_ = cmd.Process.Kill()
			<-p.done
		}
	})
	select {
	case <-ready:
		// Connect by address: the advertised host name may not resolve.
		p.endpoint = fmt.Sprintf("opc.tcp://127.0.0.1:%d/exergywatch", port)
		p.cert = filepath.Join(pki, "server_certificate.der")
	case err := <-p.done:
		t.Fatalf("node-opcua peer exited: %v\n%s", err, stderr.String())
	case <-time.After(60 * time.Second):
		t.Fatalf("node-opcua peer not ready after 60 s\n%s", stderr.String())
	}
	return p
}

// TestPeerSecurity runs against node-opcua 2.182.2 (an independent OPC UA
// stack that, unlike gopcua's server, checks identities). The client
// trusts the peer's certificate from the file the peer wrote, and refuses
// the peer when only another certificate is trusted.
func TestPeerSecurity(t *testing.T) {
	p := startPeer(t)
	item := []ItemConfig{{NodeID: "ns=1;s=Turbine1.PT101", Tag: "pt101", SamplingInterval: 100 * time.Millisecond}}
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	// The peer's own certificate, read from the file it wrote, is the
	// whole trust list: every secure connection below is checked.
	trust := []string{p.cert}

	t.Run("untrusted peer refused", func(t *testing.T) {
		// A trust list with some other server's certificate: refused with
		// the peer's thumbprints, which are those of the file it wrote.
		other, _, err := SelfSigned("urn:elsewhere:server", []string{"localhost"})
		if err != nil {
			t.Fatal(err)
		}
		otherFile := filepath.Join(t.TempDir(), "other.der")
		if err := os.WriteFile(otherFile, other, 0o600); err != nil {
			t.Fatal(err)
		}
		_, err = Connect(ctx, Config{Endpoint: p.endpoint, SecurityPolicy: "Basic256Sha256", SecurityMode: "SignAndEncrypt",
			Auth: "username", User: peerUser, Password: peerPassword, TrustedServerCertificates: []string{otherFile}}, nil, nil, nil)
		der, rerr := os.ReadFile(p.cert)
		if rerr != nil {
			t.Fatal(rerr)
		}
		s1, s256 := Thumbprints(der)
		var ue *UntrustedServerError
		if !errors.As(err, &ue) || ue.Reason != NotInTrustList || !strings.Contains(err.Error(), s1) || !strings.Contains(err.Error(), s256) {
			t.Fatalf("got %v, want ErrUntrustedServer with SHA-1 %s and SHA-256 %s", err, s1, s256)
		}
	})

	for _, mode := range []string{"SignAndEncrypt", "Sign"} {
		t.Run("Basic256Sha256 "+mode+" username subscribes", func(t *testing.T) {
			q := ingest.NewQueue(256, nil)
			src, err := New(Config{Endpoint: p.endpoint, SecurityPolicy: "Basic256Sha256", SecurityMode: mode, Auth: "username",
				User: peerUser, Password: peerPassword, TrustedServerCertificates: trust, PublishingInterval: 100 * time.Millisecond, ReconnectWait: 200 * time.Millisecond,
				Items: item}, q, nil, quietLog(), nil)
			if err != nil {
				t.Fatal(err)
			}
			k, stopSink := drain(q)
			defer stopSink()
			rctx, rcancel := context.WithCancel(ctx)
			done := make(chan error, 1)
			go func() { done <- src.Run(rctx) }()
			defer func() { rcancel(); <-done }()
			// The peer's PT101 counts up by 1 every 100 ms from 100: two
			// different good values prove a live subscription.
			first := waitSample(t, k, "pt101", 30*time.Second, nil, func(s ingest.Sample) bool { return s.Tag == "pt101" && s.Quality == ingest.Good })
			waitSample(t, k, "a changed pt101", 10*time.Second, nil, func(s ingest.Sample) bool { return s.Tag == "pt101" && s.Value > first.Value })
			if first.SourceTime.IsZero() || !first.HasStatus || first.StatusCode != 0 {
				t.Fatalf("timestamp/status missing: %+v", first)
			}
			// The certificate accepted is the one in the peer's file.
			der, err := os.ReadFile(p.cert)
			if err != nil {
				t.Fatal(err)
			}
			if _, want := Thumbprints(der); src.TrustStatus().ServerSHA256 != want {
				t.Fatalf("accepted server certificate %s, want the peer's %s", src.TrustStatus().ServerSHA256, want)
			}
		})
	}

	t.Run("certificate identity subscribes", func(t *testing.T) {
		// X509 identity token signed with the client's key (OPC UA Part 4,
		// 7.36.5); the peer trusts unknown certificates (test PKI).
		der, key, err := SelfSigned("urn:exergywatch:client", []string{"localhost"})
		if err != nil {
			t.Fatal(err)
		}
		dir := t.TempDir()
		certFile, keyFile := filepath.Join(dir, "cert.pem"), filepath.Join(dir, "key.pem")
		if err := os.WriteFile(certFile, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o600); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(keyFile, pem.EncodeToMemory(&pem.Block{Type: "RSA PRIVATE KEY", Bytes: x509.MarshalPKCS1PrivateKey(key)}), 0o600); err != nil {
			t.Fatal(err)
		}
		c, err := Connect(ctx, Config{Endpoint: p.endpoint, SecurityPolicy: "Basic256Sha256", SecurityMode: "SignAndEncrypt",
			Auth: "certificate", CertFile: certFile, KeyFile: keyFile, TrustedServerCertificates: trust}, nil, nil, nil)
		if err != nil {
			t.Fatalf("certificate identity: %v", err)
		}
		cctx, ccancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer ccancel()
		_ = c.Close(cctx)
	})

	t.Run("absolute deadband", func(t *testing.T) {
		// PT101 rises by 1 every 100 ms; with an absolute deadband of 2.5 a
		// server that applies the DataChangeFilter (OPC UA Part 4, 7.22.2)
		// reports only changes above 2.5 (the rule itself; no table).
		q := ingest.NewQueue(256, nil)
		src, err := New(Config{Endpoint: p.endpoint, SecurityPolicy: "Basic256Sha256", SecurityMode: "SignAndEncrypt", Auth: "username",
			User: peerUser, Password: peerPassword, TrustedServerCertificates: trust, PublishingInterval: 100 * time.Millisecond,
			Items: []ItemConfig{{NodeID: "ns=1;s=Turbine1.PT101", Tag: "pt101", SamplingInterval: 100 * time.Millisecond, QueueSize: 20, Deadband: 2.5}}},
			q, nil, quietLog(), nil)
		if err != nil {
			t.Fatal(err)
		}
		k, stopSink := drain(q)
		defer stopSink()
		rctx, rcancel := context.WithCancel(ctx)
		done := make(chan error, 1)
		go func() { done <- src.Run(rctx) }()
		defer func() { rcancel(); <-done }()
		first := waitSample(t, k, "pt101", 30*time.Second, nil, func(s ingest.Sample) bool { return s.Tag == "pt101" })
		waitSample(t, k, "several changes", 15*time.Second, nil, func(s ingest.Sample) bool { return s.Value >= first.Value+10 })
		k.mu.Lock()
		defer k.mu.Unlock()
		var vals []float64
		for _, s := range k.samples {
			if s.Tag == "pt101" && s.Quality == ingest.Good {
				vals = append(vals, s.Value)
			}
		}
		for i := 1; i < len(vals); i++ {
			if d := vals[i] - vals[i-1]; d <= 2.5 {
				t.Fatalf("change %g -> %g (%g) passed a 2.5 deadband; values %v", vals[i-1], vals[i], d, vals)
			}
		}
	})

	t.Run("wrong password refused", func(t *testing.T) {
		_, err := Connect(ctx, Config{Endpoint: p.endpoint, SecurityPolicy: "Basic256Sha256", SecurityMode: "SignAndEncrypt",
			Auth: "username", User: peerUser, Password: "wrong", TrustedServerCertificates: trust}, nil, nil, nil)
		if !errors.Is(err, ua.StatusBadUserAccessDenied) {
			t.Fatalf("got %v, want BadUserAccessDenied", err)
		}
	})

	t.Run("anonymous refused on secure-only endpoint", func(t *testing.T) {
		_, err := Connect(ctx, Config{Endpoint: p.endpoint, SecurityPolicy: "Basic256Sha256", SecurityMode: "SignAndEncrypt",
			TrustedServerCertificates: trust}, nil, nil, nil)
		// OPC UA Part 4, 5.6.3 ActivateSession: a token type the endpoint
		// does not offer is Bad_IdentityTokenInvalid (or _Rejected).
		if !errors.Is(err, ua.StatusBadIdentityTokenInvalid) && !errors.Is(err, ua.StatusBadIdentityTokenRejected) {
			t.Fatalf("anonymous session: got %v, want BadIdentityTokenInvalid/Rejected", err)
		}
		t.Logf("anonymous refused with %v", err)
		// And there is no unsecured endpoint to fall back to.
		_, err = Connect(ctx, Config{Endpoint: p.endpoint}, nil, nil, nil)
		if !errors.Is(err, ErrNoEndpoint) {
			t.Fatalf("None/None: got %v, want ErrNoEndpoint", err)
		}
	})
}
