package influx

import (
	"bytes"
	"errors"
	"math"
	"strings"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/sinks"
)

// Expected lines follow the InfluxDB line protocol reference (InfluxDB v2
// docs, "Line protocol": measurement[,tag=value...] field=value[,...]
// timestamp; commas, equals signs and spaces in tag keys and values are
// escaped with a backslash; integers carry the suffix i).
func TestAppendLine(t *testing.T) {
	tests := []struct {
		name string
		p    point
		want string
	}{
		{"plain", point{meas: "exw_machine", tags: []tag{{"machine", "hp1"}, {"site", "north"}},
			fields: []field{{k: "quality_code", isInt: true, i: 0}, {k: "eff", f: 0.85}}, ms: 1764633600123},
			"exw_machine,machine=hp1,site=north quality_code=0i,eff=0.85 1764633600123\n"},
		{"escaped tag values", point{meas: "m", tags: []tag{{"a", "x y"}, {"b", "p,q"}, {"c", "k=v"}},
			fields: []field{{k: "v", f: -1.5e-07}}, ms: 0},
			`m,a=x\ y,b=p\,q,c=k\=v v=-1.5e-07 0` + "\n"},
		{"empty tag value omitted", point{meas: "m", tags: []tag{{"a", ""}, {"b", "1"}}, fields: []field{{k: "v", f: 2}}, ms: 5},
			"m,b=1 v=2 5\n"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := appendLine(nil, tc.p)
			if err != nil {
				t.Fatal(err)
			}
			if string(got) != tc.want {
				t.Errorf("got  %q\nwant %q", got, tc.want)
			}
			p, err := parseLine(bytes.TrimSuffix(got, []byte{'\n'}))
			if err != nil {
				t.Fatalf("parse back: %v", err)
			}
			again, _ := appendLine(nil, p)
			if !bytes.Equal(again, got) {
				t.Errorf("round trip: %q != %q", again, got)
			}
		})
	}
}

func TestAppendLineRejects(t *testing.T) {
	ok := point{meas: "m", tags: []tag{{"a", "1"}}, fields: []field{{k: "v", f: 1}}, ms: 1}
	mod := func(f func(p *point)) point {
		p := ok
		p.tags = append([]tag(nil), ok.tags...)
		p.fields = append([]field(nil), ok.fields...)
		f(&p)
		return p
	}
	tests := map[string]point{
		"NaN field":           mod(func(p *point) { p.fields[0].f = math.NaN() }),
		"+Inf field":          mod(func(p *point) { p.fields[0].f = math.Inf(1) }),
		"newline in tag":      mod(func(p *point) { p.tags[0].v = "a\nb" }),
		"backslash in tag":    mod(func(p *point) { p.tags[0].v = `a\` }),
		"bad field key":       mod(func(p *point) { p.fields[0].k = "a b" }),
		"duplicate field":     mod(func(p *point) { p.fields = append(p.fields, p.fields[0]) }),
		"no fields":           mod(func(p *point) { p.fields = nil }),
		"time before 1970":    mod(func(p *point) { p.ms = -1 }),
		"unsorted tags":       mod(func(p *point) { p.tags = []tag{{"b", "1"}, {"a", "2"}} }),
		"bad measurement":     mod(func(p *point) { p.meas = "9x" }),
		"digit-led field key": mod(func(p *point) { p.fields[0].k = "1v" }),
	}
	for name, p := range tests {
		t.Run(name, func(t *testing.T) {
			out, err := appendLine([]byte("keep"), p)
			if !errors.Is(err, sinks.ErrInvalid) {
				t.Errorf("err %v, want ErrInvalid", err)
			}
			if string(out) != "keep" {
				t.Errorf("buffer changed on error: %q", out)
			}
		})
	}
}

// A Bad figure is written as its quality code only, never as a value.
func TestEncodeRecordBadFigure(t *testing.T) {
	r := testRecord(1, 3) // k%7 == 3: lost_work_rate_w is Bad with NaN value
	out, n, err := encodeRecord(nil, "exw", r)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSuffix(string(out), "\n"), "\n")
	if n != len(lines) || n != 3 { // machine line + figure reason + record reason
		t.Fatalf("n=%d lines=%d: %q", n, len(lines), out)
	}
	first := lines[0]
	if strings.Contains(first, "lost_work_rate_w=") || strings.Contains(first, "NaN") {
		t.Errorf("bad figure value written: %s", first)
	}
	if !strings.Contains(first, "lost_work_rate_w_quality_code=3i") || !strings.Contains(first, ",quality=bad,") {
		t.Errorf("bad figure quality missing: %s", first)
	}
	want := []string{
		`exw_reason,kind=pump,machine=m1,reason=input_bad,scope=record,site=north\ plant active=1i`,
		`exw_reason,kind=pump,machine=m1,reason=input_bad,scope=lost_work_rate_w,site=north\ plant active=1i`,
	}
	for _, w := range want {
		if !strings.Contains(string(out), w) {
			t.Errorf("missing %q in\n%s", w, out)
		}
	}
}

func TestEncodeRecordRejects(t *testing.T) {
	base := func() compute.Record { return testRecord(0, 0) }
	tests := map[string]func(r *compute.Record){
		"NaN good figure": func(r *compute.Record) { r.Figures[0].Value = math.NaN() },
		"Inf uncertain figure": func(r *compute.Record) {
			r.Figures[1].Quality = compute.QualityUncertain
			r.Figures[1].Value = math.Inf(-1)
		},
		"negative U95":         func(r *compute.Record) { r.Figures[0].U95 = -1 },
		"duplicate figure":     func(r *compute.Record) { r.Figures[1].Name = r.Figures[0].Name },
		"figure quality_code":  func(r *compute.Record) { r.Figures[0].Name = "quality_code" },
		"figure name collides": func(r *compute.Record) { r.Figures[1].Name = "isentropic_efficiency_u95" },
		"bad figure name":      func(r *compute.Record) { r.Figures[0].Name = "eff %" },
		"no machine":           func(r *compute.Record) { r.Machine = "" },
		"zero time":            func(r *compute.Record) { r.Time = time.Time{} },
		"before 1970":          func(r *compute.Record) { r.Time = time.Date(1960, 1, 1, 0, 0, 0, 0, time.UTC) },
		"newline in machine":   func(r *compute.Record) { r.Machine = "a\nb" },
		"unknown quality":      func(r *compute.Record) { r.Quality = 9 },
		"newline in reason":    func(r *compute.Record) { r.Reasons = []string{"x\ny"} },
	}
	for name, f := range tests {
		t.Run(name, func(t *testing.T) {
			r := base()
			f(&r)
			out, n, err := encodeRecord(nil, "exw", r)
			if !errors.Is(err, sinks.ErrInvalid) || n != 0 || len(out) != 0 {
				t.Errorf("err %v n %d out %q, want ErrInvalid and nothing", err, n, out)
			}
		})
	}
}

func TestEncodeEvent(t *testing.T) {
	e := compute.Event{Time: time.UnixMilli(1764633600500).UTC(), Site: "s", Machine: "c1", Rule: "sgen_high",
		Class: compute.AlertDataQuality, Figure: "t_in_k", From: compute.AlertFiring, To: compute.AlertResolved,
		Value: 1.25, Limit: 2, U95: 0, Reason: "stuck sensor"}
	out, err := encodeEvent(nil, "exw", e)
	if err != nil {
		t.Fatal(err)
	}
	// AlertFiring = 2, AlertResolved = 3 (compute/record.go); no Since: no condition_age_s
	want := "exw_alert,class=data_quality,figure=t_in_k,machine=c1,rule=sgen_high,site=s state_code=3i,from_state_code=2i,value=1.25,limit=2,value_u95=0 1764633600500\n"
	if string(out) != want {
		t.Errorf("got  %q\nwant %q", out, want)
	}
	e.Limit = math.Inf(1)
	if _, err := encodeEvent(nil, "exw", e); !errors.Is(err, sinks.ErrInvalid) {
		t.Errorf("Inf limit: %v", err)
	}
}

func TestParseLineRejects(t *testing.T) {
	for _, s := range []string{
		"", "m", "m v=1", "m v=1 x", "m v=1 -5", "m,a v=1 1", "m,a= v=1 1", "m v=NaN 1", "m v=+Inf 1",
		"m v=1,v=2 1", "m v=\"s\" 1", "m v=true 1", "m v=1i2 1", `m,a=x\y v=1 1`, "m,b=1,a=2 v=1 1", "m  v=1 1",
	} {
		if _, err := parseLine([]byte(s)); !errors.Is(err, errLine) {
			t.Errorf("parseLine(%q) = %v, want errLine", s, err)
		}
	}
}

func FuzzParseLine(f *testing.F) {
	for _, s := range []string{
		"exw_machine,kind=pump,machine=m1,quality=good,site=north\\ plant quality_code=0i,eff=0.85,eff_u95=0.01 1764633600123",
		`m,a=x\ y,b=p\,q,c=k\=v v=-1.5e-07 0`, "m v=1 1", "m,a=\\", "m v=1e309 1", "m v=9223372036854775808i 1",
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		p, err := parseLine(b)
		if err != nil {
			if !errors.Is(err, errLine) {
				t.Fatalf("error not errLine: %v", err)
			}
			return
		}
		out, err := appendLine(nil, p)
		if err != nil {
			t.Fatalf("parsed point does not encode: %v (%+v)", err, p)
		}
		p2, err := parseLine(bytes.TrimSuffix(out, []byte{'\n'}))
		if err != nil {
			t.Fatalf("re-encoded line does not parse: %q: %v", out, err)
		}
		out2, _ := appendLine(nil, p2)
		if !bytes.Equal(out, out2) {
			t.Fatalf("not a fixed point: %q vs %q", out, out2)
		}
	})
}

func FuzzEncodeRecord(f *testing.F) {
	f.Add("north plant", "hp1", "isentropic_efficiency", 0.85, 0.01, true, 0, int64(1764633600123), "near_saturation")
	f.Add("s,=", "m 1", "x", math.NaN(), 0.0, false, 3, int64(0), "")
	f.Add("s", "m", "quality_code", 1.0, -1.0, true, 1, int64(-5), "a=b")
	f.Fuzz(func(t *testing.T, site, machine, name string, v, u float64, hasU bool, q int, msec int64, reason string) {
		r := compute.Record{Time: time.UnixMilli(msec).UTC(), Site: site, Machine: machine, MachineKind: "pump",
			Quality: compute.Quality(q), Reasons: []string{reason},
			Figures: []compute.Figure{{Name: name, Value: v, U95: u, HasU95: hasU, Quality: compute.Quality(q)}}}
		out, n, err := encodeRecord(nil, "exw", r)
		if err != nil {
			if !errors.Is(err, sinks.ErrInvalid) || len(out) != 0 {
				t.Fatalf("error %v (out %q)", err, out)
			}
			return
		}
		lines := bytes.Split(bytes.TrimSuffix(out, []byte{'\n'}), []byte{'\n'})
		if len(lines) != n {
			t.Fatalf("n=%d but %d lines", n, len(lines))
		}
		p, err := parseLine(lines[0])
		if err != nil {
			t.Fatalf("own line does not parse: %q: %v", lines[0], err)
		}
		if p.ms != msec {
			t.Fatalf("time %d != %d", p.ms, msec)
		}
		for _, tg := range p.tags {
			if tg.k == "machine" && tg.v != machine || tg.k == "site" && tg.v != site {
				t.Fatalf("tag %s=%q, want machine %q site %q", tg.k, tg.v, machine, site)
			}
		}
		var sawValue bool
		for _, fl := range p.fields {
			if !fl.isInt && (math.IsNaN(fl.f) || math.IsInf(fl.f, 0)) {
				t.Fatalf("non-finite written: %q", lines[0])
			}
			if fl.k == name {
				sawValue = true
				if fl.f != v {
					t.Fatalf("value %v != %v", fl.f, v)
				}
			}
		}
		if sawValue == (compute.Quality(q) == compute.QualityBad) {
			t.Fatalf("quality %d but value written=%v: %q", q, sawValue, lines[0])
		}
		for _, l := range lines[1:] {
			if _, err := parseLine(l); err != nil {
				t.Fatalf("reason line does not parse: %q: %v", l, err)
			}
		}
	})
}
