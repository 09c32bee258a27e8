package config

import (
	"fmt"
)

// SinkSecret is one credential field of a sink section.
type SinkSecret struct {
	Item  string  // key under the sink, e.g. "influxdb.token", "nats.password"
	Value *string // the field: a reference (env:NAME, file:/path) until ResolveSecrets, then the secret
}

// SecretFields lists the credential fields of the sink: the InfluxDB token,
// the NATS password and token. They are written in the file as "env:NAME"
// or "file:/path" like those of the sources.
func (s *Sink) SecretFields() []SinkSecret {
	var out []SinkSecret
	if s.InfluxDB != nil {
		out = append(out, SinkSecret{"influxdb.token", &s.InfluxDB.Token})
	}
	if s.NATS != nil {
		out = append(out, SinkSecret{"nats.password", &s.NATS.Conn.Password}, SinkSecret{"nats.token", &s.NATS.Conn.Token})
	}
	return out
}

// resolveSinkSecrets resolves the references of every sink's credential
// fields.
func (c *Config) resolveSinkSecrets() error {
	for i := range c.Sinks {
		s := &c.Sinks[i]
		for _, f := range s.SecretFields() {
			if *f.Value == "" {
				continue
			}
			sec := Secret{Source: *f.Value}
			if err := sec.Resolve(); err != nil {
				return fmt.Errorf("sink %s: %s: %w: %w", s.Name, f.Item, ErrSecret, err)
			}
			*f.Value = sec.Value()
		}
	}
	return nil
}

// checkSinkSecrets refuses literal credentials in sink sections, placed at
// the value in the file.
func (cfg *Config) checkSinkSecrets(c *checker, item string, s *Sink) {
	for _, f := range s.SecretFields() {
		if *f.Value != "" && !isSecretRef(*f.Value) {
			cfg.addNode(c, item+"."+f.Item, "secrets are not written in the file", "write env:VARIABLE_NAME or file:/path/to/secret")
		}
	}
}
