package config

import (
	"crypto/rand"
	"crypto/rsa"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"errors"
	"math/big"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// serverCertDER makes a self-signed certificate standing in for an OPC UA
// server's application instance certificate.
func serverCertDER(t *testing.T) ([]byte, *rsa.PrivateKey) {
	t.Helper()
	key, err := rsa.GenerateKey(rand.Reader, 2048)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{SerialNumber: big.NewInt(7), Subject: pkix.Name{CommonName: "gateway"},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour)}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	return der, key
}

// opcuaDoc is a whole configuration with one OPC UA source; extra lines
// are appended to its opcua: section (6 spaces deep), starting at line 9.
func opcuaDoc(mode string, extra ...string) string {
	policy := "Basic256Sha256"
	if mode == "None" {
		policy = "None"
	}
	return "site: {name: a}\n" + // 1
		"sources:\n" + // 2
		"  - kind: opcua\n" + // 3
		"    opcua:\n" + // 4
		"      endpoint: opc.tcp://gw.invalid:4840\n" + // 5
		"      security_policy: " + policy + "\n" + // 6
		"      security_mode: " + mode + "\n" + // 7
		"      items: [{node_id: \"ns=2;s=PT1\"}]\n" + // 8
		strings.Join(extra, "\n") + "\n"
}

func TestOPCUATrustKeys(t *testing.T) {
	der, key := serverCertDER(t)
	dir := t.TempDir()
	certFile := filepath.Join(dir, "gateway.der")
	if err := os.WriteFile(certFile, der, 0o600); err != nil {
		t.Fatal(err)
	}
	keyFile := filepath.Join(dir, "gateway-key.pem")
	keyPEM := pem.EncodeToMemory(&pem.Block{Type: "RSA PRIVATE KEY", Bytes: x509.MarshalPKCS1PrivateKey(key)})
	if err := os.WriteFile(keyFile, keyPEM, 0o600); err != nil {
		t.Fatal(err)
	}
	missing := filepath.Join(dir, "nothing-here.der")
	okDir := t.TempDir()
	for name, data := range map[string][]byte{"gateway.pem": pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), "README": []byte("certificates here")} {
		if err := os.WriteFile(filepath.Join(okDir, name), data, 0o600); err != nil {
			t.Fatal(err)
		}
	}

	cases := []struct {
		name      string
		doc       string
		line, col int // 0: the problem has no position to check
		item      string
		msg       string // "" = valid
	}{
		{"trusted file", opcuaDoc("SignAndEncrypt", "      trusted_server_certificates: ["+certFile+"]"), 0, 0, "", ""},
		{"trusted directory", opcuaDoc("Sign", "      trusted_server_certificates:", "        - "+okDir), 0, 0, "", ""},
		{"directory holding a key", opcuaDoc("Sign", "      trusted_server_certificates:", "        - "+dir),
			10, 11, "sources[0].opcua.trusted_server_certificates[0]", "private key"}, // gateway-key.pem
		{"accept any", opcuaDoc("SignAndEncrypt", "      accept_any_server_certificate: true"), 0, 0, "", ""},
		{"None without keys", opcuaDoc("None"), 0, 0, "", ""},
		{"missing file", opcuaDoc("SignAndEncrypt", "      trusted_server_certificates:", "        - "+certFile, "        - "+missing),
			11, 11, "sources[0].opcua.trusted_server_certificates[1]", "no such file"},
		{"missing file, flow list", opcuaDoc("SignAndEncrypt", "      trusted_server_certificates: ["+missing+"]"),
			9, 37, "sources[0].opcua.trusted_server_certificates[0]", "nothing-here.der"},
		{"private key file", opcuaDoc("SignAndEncrypt", "      trusted_server_certificates: ["+keyFile+"]"),
			9, 37, "sources[0].opcua.trusted_server_certificates[0]", "a trust list needs only certificates"},
		{"unknown key", opcuaDoc("SignAndEncrypt", "      trusted_server_certificate: ["+certFile+"]"),
			9, 7, "sources[0].opcua.trusted_server_certificate", `did you mean "trusted_server_certificates"`},
		{"not a list", opcuaDoc("SignAndEncrypt", "      trusted_server_certificates: "+certFile),
			9, 36, "sources[0].opcua.trusted_server_certificates", "expected a list"},
		{"secure without trust", opcuaDoc("SignAndEncrypt"),
			7, 22, "sources[0].opcua.security_mode", "needs trusted_server_certificates"},
		{"both", opcuaDoc("SignAndEncrypt", "      trusted_server_certificates: ["+certFile+"]", "      accept_any_server_certificate: true"),
			10, 38, "sources[0].opcua.accept_any_server_certificate", "choose one"},
		{"trust list with None", opcuaDoc("None", "      trusted_server_certificates: ["+certFile+"]"),
			9, 7, "sources[0].opcua.trusted_server_certificates", "not authenticated"},
		{"accept any with None", opcuaDoc("None", "      accept_any_server_certificate: true"),
			9, 38, "sources[0].opcua.accept_any_server_certificate", "no server certificate to accept"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			cfg, err := Parse("plant.yaml", []byte(c.doc))
			if c.msg == "" {
				if err != nil {
					t.Fatalf("%v\n%s", err, c.doc)
				}
				if cfg.Sources[0].OPCUA == nil {
					t.Fatal("no opcua section")
				}
				return
			}
			var ps Problems
			if !errors.As(err, &ps) || !errors.Is(err, ErrInvalid) {
				t.Fatalf("err %v, want Problems", err)
			}
			var p *Problem
			for _, q := range ps {
				if strings.Contains(q.Error(), c.msg) {
					p = q
				}
			}
			if p == nil {
				t.Fatalf("no problem containing %q in %v\n%s", c.msg, err, c.doc)
			}
			if c.line != 0 && (p.Line != c.line || p.Col != c.col || p.Item != c.item) {
				t.Errorf("got %s (line %d col %d item %q), want line %d col %d item %q", p.Error(), p.Line, p.Col, p.Item, c.line, c.col, c.item)
			}
			if len(ps) != 1 {
				t.Errorf("%d problems, want one: %v", len(ps), err)
			}
		})
	}
}

// TestOPCUATrustRelativePath: a relative entry is taken from the
// configuration file's directory and handed on resolved.
func TestOPCUATrustRelativePath(t *testing.T) {
	der, _ := serverCertDER(t)
	dir := t.TempDir()
	if err := os.MkdirAll(filepath.Join(dir, "opcua-trusted"), 0o700); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "opcua-trusted", "gw.der"), der, 0o600); err != nil {
		t.Fatal(err)
	}
	file := filepath.Join(dir, "plant.yaml")
	if err := os.WriteFile(file, []byte(opcuaDoc("SignAndEncrypt", "      trusted_server_certificates: [opcua-trusted]")), 0o600); err != nil {
		t.Fatal(err)
	}
	cfg, err := Load(file)
	if err != nil {
		t.Fatal(err)
	}
	if got, want := cfg.Sources[0].OPCUA.TrustedServerCertificates[0], filepath.Join(dir, "opcua-trusted"); got != want {
		t.Fatalf("entry %q, want %q", got, want)
	}
	// The same text read from another directory does not find it.
	other := filepath.Join(t.TempDir(), "plant.yaml")
	data, _ := os.ReadFile(file)
	if err := os.WriteFile(other, data, 0o600); err != nil {
		t.Fatal(err)
	}
	if _, err := Load(other); err == nil || !strings.Contains(err.Error(), "plant.yaml:9:37: sources[0].opcua.trusted_server_certificates[0]") {
		t.Fatalf("err %v, want the entry's position", err)
	}
}

func TestNodeAt(t *testing.T) {
	doc := []byte("a:\n  b: [x, {c: 1}]\n  d:\n    - e: &anchor\n        f: 2\n    - *anchor\n")
	cases := []struct {
		item      string
		line, col int // 0: not found
	}{
		{"a", 1, 1},
		{"a.b", 2, 3},
		{"a.b[0]", 2, 7},
		{"a.b[1].c", 2, 14},
		{"a.d[0].e.f", 5, 12},
		{"a.d[1].f", 5, 12}, // through the alias
		{"a.b[2]", 0, 0},
		{"a.x", 0, 0},
		{"a.b[-1]", 0, 0},
		{"a.b[z]", 0, 0},
		{"a.b]", 0, 0},
		{"a.b[0].c", 0, 0},
		{"", 0, 0},
	}
	for _, c := range cases {
		n := nodeAt(doc, c.item)
		switch {
		case c.line == 0 && n != nil:
			t.Errorf("%q: found line %d, want nothing", c.item, n.Line)
		case c.line != 0 && (n == nil || n.Line != c.line || n.Column != c.col):
			t.Errorf("%q: got %+v, want %d:%d", c.item, n, c.line, c.col)
		}
	}
	if nodeAt([]byte(":\n\t- ["), "a") != nil {
		t.Error("broken YAML gave a node")
	}
}

func FuzzNodeAt(f *testing.F) {
	f.Add("a:\n  b: [x, {c: 1}]\n", "a.b[1].c")
	f.Add("a: &x {b: 1}\nc: *x\n", "c.b")
	f.Add("- 1\n- 2\n", "[1]")
	f.Add("", "")
	f.Fuzz(func(t *testing.T, doc, item string) {
		_ = nodeAt([]byte(doc), item)
	})
}
