package natsrc

import (
	"context"
	"crypto/rand"
	"crypto/rsa"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// natsServer is a real embedded nats-server that a test can stop and
// restart on the same port and store directory.
type natsServer struct {
	t    testing.TB
	opts *server.Options
	s    *server.Server
}

func baseOpts(t testing.TB, js bool) *server.Options {
	o := &server.Options{Host: "127.0.0.1", Port: -1, NoLog: true, NoSigs: true}
	if js {
		o.JetStream = true
		o.StoreDir = t.TempDir()
	}
	return o
}

func startNATS(t testing.TB, o *server.Options) *natsServer {
	t.Helper()
	n := &natsServer{t: t, opts: o}
	n.start()
	// Fix the port so that a restart comes back where clients reconnect.
	n.opts.Port = n.s.Addr().(*net.TCPAddr).Port
	t.Cleanup(n.stop)
	return n
}

func (n *natsServer) start() {
	n.t.Helper()
	s, err := server.NewServer(n.opts)
	if err != nil {
		n.t.Fatalf("nats-server: %v", err)
	}
	go s.Start()
	if !s.ReadyForConnections(10 * time.Second) {
		n.t.Fatal("nats-server not ready")
	}
	n.s = s
}

func (n *natsServer) stop() {
	if n.s != nil {
		n.s.Shutdown()
		n.s.WaitForShutdown()
		n.s = nil
	}
}

func (n *natsServer) restart() {
	n.stop()
	n.start()
}

func (n *natsServer) url() string {
	scheme := "nats"
	return scheme + "://" + net.JoinHostPort("127.0.0.1", itoa(n.opts.Port))
}

func itoa(i int) string {
	return big.NewInt(int64(i)).String()
}

// testCA writes a CA and a server certificate for 127.0.0.1 and returns
// the CA file and the server TLS config.
func testCA(t testing.TB) (string, *tls.Config) {
	t.Helper()
	dir := t.TempDir()
	caKey, err := rsa.GenerateKey(rand.Reader, 2048)
	if err != nil {
		t.Fatal(err)
	}
	caTmpl := &x509.Certificate{SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "exergywatch test CA"},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour), IsCA: true,
		KeyUsage: x509.KeyUsageCertSign | x509.KeyUsageDigitalSignature, BasicConstraintsValid: true}
	caDER, err := x509.CreateCertificate(rand.Reader, caTmpl, caTmpl, &caKey.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	caCert, _ := x509.ParseCertificate(caDER)
	srvKey, err := rsa.GenerateKey(rand.Reader, 2048)
	if err != nil {
		t.Fatal(err)
	}
	srvTmpl := &x509.Certificate{SerialNumber: big.NewInt(2), Subject: pkix.Name{CommonName: "127.0.0.1"},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour), IPAddresses: []net.IP{net.ParseIP("127.0.0.1")},
		KeyUsage: x509.KeyUsageDigitalSignature | x509.KeyUsageKeyEncipherment, ExtKeyUsage: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}}
	srvDER, err := x509.CreateCertificate(rand.Reader, srvTmpl, caCert, &srvKey.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	caFile := filepath.Join(dir, "ca.pem")
	if err := os.WriteFile(caFile, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: caDER}), 0o600); err != nil {
		t.Fatal(err)
	}
	cert := tls.Certificate{Certificate: [][]byte{srvDER}, PrivateKey: srvKey}
	return caFile, &tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12}
}

// jetStreamWith starts an embedded server with JetStream and a stream
// named name on subject (memory storage), and returns the server, a
// connection (closed at the end of the test) and its JetStream context.
func jetStreamWith(t testing.TB, name, subject string) (*natsServer, *nats.Conn, jetstream.JetStream) {
	t.Helper()
	ns := startNATS(t, baseOpts(t, true))
	nc, err := nats.Connect(ns.url())
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	if _, err := js.CreateStream(ctx, jetstream.StreamConfig{Name: name, Subjects: []string{subject}}); err != nil {
		t.Fatal(err)
	}
	return ns, nc, js
}
