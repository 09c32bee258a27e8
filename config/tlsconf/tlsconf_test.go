package tlsconf_test

import (
	"crypto/tls"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/exergywatch/exergywatch/config/tlsconf"
	"github.com/exergywatch/exergywatch/config/tlsconf/tlsconftest"
)

func TestClientFiles(t *testing.T) {
	pki := tlsconftest.New(t, "tlsconf test CA")
	junk := filepath.Join(t.TempDir(), "junk.pem")
	if err := os.WriteFile(junk, []byte("not PEM\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	var none *tlsconf.Config
	if tc, err := none.Client(); tc != nil || err != nil {
		t.Errorf("nil config: %v %v, want nil, nil", tc, err)
	}
	bad := []struct {
		name string
		c    tlsconf.Config
		want string
	}{
		{"missing ca", tlsconf.Config{CAFile: junk + ".missing"}, "tls ca_file"},
		{"no certificate in ca", tlsconf.Config{CAFile: junk}, "holds no PEM certificate"},
		{"cert without key", tlsconf.Config{CertFile: pki.ClientCertFile}, "go together"},
		{"key without cert", tlsconf.Config{KeyFile: pki.ClientKeyFile}, "go together"},
		{"mismatched pair", tlsconf.Config{CertFile: pki.ClientCertFile, KeyFile: pki.ServerKeyFile}, "tls client certificate"},
	}
	for _, tc := range bad {
		if _, err := tc.c.Client(); !errors.Is(err, tlsconf.ErrTLS) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: err = %v, want ErrTLS containing %q", tc.name, err, tc.want)
		}
	}
	good := tlsconf.Config{CAFile: pki.CAFile, CertFile: pki.ClientCertFile, KeyFile: pki.ClientKeyFile, ServerName: "localhost"}
	tc, err := good.Client()
	if err != nil {
		t.Fatal(err)
	}
	if tc.MinVersion != tls.VersionTLS12 || tc.ServerName != "localhost" || len(tc.Certificates) != 1 || tc.RootCAs == nil || tc.InsecureSkipVerify {
		t.Errorf("client config %+v", tc)
	}
}

// A real handshake over loopback: the private CA verifies the server for the
// name given in server_name, a wrong name or another CA fails, and the
// server that requires a client certificate gets ours.
func TestHandshake(t *testing.T) {
	pki := tlsconftest.New(t, "tlsconf test CA")
	other := tlsconftest.New(t, "another CA")
	ln, err := tls.Listen("tcp", "127.0.0.1:0", pki.ServerTLS(true))
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	go func() {
		for {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			go func() {
				defer c.Close()
				_ = c.(*tls.Conn).Handshake()
				_, _ = c.Write([]byte("ok"))
			}()
		}
	}()
	dial := func(c tlsconf.Config) error {
		tc, err := c.Client()
		if err != nil {
			return err
		}
		conn, err := tls.Dial("tcp", ln.Addr().String(), tc)
		if err != nil {
			return err
		}
		defer conn.Close()
		b := make([]byte, 2)
		_, err = conn.Read(b)
		return err
	}
	client := tlsconf.Config{CAFile: pki.CAFile, CertFile: pki.ClientCertFile, KeyFile: pki.ClientKeyFile}
	if err := dial(client); err != nil {
		t.Errorf("trusted CA, IP name: %v", err)
	}
	named := client
	named.ServerName = "localhost"
	if err := dial(named); err != nil {
		t.Errorf("server_name localhost: %v", err)
	}
	wrong := client
	wrong.ServerName = "wrong.example"
	if err := dial(wrong); err == nil || !strings.Contains(err.Error(), "wrong.example") {
		t.Errorf("wrong server_name: %v", err)
	}
	untrusted := client
	untrusted.CAFile = other.CAFile
	if err := dial(untrusted); err == nil || !strings.Contains(err.Error(), "unknown authority") {
		t.Errorf("other CA: %v", err)
	}
}
