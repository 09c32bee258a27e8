package natsconn

import (
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nkeys"
	"gopkg.in/yaml.v3"

	"github.com/exergywatch/exergywatch/config/tlsconf"
)

func TestDecodeYAML(t *testing.T) {
	doc := "urls: [tls://a:4222, tls://b:4222]\nname: exw\nuser: u\npassword: p\nreconnect_wait: 250ms\nreconnect_buffer_bytes: 65536\ntls: {ca_file: /ca.pem, server_name: nats.example}\n"
	var s Settings
	if err := yaml.Unmarshal([]byte(doc), &s); err != nil {
		t.Fatal(err)
	}
	want := Settings{URLs: []string{"tls://a:4222", "tls://b:4222"}, Name: "exw", User: "u", Password: "p", ReconnectWait: 250 * time.Millisecond,
		ReconnectBufferBytes: 65536, TLS: &TLSConfig{CAFile: "/ca.pem", ServerName: "nats.example"}}
	if !reflect.DeepEqual(s, want) {
		t.Fatalf("decoded %+v, want %+v", s, want)
	}
	if s.URL() != "tls://a:4222,tls://b:4222" {
		t.Errorf("URL() = %q", s.URL())
	}
}

func TestValidate(t *testing.T) {
	u := []string{"nats://127.0.0.1:4222"}
	tests := []struct {
		name string
		s    Settings
		want string // "" = valid
	}{
		{"minimal", Settings{URLs: u}, ""},
		{"host without scheme", Settings{URLs: []string{"127.0.0.1:4222"}}, ""},
		{"user and password", Settings{URLs: u, User: "a", Password: "pw-SECRET-4"}, ""},
		{"no urls", Settings{}, "urls is empty"},
		{"empty url", Settings{URLs: []string{" "}}, "urls[0] is empty"},
		{"comma list in one entry", Settings{URLs: []string{"nats://a:1,nats://b:1"}}, "one server per list entry"},
		{"bad scheme", Settings{URLs: []string{"http://a:4222"}}, "use nats://, tls://"},
		{"credentials in url", Settings{URLs: []string{"nats://u:hunter2@a:4222"}}, "carries credentials"},
		{"user and token", Settings{URLs: u, User: "a", Token: "tok-SECRET-1"}, "user and token are set together"},
		{"token and creds", Settings{URLs: u, Token: "tok-SECRET-2", CredentialsFile: "/c"}, "token and credentials_file"},
		{"nkey and creds", Settings{URLs: u, NKeySeedFile: "/n", CredentialsFile: "/c"}, "use one authentication method"},
		{"password without user", Settings{URLs: u, Password: "pw-SECRET-3"}, "password is set without user"},
		{"negative wait", Settings{URLs: u, ReconnectWait: -time.Second}, "reconnect_wait"},
		{"bad buffer", Settings{URLs: u, ReconnectBufferBytes: -2}, "reconnect_buffer_bytes"},
		{"cert without key", Settings{URLs: u, TLS: &TLSConfig{CertFile: "/c"}}, "cert_file and key_file go together"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			err := tc.s.Validate()
			if tc.want == "" {
				if err != nil {
					t.Fatal(err)
				}
				return
			}
			if err == nil || !errors.Is(err, ErrSettings) || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("err = %v, want ErrSettings containing %q", err, tc.want)
			}
			for _, secret := range []string{"hunter2", tc.s.Password, tc.s.Token} {
				if secret != "" && strings.Contains(err.Error(), secret) {
					t.Errorf("error quotes a secret: %v", err)
				}
			}
		})
	}
}

func TestOptionsFileErrors(t *testing.T) {
	dir := t.TempDir()
	junk := filepath.Join(dir, "junk")
	if err := os.WriteFile(junk, []byte("no seed, no certificate\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	u := []string{"nats://127.0.0.1:4222"}
	tests := []struct {
		name string
		s    Settings
		want string
	}{
		{"missing nkey seed", Settings{URLs: u, NKeySeedFile: filepath.Join(dir, "none.nk")}, "nkey_seed_file"},
		{"nkey file without seed", Settings{URLs: u, NKeySeedFile: junk}, "nkey_seed_file"},
		{"missing credentials", Settings{URLs: u, CredentialsFile: filepath.Join(dir, "none.creds")}, "credentials_file"},
		{"missing ca", Settings{URLs: u, TLS: &TLSConfig{CAFile: filepath.Join(dir, "none.pem")}}, "tls ca_file"},
		{"ca without certificate", Settings{URLs: u, TLS: &TLSConfig{CAFile: junk}}, "holds no PEM certificate"},
		{"bad client pair", Settings{URLs: u, TLS: &TLSConfig{CertFile: junk, KeyFile: junk}}, "tls client certificate"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := tc.s.Options()
			if err == nil || !errors.Is(err, ErrSettings) || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("err = %v, want ErrSettings containing %q", err, tc.want)
			}
		})
	}
	_, err := Settings{URLs: u, TLS: &TLSConfig{CAFile: junk}}.Options()
	if !errors.Is(err, tlsconf.ErrTLS) {
		t.Errorf("TLS error does not wrap tlsconf.ErrTLS: %v", err)
	}
}

// The nkey seed file authenticates against a real nats-server that knows
// the public key; a token server refuses a connection without the token.
func TestConnectNKeyAndToken(t *testing.T) {
	kp, err := nkeys.CreateUser()
	if err != nil {
		t.Fatal(err)
	}
	pub, _ := kp.PublicKey()
	seed, _ := kp.Seed()
	seedFile := filepath.Join(t.TempDir(), "user.nk")
	if err := os.WriteFile(seedFile, seed, 0o600); err != nil {
		t.Fatal(err)
	}
	start := func(o *server.Options) string {
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
		return srv.ClientURL()
	}
	connect := func(s Settings) error {
		opts, err := s.Options()
		if err != nil {
			return err
		}
		nc, err := nats.Connect(s.URL(), opts...)
		if err != nil {
			return err
		}
		defer nc.Close()
		return nc.Flush()
	}
	nkURL := start(&server.Options{Nkeys: []*server.NkeyUser{{Nkey: pub}}})
	if err := connect(Settings{URLs: []string{nkURL}, NKeySeedFile: seedFile}); err != nil {
		t.Errorf("nkey: %v", err)
	}
	tokURL := start(&server.Options{Authorization: "tok-5e1"})
	if err := connect(Settings{URLs: []string{tokURL}, Token: "tok-5e1"}); err != nil {
		t.Errorf("token: %v", err)
	}
	if err := connect(Settings{URLs: []string{tokURL}, Token: "wrong"}); err == nil || !strings.Contains(strings.ToLower(err.Error()), "authorization") {
		t.Errorf("wrong token: %v, want an authorization violation", err)
	}
}
