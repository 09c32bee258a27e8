package config

import (
	"errors"
	"strings"
	"testing"
)

type tInner struct {
	Tag  string `yaml:"tag"`
	Unit string `yaml:"unit"`
}

type tOuter struct {
	Name     string            `yaml:"name"`
	Interval Duration          `yaml:"interval"`
	T0       Temperature       `yaml:"t0"`
	Items    []tInner          `yaml:"items"`
	ByName   map[string]tInner `yaml:"by_name"`
	Token    Secret            `yaml:"token"`
	Count    int               `yaml:"count"`
}

func TestDecodeStrictPositions(t *testing.T) {
	cases := []struct {
		name, doc string
		line, col int
		item      string
		msg       string
	}{
		{"unknown key", "name: a\nitems:\n  - tag: x\n    unti: MPa\n", 4, 5, "items[0].unti", `did you mean "unit"`},
		{"unknown top key", "name: a\nfoo: 1\n", 2, 1, "foo", "known keys here"},
		{"duplicate", "name: a\nname: b\n", 2, 1, "name", "twice"},
		{"bad duration", "interval: 5 parsecs\n", 1, 11, "", "not a duration"},
		{"bad temperature unit", "t0: 25MPa\n", 1, 5, "", "temperature"},
		{"literal secret", "token: hunter2\n", 1, 8, "", "secrets are not written"},
		{"list expected", "items: {tag: x}\n", 1, 8, "items", "expected a list"},
		{"type error", "count: many\n", 1, 1, "", "cannot unmarshal"},
		{"map value unknown key", "by_name:\n  a: {tag: x, colour: red}\n", 2, 15, "by_name.a.colour", "unknown key"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var v tOuter
			ps := decodeStrict("plant.yaml", []byte(c.doc), &v)
			if len(ps) == 0 {
				t.Fatalf("no problem reported for %q", c.doc)
			}
			p := ps[0]
			if p.Line != c.line || p.Col != c.col || p.Item != c.item || !strings.Contains(p.Error(), c.msg) {
				t.Errorf("got %s (line %d col %d item %q), want line %d col %d item %q containing %q", p.Error(), p.Line, p.Col, p.Item, c.line, c.col, c.item, c.msg)
			}
			if !errors.Is(ps, ErrInvalid) {
				t.Errorf("Problems does not wrap ErrInvalid")
			}
			if !strings.HasPrefix(p.Error(), "plant.yaml") {
				t.Errorf("error does not name the file: %s", p.Error())
			}
		})
	}
}

func TestDecodeStrictGood(t *testing.T) {
	doc := "name: a\ninterval: 5s\nt0: 25degC\nitems:\n  - {tag: x, unit: MPa}\ntoken: env:EXW_TEST_TOKEN\ncount: 3\n"
	var v tOuter
	if ps := decodeStrict("ok.yaml", []byte(doc), &v); ps != nil {
		t.Fatal(ps)
	}
	if v.Interval.D().Seconds() != 5 || v.T0.K != 298.15 || len(v.Items) != 1 || v.Count != 3 {
		t.Errorf("decoded %+v", v)
	}
	t.Setenv("EXW_TEST_TOKEN", "s3cret")
	if err := v.Token.Resolve(); err != nil || v.Token.Value() != "s3cret" {
		t.Errorf("secret resolve: %v %q", err, v.Token.Value())
	}
	if strings.Contains(v.Token.String(), "s3cret") {
		t.Errorf("secret printed: %s", v.Token.String())
	}
}

func FuzzDecodeStrict(f *testing.F) {
	for _, s := range []string{"name: a\n", "items:\n - tag: 1\n", "by_name: {a: {tag: b}}", "t0: -5K", "&a x: *a", "[1,2", "interval: 1h\ncount: 1e99"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		var v tOuter
		_ = decodeStrict("f.yaml", []byte(s), &v)
	})
}
