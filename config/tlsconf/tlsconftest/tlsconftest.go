// Package tlsconftest makes a throw-away private certificate authority for
// tests: a CA, a server certificate for 127.0.0.1 and localhost, and a
// client certificate for mutual TLS, written as PEM files in a test's
// temporary directory. Keys are ECDSA P-256 (fast to generate); the
// certificates are valid from one hour ago to one hour ahead.
package tlsconftest

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
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
)

// PKI is one generated authority with its server and client certificates.
type PKI struct {
	CAFile         string // PEM of the CA certificate
	ServerCertFile string // PEM of the server certificate (127.0.0.1, localhost)
	ServerKeyFile  string
	ClientCertFile string // PEM of the client certificate (client auth)
	ClientKeyFile  string

	CAPool *x509.CertPool
	Server tls.Certificate
}

// ServerTLS returns a server configuration presenting the server
// certificate; with clientAuth it also requires a client certificate signed
// by the CA.
func (p *PKI) ServerTLS(clientAuth bool) *tls.Config {
	c := &tls.Config{Certificates: []tls.Certificate{p.Server}, MinVersion: tls.VersionTLS12}
	if clientAuth {
		c.ClientAuth = tls.RequireAndVerifyClientCert
		c.ClientCAs = p.CAPool
	}
	return c
}

// New generates an authority named name and its certificates in a fresh
// temporary directory of t.
func New(t testing.TB, name string) *PKI {
	t.Helper()
	dir := t.TempDir()
	now := time.Now()
	key := func() *ecdsa.PrivateKey {
		k, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
		if err != nil {
			t.Fatal(err)
		}
		return k
	}
	write := func(file, typ string, der []byte) string {
		path := filepath.Join(dir, file)
		if err := os.WriteFile(path, pem.EncodeToMemory(&pem.Block{Type: typ, Bytes: der}), 0o600); err != nil {
			t.Fatal(err)
		}
		return path
	}
	caKey := key()
	caTmpl := &x509.Certificate{SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: name},
		NotBefore: now.Add(-time.Hour), NotAfter: now.Add(time.Hour), IsCA: true, BasicConstraintsValid: true,
		KeyUsage: x509.KeyUsageCertSign | x509.KeyUsageDigitalSignature}
	caDER, err := x509.CreateCertificate(rand.Reader, caTmpl, caTmpl, &caKey.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	caCert, err := x509.ParseCertificate(caDER)
	if err != nil {
		t.Fatal(err)
	}
	p := &PKI{CAFile: write("ca.pem", "CERTIFICATE", caDER), CAPool: x509.NewCertPool()}
	p.CAPool.AddCert(caCert)

	leaf := func(serial int64, cn string, usage x509.ExtKeyUsage, server bool) ([]byte, *ecdsa.PrivateKey) {
		k := key()
		tmpl := &x509.Certificate{SerialNumber: big.NewInt(serial), Subject: pkix.Name{CommonName: cn},
			NotBefore: now.Add(-time.Hour), NotAfter: now.Add(time.Hour),
			KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{usage}}
		if server {
			tmpl.IPAddresses = []net.IP{net.ParseIP("127.0.0.1")}
			tmpl.DNSNames = []string{"localhost"}
		}
		der, err := x509.CreateCertificate(rand.Reader, tmpl, caCert, &k.PublicKey, caKey)
		if err != nil {
			t.Fatal(err)
		}
		return der, k
	}
	keyDER := func(k *ecdsa.PrivateKey) []byte {
		b, err := x509.MarshalECPrivateKey(k)
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	srvDER, srvKey := leaf(2, "127.0.0.1", x509.ExtKeyUsageServerAuth, true)
	p.ServerCertFile = write("server.pem", "CERTIFICATE", srvDER)
	p.ServerKeyFile = write("server-key.pem", "EC PRIVATE KEY", keyDER(srvKey))
	p.Server = tls.Certificate{Certificate: [][]byte{srvDER}, PrivateKey: srvKey}
	cliDER, cliKey := leaf(3, "exergywatch", x509.ExtKeyUsageClientAuth, false)
	p.ClientCertFile = write("client.pem", "CERTIFICATE", cliDER)
	p.ClientKeyFile = write("client-key.pem", "EC PRIVATE KEY", keyDER(cliKey))
	return p
}
