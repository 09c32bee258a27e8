// Package natsconn holds the NATS connection settings shared by the NATS
// source (ingest/natsrc) and the NATS sink (sinks/natsout), so that both
// sections of a configuration file speak one vocabulary:
//
//	urls: [tls://nats-1:4222, tls://nats-2:4222]
//	name: exergywatch
//	user: exergywatch            # with password
//	password: env:NATS_PASSWORD  # secrets: env:NAME or file:/path
//	token: file:/run/secrets/nats-token
//	nkey_seed_file: /var/lib/exergywatch/nats/user.nk
//	credentials_file: /var/lib/exergywatch/nats/exergywatch.creds
//	tls: {ca_file: ..., cert_file: ..., key_file: ..., server_name: ...}
//	reconnect_wait: 1s
//	reconnect_buffer_bytes: 8388608
//
// The NATS source (natsrc.Config) and sink (natsout.Config) embed Settings
// inline, so their keys and checks are the same by construction. Password
// and Token hold the secret itself once the configuration's secret
// references were resolved (config.ResolveSecrets); in the file they are
// written as "env:NAME" or "file:/path", and literal values are refused by
// the configuration checks. No error of this package quotes a secret.
//
// The package imports only nats.go, the standard library and config/tlsconf
// (standard library only), so config, natsrc and natsout can all import it.
package natsconn

import (
	"errors"
	"fmt"
	"net/url"
	"os"
	"strings"
	"time"

	"github.com/nats-io/nats.go"

	"github.com/exergywatch/exergywatch/config/tlsconf"
)

// ErrSettings is wrapped by every error of Validate and Options.
var ErrSettings = errors.New("invalid nats connection settings")

// TLSConfig names PEM files for TLS (keys ca_file, cert_file, key_file,
// server_name).
type TLSConfig = tlsconf.Config

// DefaultReconnectWait is the pause between reconnect attempts when
// ReconnectWait is zero.
const DefaultReconnectWait = time.Second

// Settings is how to reach and authenticate to a NATS server.
type Settings struct {
	// URLs of the servers of one cluster, e.g. nats://host:4222 or
	// tls://host:4222 (one list entry per server).
	URLs []string `yaml:"urls"`
	// Name is the connection name shown by the server (monitoring).
	Name string `yaml:"name"`

	// Authentication: at most one of user (+ password), token,
	// nkey_seed_file and credentials_file.
	User string `yaml:"user"`
	// Password of User; the secret after resolution (env:NAME or
	// file:/path in the file). Never logged.
	Password string `yaml:"password"`
	// Token is an authorisation token; the secret after resolution
	// (env:NAME or file:/path in the file). Never logged.
	Token string `yaml:"token"`
	// NKeySeedFile is a file holding an nkey user seed (SU...).
	NKeySeedFile string `yaml:"nkey_seed_file"`
	// CredentialsFile is a NATS credentials file (user JWT and nkey seed).
	CredentialsFile string `yaml:"credentials_file"`

	// TLS: a private CA, a client certificate, the server name. Setting it
	// requires TLS even for nats:// URLs.
	TLS *TLSConfig `yaml:"tls"`

	// ReconnectWait is the pause between reconnect attempts (a duration
	// such as 1s); default 1 s.
	ReconnectWait time.Duration `yaml:"reconnect_wait"`
	// ReconnectBufferBytes bounds what the client keeps to send while the
	// connection is down (bytes); 0 leaves the default to the user of the
	// settings (natsrc and natsout choose their own), -1 disables the
	// buffer.
	ReconnectBufferBytes int `yaml:"reconnect_buffer_bytes"`
}

// Defaults fills ReconnectWait when zero.
func (s *Settings) Defaults() {
	if s.ReconnectWait == 0 {
		s.ReconnectWait = DefaultReconnectWait
	}
}

// URL returns the server URLs as nats.Connect takes them (comma-separated).
func (s Settings) URL() string { return strings.Join(s.URLs, ",") }

// authMethods names the authentication methods set.
func (s Settings) authMethods() []string {
	var m []string
	if s.User != "" {
		m = append(m, "user")
	}
	if s.Token != "" {
		m = append(m, "token")
	}
	if s.NKeySeedFile != "" {
		m = append(m, "nkey_seed_file")
	}
	if s.CredentialsFile != "" {
		m = append(m, "credentials_file")
	}
	return m
}

// Validate checks the settings without reading any file; every message
// says how to fix the value and none quotes a secret.
func (s Settings) Validate() error {
	if len(s.URLs) == 0 {
		return fmt.Errorf("%w: urls is empty: list the servers, e.g. urls: [nats://127.0.0.1:4222]", ErrSettings)
	}
	for i, u := range s.URLs {
		u = strings.TrimSpace(u)
		switch {
		case u == "":
			return fmt.Errorf("%w: urls[%d] is empty: give a server URL such as nats://127.0.0.1:4222", ErrSettings, i)
		case strings.Contains(u, ","):
			return fmt.Errorf("%w: urls[%d] %q holds a comma: write one server per list entry, e.g. urls: [nats://a:4222, nats://b:4222]", ErrSettings, i, u)
		case strings.Contains(u, "://"):
			p, err := url.Parse(u)
			if err != nil || p.Host == "" {
				return fmt.Errorf("%w: urls[%d] %q is not a URL: write e.g. nats://127.0.0.1:4222", ErrSettings, i, redactURL(u))
			}
			switch p.Scheme {
			case "nats", "tls", "ws", "wss":
			default:
				return fmt.Errorf("%w: urls[%d]: scheme %q: use nats://, tls://, ws:// or wss://", ErrSettings, i, p.Scheme)
			}
			if p.User != nil {
				return fmt.Errorf("%w: urls[%d] carries credentials: remove them from the URL and use user and password (env:NAME) or token", ErrSettings, i)
			}
		}
	}
	if m := s.authMethods(); len(m) > 1 {
		return fmt.Errorf("%w: %s are set together: use one authentication method (user with password, token, nkey_seed_file or credentials_file) and remove the others",
			ErrSettings, strings.Join(m, " and "))
	}
	if s.Password != "" && s.User == "" {
		return fmt.Errorf("%w: password is set without user: add user or remove password", ErrSettings)
	}
	if s.ReconnectWait < 0 {
		return fmt.Errorf("%w: reconnect_wait %v is negative: use a duration such as 1s", ErrSettings, s.ReconnectWait)
	}
	if s.ReconnectBufferBytes < -1 {
		return fmt.Errorf("%w: reconnect_buffer_bytes %d: use a size in bytes, 0 for the default or -1 for none", ErrSettings, s.ReconnectBufferBytes)
	}
	if err := s.TLS.Validate(); err != nil {
		return fmt.Errorf("%w: %w", ErrSettings, err)
	}
	return nil
}

// redactURL drops a password from a URL for messages.
func redactURL(u string) string {
	if p, err := url.Parse(u); err == nil {
		return p.Redacted()
	}
	if i := strings.LastIndex(u, "@"); i >= 0 {
		return "[redacted]" + u[i:]
	}
	return u
}

// Options validates the settings, reads the files they name (CA,
// client certificate, nkey seed, credentials) and returns the nats.go
// options for the connection name, reconnect wait and buffer, TLS and
// authentication. The caller adds its own policy (MaxReconnects,
// RetryOnFailedConnect, handlers). A zero ReconnectWait means
// DefaultReconnectWait; a zero ReconnectBufferBytes leaves nats.go's
// default.
func (s Settings) Options() ([]nats.Option, error) {
	if err := s.Validate(); err != nil {
		return nil, err
	}
	wait := s.ReconnectWait
	if wait == 0 {
		wait = DefaultReconnectWait
	}
	opts := []nats.Option{nats.Name(s.Name), nats.ReconnectWait(wait)}
	if s.ReconnectBufferBytes != 0 {
		opts = append(opts, nats.ReconnectBufSize(s.ReconnectBufferBytes))
	}
	if s.TLS != nil {
		tc, err := s.TLS.Client()
		if err != nil {
			return nil, fmt.Errorf("%w: %w", ErrSettings, err)
		}
		opts = append(opts, nats.Secure(tc))
	}
	switch {
	case s.User != "":
		opts = append(opts, nats.UserInfo(s.User, s.Password))
	case s.Token != "":
		opts = append(opts, nats.Token(s.Token))
	case s.NKeySeedFile != "":
		o, err := nats.NkeyOptionFromSeed(s.NKeySeedFile)
		if err != nil {
			return nil, fmt.Errorf("%w: nkey_seed_file: %w (give a file holding a user seed, SU...)", ErrSettings, err)
		}
		opts = append(opts, o)
	case s.CredentialsFile != "":
		if _, err := os.Stat(s.CredentialsFile); err != nil {
			return nil, fmt.Errorf("%w: credentials_file: %w", ErrSettings, err)
		}
		opts = append(opts, nats.UserCredentials(s.CredentialsFile))
	}
	return opts, nil
}
