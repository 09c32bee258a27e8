// Package tlsconf holds the TLS client settings shared by the connections
// exergywatch opens (NATS source and sink, InfluxDB sink): PEM files for a
// private certificate authority and for a client certificate (mutual TLS),
// and the server name to verify. The YAML keys are
//
//	tls: {ca_file: ..., cert_file: ..., key_file: ..., server_name: ...}
//
// It imports only the standard library, so every section package may use it
// without import cycles.
package tlsconf

import (
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"os"
)

// ErrTLS is wrapped by every error of this package.
var ErrTLS = errors.New("invalid tls settings")

// Config names PEM files for a TLS client.
type Config struct {
	// CAFile is a PEM file of the certificate authorities that sign the
	// server's certificate (a private CA); empty: the system roots.
	CAFile string `yaml:"ca_file"`
	// CertFile and KeyFile are the client certificate and its key (PEM),
	// for servers that require mutual TLS; both or neither.
	CertFile string `yaml:"cert_file"`
	KeyFile  string `yaml:"key_file"`
	// ServerName is the name checked against the server's certificate;
	// empty: the host of the URL.
	ServerName string `yaml:"server_name"`
}

// Validate checks the settings without reading the files.
func (c *Config) Validate() error {
	if c == nil {
		return nil
	}
	if (c.CertFile == "") != (c.KeyFile == "") {
		return fmt.Errorf("%w: tls cert_file and key_file go together: set both (mutual TLS) or neither", ErrTLS)
	}
	return nil
}

// Client reads the files and returns the client TLS configuration (TLS 1.2
// or later, the server's certificate always verified). A nil Config gives
// nil.
func (c *Config) Client() (*tls.Config, error) {
	if c == nil {
		return nil, nil
	}
	if err := c.Validate(); err != nil {
		return nil, err
	}
	tc := &tls.Config{ServerName: c.ServerName, MinVersion: tls.VersionTLS12}
	if c.CAFile != "" {
		pem, err := os.ReadFile(c.CAFile)
		if err != nil {
			return nil, fmt.Errorf("%w: tls ca_file: %w", ErrTLS, err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pem) {
			return nil, fmt.Errorf("%w: tls ca_file %s holds no PEM certificate: give the CA certificate in PEM form", ErrTLS, c.CAFile)
		}
		tc.RootCAs = pool
	}
	if c.CertFile != "" {
		cert, err := tls.LoadX509KeyPair(c.CertFile, c.KeyFile)
		if err != nil {
			return nil, fmt.Errorf("%w: tls client certificate (cert_file, key_file): %w", ErrTLS, err)
		}
		tc.Certificates = []tls.Certificate{cert}
	}
	return tc, nil
}
