package config

import (
	"fmt"
	"os"
	"strings"
	"time"

	"github.com/exergywatch/exergywatch/config/units"
	"gopkg.in/yaml.v3"
)

func nodeProblem(n *yaml.Node, msg, hint string) *Problem {
	return &Problem{Line: n.Line, Col: n.Column, Msg: msg, Hint: hint}
}

// Duration is a time span written as "5s", "2m", "1h30m".
type Duration time.Duration

// UnmarshalYAML implements yaml.Unmarshaler.
func (d *Duration) UnmarshalYAML(n *yaml.Node) error {
	if n.Kind != yaml.ScalarNode {
		return nodeProblem(n, "expected a duration such as 5s or 2m", "")
	}
	v, err := time.ParseDuration(strings.TrimSpace(n.Value))
	if err != nil {
		return nodeProblem(n, fmt.Sprintf("%q is not a duration", n.Value), "write a number with a unit: ms, s, m or h, e.g. 5s")
	}
	if v < 0 {
		return nodeProblem(n, fmt.Sprintf("duration %q is negative", n.Value), "use a positive duration")
	}
	*d = Duration(v)
	return nil
}

// D returns the value as a time.Duration.
func (d Duration) D() time.Duration { return time.Duration(d) }

// MarshalYAML writes the duration back as text.
func (d Duration) MarshalYAML() (any, error) { return time.Duration(d).String(), nil }

// quantity is a physical value written with a unit ("298.15K", "101.325kPa");
// a bare number is SI. The kind fixes which units are accepted.
type quantity struct {
	si   float64
	set  bool
	kind units.Kind
}

func (q *quantity) decode(n *yaml.Node) error {
	if n.Kind != yaml.ScalarNode {
		return nodeProblem(n, fmt.Sprintf("expected a %s such as 1.5%s", q.kind, q.kind.SIUnit()), "")
	}
	v, err := units.Parse(n.Value, q.kind)
	if err != nil {
		return nodeProblem(n, err.Error(), fmt.Sprintf("write a number with a %s unit, e.g. %s", q.kind, strings.Join(units.Names(q.kind), ", ")))
	}
	q.si, q.set = v, true
	return nil
}

// Temperature is an absolute temperature in config, stored in K.
type Temperature struct{ K float64 }

// UnmarshalYAML implements yaml.Unmarshaler.
func (t *Temperature) UnmarshalYAML(n *yaml.Node) error {
	q := quantity{kind: units.Temperature}
	if err := q.decode(n); err != nil {
		return err
	}
	if q.si <= 0 {
		return nodeProblem(n, fmt.Sprintf("temperature %q is at or below absolute zero", n.Value), "temperatures without a unit are kelvin; write e.g. 25degC")
	}
	t.K = q.si
	return nil
}

// Pressure is an absolute pressure in config, stored in Pa.
type Pressure struct{ Pa float64 }

// UnmarshalYAML implements yaml.Unmarshaler.
func (p *Pressure) UnmarshalYAML(n *yaml.Node) error {
	q := quantity{kind: units.Pressure}
	if err := q.decode(n); err != nil {
		return err
	}
	if q.si <= 0 {
		return nodeProblem(n, fmt.Sprintf("pressure %q is not positive", n.Value), "give an absolute pressure, e.g. 101.325kPa")
	}
	p.Pa = q.si
	return nil
}

// Secret is a credential. In the file it is written as "env:NAME" (read
// from an environment variable) or "file:/path" (read from a file, trailing
// newline removed); a literal value is refused so secrets never sit in the
// config. It never prints its value.
type Secret struct {
	Source string // "env:NAME" or "file:/path", as written
	value  string
}

// UnmarshalYAML implements yaml.Unmarshaler. It only records the source;
// Resolve reads it.
func (s *Secret) UnmarshalYAML(n *yaml.Node) error {
	if n.Kind != yaml.ScalarNode {
		return nodeProblem(n, "expected env:NAME or file:/path", "")
	}
	v := strings.TrimSpace(n.Value)
	if !strings.HasPrefix(v, "env:") && !strings.HasPrefix(v, "file:") {
		return nodeProblem(n, "secrets are not written in the file", "write env:VARIABLE_NAME or file:/path/to/secret")
	}
	s.Source = v
	return nil
}

// Resolve reads the secret from its source.
func (s *Secret) Resolve() error {
	switch {
	case s.Source == "":
		return nil
	case strings.HasPrefix(s.Source, "env:"):
		name := strings.TrimPrefix(s.Source, "env:")
		v, ok := os.LookupEnv(name)
		if !ok {
			return fmt.Errorf("environment variable %s is not set", name)
		}
		s.value = v
	case strings.HasPrefix(s.Source, "file:"):
		b, err := os.ReadFile(strings.TrimPrefix(s.Source, "file:"))
		if err != nil {
			return fmt.Errorf("read secret: %w", err)
		}
		s.value = strings.TrimRight(string(b), "\r\n")
	}
	return nil
}

// Value returns the resolved secret.
func (s Secret) Value() string { return s.value }

// String never shows the value.
func (s Secret) String() string {
	if s.Source == "" {
		return ""
	}
	return s.Source + " [redacted]"
}

// LogValue keeps the secret out of slog output.
func (s Secret) LogValue() string { return s.String() }

// Value is a physical value written with a unit whose kind is only known
// after the whole file is read (e.g. a running-condition limit whose kind
// follows its signal). It keeps its position for error messages.
type Value struct {
	Text      string
	Line, Col int
}

// UnmarshalYAML implements yaml.Unmarshaler.
func (v *Value) UnmarshalYAML(n *yaml.Node) error {
	if n.Kind != yaml.ScalarNode {
		return nodeProblem(n, "expected a value with a unit, e.g. 10kg/s", "")
	}
	v.Text, v.Line, v.Col = strings.TrimSpace(n.Value), n.Line, n.Column
	return nil
}

// IsSet reports whether the value was given.
func (v Value) IsSet() bool { return v.Text != "" }

// SI parses the value as kind k.
func (v Value) SI(k units.Kind) (float64, error) {
	return units.Parse(v.Text, k)
}
