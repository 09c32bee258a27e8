package config

import (
	"errors"
	"os"
	"strings"
	"testing"
)

func TestLoadDemoConfig(t *testing.T) {
	c, err := Load("../cmd/exergywatch/demo.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Machines) != 6 || c.Site.DeadStateTemperature.K != 288.15 {
		t.Fatalf("decoded %d machines, T0 %v", len(c.Machines), c.Site.DeadStateTemperature.K)
	}
	keys := c.Keys()
	for _, m := range c.Machines {
		if _, err := m.Spec(c.Site, keys[m.ID]); err != nil {
			t.Errorf("%s: %v", m.ID, err)
		}
	}
}

func TestCrossChecks(t *testing.T) {
	base, err := os.ReadFile("../cmd/exergywatch/demo.yaml")
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name, from, to, want string
	}{
		{"unknown fluid", "fluid: ammonia", "fluid: amonia", "machines[5].fluid"},
		{"missing outlet T tag", "    - {tag: QM.HP1.TT102, machine: hp-turbine, port: outlet, quantity: T,    unit: degC}\n", "", "no tag gives T at port outlet"},
		{"energy balance without power", "    - {tag: QM.LP1.JT201, machine: lp-turbine, port: generator, quantity: power, unit: MW}\n", "", "needs a power tag"},
		{"unit does not fit", "quantity: flow, unit: t/h}", "quantity: flow, unit: degC}", "tag_map"},
		{"literal password", "      mode: core", "      mode: core\n      password: hunter2", "secrets are not written"},
		{"unknown alert figure", "figure: isentropic_efficiency\n        kind: deviation\n        below: -0.03", "figure: isentropic_eficiency\n        kind: deviation\n        below: -0.03", "unknown figure"},
		{"deviation without baseline", "    baseline: {isentropic_efficiency: 0.84}\n", "", "needs a baseline"},
		{"jetstream ack_wait too short", "      mode: core", "      mode: jetstream\n      stream: QUILLMOOR\n      durable: exergywatch\n      ack_wait: 3s", "ack_wait"},
		{"unknown sink kind", "kind: store", "kind: sqlite", "unknown sink kind"},
		{"bad uncertainty", "T_inlet_class: rtd-A,", "T_inlet_class: rtd-Z,", "uncertainty"},
		{"running signal unmapped", "signal: flow@inlet, above: 5kg/s}]\n    startup_time: 10s\n    steady: {dwell: 6s}\n    baseline: {isentropic_efficiency: 0.84}", "signal: speed@shaft, above: 5kg/s}]\n    startup_time: 10s\n    steady: {dwell: 6s}\n    baseline: {isentropic_efficiency: 0.84}", "not mapped"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			doc := strings.Replace(string(base), c.from, c.to, 1)
			if doc == string(base) {
				t.Fatalf("test edit %q did not apply", c.from)
			}
			_, err := Parse("plant.yaml", []byte(doc))
			if err == nil || !errors.Is(err, ErrInvalid) || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("err = %v, want one containing %q", err, c.want)
			}
			if !strings.Contains(err.Error(), "plant.yaml") {
				t.Errorf("error does not name the file: %v", err)
			}
		})
	}
}

func TestUnknownKeyHasPosition(t *testing.T) {
	_, err := Parse("x.yaml", []byte("site:\n  name: a\n  dead_state_temprature: 15degC\n"))
	if err == nil || !strings.Contains(err.Error(), "x.yaml:3:3: site.dead_state_temprature") || !strings.Contains(err.Error(), `did you mean "dead_state_temperature"`) {
		t.Fatalf("err = %v", err)
	}
}

func TestResolveSecrets(t *testing.T) {
	doc := "site: {name: a}\nsources:\n  - kind: nats\n    nats: {urls: [nats://127.0.0.1:4222], subjects: [a.>], token: env:EXW_T}\n"
	c, err := Parse("s.yaml", []byte(doc))
	if err != nil {
		t.Fatal(err)
	}
	t.Setenv("EXW_T", "tok")
	if err := c.ResolveSecrets(); err != nil || c.Sources[0].NATS.Token != "tok" {
		t.Fatalf("%v %q", err, c.Sources[0].NATS.Token)
	}
	c2, _ := Parse("s.yaml", []byte(strings.Replace(doc, "EXW_T", "EXW_UNSET_VAR", 1)))
	if err := c2.ResolveSecrets(); !errors.Is(err, ErrSecret) {
		t.Fatalf("unset variable: %v", err)
	}
}

func FuzzParse(f *testing.F) {
	base, _ := os.ReadFile("../cmd/exergywatch/demo.yaml")
	f.Add(string(base))
	f.Add("site: {name: x}\nmachines: [{id: a, kind: pump, fluid: water}]\n")
	f.Fuzz(func(t *testing.T, s string) {
		_, _ = Parse("f.yaml", []byte(s))
	})
}
