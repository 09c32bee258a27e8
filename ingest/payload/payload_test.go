package payload

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"
	"sync"
	"testing"
	"time"
	"unsafe"

	"github.com/exergywatch/exergywatch/ingest"
)

var recv = time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC)

func TestDecodeJSON(t *testing.T) {
	// Expected values follow from the schema documented in payload.go (our
	// own design; no external source). OPC UA severity bits: Part 4, 7.39.
	tests := []struct {
		name    string
		in      string
		want    []ingest.Sample
		wantErr []error
	}{
		{"single rfc3339", `{"tag":"T1.PT101","ts":"2026-12-01T09:59:59.25Z","value":12.5}`,
			[]ingest.Sample{{Tag: "T1.PT101", SourceTime: time.Date(2026, 12, 1, 9, 59, 59, 250e6, time.UTC), ReceiveTime: recv, Value: 12.5}}, nil},
		{"unix millis and status uncertain", `{"tag":"a","ts":1764583200123,"value":-3e2,"status":1083310080}`,
			[]ingest.Sample{{Tag: "a", SourceTime: time.UnixMilli(1764583200123).UTC(), ReceiveTime: recv, Value: -300,
				Quality: ingest.Uncertain, StatusCode: 0x40920000, HasStatus: true}}, nil},
		{"bool and quality", `{"tag":"b","value":true,"quality":"bad"}`,
			[]ingest.Sample{{Tag: "b", ReceiveTime: recv, Value: 1, Quality: ingest.Bad}}, nil},
		{"batch with default ts", `{"ts":"2026-12-01T09:00:00Z","samples":[{"tag":"a","value":1},{"tag":"b","value":2,"ts":"2026-12-01T09:00:01Z"}]}`,
			[]ingest.Sample{
				{Tag: "a", SourceTime: time.Date(2026, 12, 1, 9, 0, 0, 0, time.UTC), ReceiveTime: recv, Value: 1},
				{Tag: "b", SourceTime: time.Date(2026, 12, 1, 9, 0, 1, 0, time.UTC), ReceiveTime: recv, Value: 2}}, nil},
		{"array with bad members", `[{"tag":"a","value":1},{"tag":"","value":2},{"tag":"c","value":"x"},{"tag":"d"},{"tag":"e","value":1,"status":-1}]`,
			[]ingest.Sample{{Tag: "a", ReceiveTime: recv, Value: 1}}, []error{ErrNoTag, ErrBadValue, ErrNoValue, ErrBadStatus}},
		{"malformed", `{"tag":`, nil, []error{ErrSyntax}},
		{"bad time", `{"tag":"a","value":1,"ts":"yesterday"}`, nil, []error{ErrBadTime}},
		{"bad quality", `{"tag":"a","value":1,"quality":"fine"}`, nil, []error{ErrQuality}},
		{"huge millis", `{"tag":"a","value":1,"ts":1e300}`, nil, []error{ErrBadTime}},
		{"overflowing number", `{"tag":"a","value":1e999}`, nil, []error{ErrBadValue}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			d := NewDecoder(Auto)
			got, errs := d.Decode([]byte(tc.in), recv, nil, nil)
			checkSamples(t, got, tc.want)
			checkErrs(t, errs, tc.wantErr)
		})
	}
}

func TestDecodeLineProtocol(t *testing.T) {
	// Line-protocol syntax: InfluxDB v2 line protocol reference
	// (docs.influxdata.com/influxdb/v2/reference/syntax/line-protocol/);
	// tag naming rules are ours (payload.go).
	ts := time.Unix(0, 1764583200123456789).UTC()
	tests := []struct {
		name    string
		in      string
		prec    time.Duration
		want    []ingest.Sample
		wantErr []error
	}{
		{"value field with tag tag", "plant,tag=T1.PT101 value=12.5 1764583200123456789\n",
			0, []ingest.Sample{{Tag: "T1.PT101", SourceTime: ts, ReceiveTime: recv, Value: 12.5}}, nil},
		{"several fields and types", "turb1 p_in=12.5,n=3000i,on=t,c=7u,note=\"x y\" 1764583200123456789",
			0, []ingest.Sample{
				{Tag: "turb1.p_in", SourceTime: ts, ReceiveTime: recv, Value: 12.5},
				{Tag: "turb1.n", SourceTime: ts, ReceiveTime: recv, Value: 3000},
				{Tag: "turb1.on", SourceTime: ts, ReceiveTime: recv, Value: 1},
				{Tag: "turb1.c", SourceTime: ts, ReceiveTime: recv, Value: 7}}, nil},
		{"status and escapes", "my\\ meas,site=a\\,b value=1,status=2158690304i",
			0, []ingest.Sample{{Tag: "my meas", ReceiveTime: recv, Value: 1, Quality: ingest.Bad, StatusCode: 0x80AB0000, HasStatus: true}}, nil},
		{"quality string, ms precision, comments", "# c\n\nx value=2,quality=\"uncertain\" 1764583200123\r\n",
			time.Millisecond, []ingest.Sample{{Tag: "x", SourceTime: time.UnixMilli(1764583200123).UTC(), ReceiveTime: recv, Value: 2, Quality: ingest.Uncertain}}, nil},
		{"errors counted, good lines kept", "a value=1\nb\nc value=\nd value=abc\ne value=1 notatime\nf,=x value=1\ng quality=\"meh\",value=1\nh note=\"only\"\ni value=1,status=-1i\nj value=1 9223372036854775807",
			time.Second, []ingest.Sample{{Tag: "a", ReceiveTime: recv, Value: 1}},
			[]error{ErrSyntax, ErrSyntax, ErrBadValue, ErrBadTime, ErrSyntax, ErrQuality, ErrNoValue, ErrBadStatus, ErrBadTime}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			d := NewDecoder(Auto)
			d.Precision = tc.prec
			got, errs := d.Decode([]byte(tc.in), recv, nil, nil)
			checkSamples(t, got, tc.want)
			checkErrs(t, errs, tc.wantErr)
		})
	}
}

func TestLineProtocolNaN(t *testing.T) {
	// NaN and Inf parse as floats; the pipeline counts them (non_finite).
	got, errs := NewDecoder(LineProtocol).Decode([]byte("a value=NaN\nb value=-Inf"), recv, nil, nil)
	if len(errs) != 0 || len(got) != 2 || !math.IsNaN(got[0].Value) || !math.IsInf(got[1].Value, -1) {
		t.Fatalf("got %+v errs %v", got, errs)
	}
}

func checkSamples(t *testing.T, got, want []ingest.Sample) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("got %d samples %+v, want %d %+v", len(got), got, len(want), want)
	}
	for i := range got {
		g, w := got[i], want[i]
		if g.Tag != w.Tag || !g.SourceTime.Equal(w.SourceTime) || !g.ReceiveTime.Equal(w.ReceiveTime) || g.Value != w.Value ||
			g.Quality != w.Quality || g.StatusCode != w.StatusCode || g.HasStatus != w.HasStatus {
			t.Errorf("sample %d: got %+v, want %+v", i, g, w)
		}
	}
}

func checkErrs(t *testing.T, got []Error, want []error) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("got %d errors %v, want %d %v", len(got), got, len(want), want)
	}
	for i := range got {
		if !errors.Is(got[i], want[i]) {
			t.Errorf("error %d: got %v, want %v", i, got[i], want[i])
		}
	}
}

func fuzzDecode(t *testing.T, f Format, data []byte) {
	d := NewDecoder(f)
	got, errs := d.Decode(data, recv, nil, nil)
	if f == JSON && len(got) > 0 && !json.Valid(data) {
		t.Fatalf("samples decoded from invalid JSON %q", data)
	}
	for _, s := range got {
		if s.Tag == "" {
			t.Fatalf("sample without tag from %q", data)
		}
		if !s.ReceiveTime.Equal(recv) {
			t.Fatalf("receive time lost")
		}
		if s.HasStatus && ingest.QualityFromStatus(s.StatusCode) == ingest.Good && s.Quality != ingest.Good && f == JSON {
			// quality field overrides; allowed
			_ = s
		}
	}
	for _, e := range errs {
		if e.Err == nil {
			t.Fatalf("error without cause")
		}
	}
}

func FuzzDecodeJSON(f *testing.F) {
	for _, s := range []string{
		`{"tag":"T1.PT101","ts":"2026-12-01T09:59:59.25Z","value":12.5}`,
		`{"tag":"a","ts":1764583200123,"value":-3e2,"status":1083310080}`,
		`{"ts":"2026-12-01T09:00:00Z","samples":[{"tag":"a","value":1},{"tag":"b","value":2}]}`,
		`[{"tag":"a","value":true},{"tag":"b","value":null}]`,
		`{"tag":"a","value":1,"ts":-1e15}`, `{"tag":"a","value":1,"ts":"9999-12-31T23:59:59Z"}`,
		`{"tag":`, `[`, ``, `{"samples":null}`, `{"samples":[1,2]}`,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) { fuzzDecode(t, JSON, data) })
}

func FuzzDecodeLineProtocol(f *testing.F) {
	for _, s := range []string{
		"plant,tag=T1.PT101 value=12.5 1764583200123456789\n",
		"turb1 p_in=12.5,n=3000i,on=t,c=7u,note=\"x \\\"y\" 1",
		"my\\ meas,site=a\\,b value=1,status=2158690304i",
		"x value=2,quality=\"uncertain\" -9223372036854775808",
		"a value=NaN\nb value=+Inf\nc value=1e400", "\\", "a,b value=1", "a value=\"", "a  value=1  ",
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) { fuzzDecode(t, LineProtocol, data) })
}

func TestJSONEscapesAndUnicode(t *testing.T) {
	// RFC 8259 section 7 escapes; U+1D11E as the surrogate pair \ud834\udd1e.
	in := `[{"tag":"a\"b\\c\/\u00e9\ud834\udd1e","value":1},{"t\u0061g":"plain","value":2},{"tag":"x\ud800","value":3}]`
	got, errs := NewDecoder(JSON).Decode([]byte(in), recv, nil, nil)
	if len(errs) != 0 || len(got) != 3 {
		t.Fatalf("got %+v %v", got, errs)
	}
	if got[0].Tag != "a\"b\\c/é𝄞" || got[1].Tag != "plain" || got[2].Tag != "x\uFFFD" {
		t.Fatalf("tags %q %q %q", got[0].Tag, got[1].Tag, got[2].Tag)
	}
	for _, bad := range []string{`{"tag":"a","value":01}`, `{"tag":"a","value":1.}`, `{"tag":"a","value":-}`, `{"tag":"a\x01","value":1}`,
		`{"tag":"a","value":1}x`, `{"tag":"\q","value":1}`, `{"tag":"a" "value":1}`, `[1,]`, `{"tag":"a","value":tru}`} {
		if _, errs := NewDecoder(JSON).Decode([]byte(bad), recv, nil, nil); len(errs) != 1 || !errors.Is(errs[0], ErrSyntax) {
			t.Errorf("%q: errs %v, want one ErrSyntax (RFC 8259 grammar)", bad, errs)
		}
	}
}

// FuzzJSONRoundTrip encodes a sample with encoding/json and decodes it with
// the hand-written decoder: tag, value, time and status must survive.
func FuzzJSONRoundTrip(f *testing.F) {
	f.Add("T1.PT101", 12.5, int64(1764583200123), uint32(0), true)
	f.Add("ä\"\\\n\u2028😀", -1e-300, int64(-1), uint32(0x80AB0000), false)
	f.Add("", 0.0, int64(0), uint32(0x40000000), true)
	f.Fuzz(func(t *testing.T, tag string, v float64, ms int64, status uint32, withTS bool) {
		if math.IsNaN(v) || math.IsInf(v, 0) || ms > 1e15 || ms < -1e15 {
			return // not representable in JSON / refused by design
		}
		m := map[string]any{"tag": tag, "value": v, "status": status, "extra": []any{map[string]any{"x": nil}, "y"}}
		if withTS {
			m["ts"] = ms
		}
		data, err := json.Marshal(m)
		if err != nil {
			t.Fatal(err)
		}
		got, errs := NewDecoder(Auto).Decode(data, recv, nil, nil)
		if tag == "" {
			if len(errs) != 1 || !errors.Is(errs[0], ErrNoTag) {
				t.Fatalf("empty tag: %v", errs)
			}
			return
		}
		if len(errs) != 0 || len(got) != 1 {
			t.Fatalf("%s: got %+v errs %v", data, got, errs)
		}
		s := got[0]
		var back struct{ Tag string }
		if err := json.Unmarshal(data, &back); err != nil {
			t.Fatal(err)
		}
		wantTag := back.Tag // encoding/json's replacement of invalid UTF-8
		if s.Tag != wantTag || s.Value != v || s.StatusCode != status || !s.HasStatus || s.Quality != ingest.QualityFromStatus(status) {
			t.Fatalf("%s: got %+v", data, s)
		}
		if withTS && !s.SourceTime.Equal(time.UnixMilli(ms)) {
			t.Fatalf("%s: time %v want %v", data, s.SourceTime, time.UnixMilli(ms))
		}
	})
}

func FuzzParseInt64(f *testing.F) {
	for _, s := range []string{"0", "-1", "+5", "9223372036854775807", "-9223372036854775808", "9223372036854775808", "1e3", "", "-", "0123",
		"1764583200123456789", "12345678", "1234567:", "1234/678", "12345678123456789/", "-0000000000000000001"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		got, ok := parseInt64([]byte(s))
		want, err := strconv.ParseInt(s, 10, 64)
		if ok != (err == nil) || (ok && got != want) {
			t.Fatalf("%q: got %d %v, strconv %d %v", s, got, ok, want, err)
		}
	})
}

// FuzzFastDecimal: where the plain-decimal fast path answers, it must give
// exactly (bit for bit, sign of zero included) what strconv.ParseFloat
// gives; and it must answer for the everyday forms.
func FuzzFastDecimal(f *testing.F) {
	for _, s := range []string{"0", "-0", "12.5", "-3.25", "450.45", "0.1", "9007199254740992", "9007199254740993",
		"900719925474099.9", "1.0000000000000000000001", "0.0000000000000000000001", "1e3", "+1", ".5", "5.", "1_0", "", "-", "007.5",
		"123456789012345678901234567890", "2.2250738585072014", "-0.000", "40.03999999999999", "0.30000000000000004",
		"18446744073709551615", "1844674407370955161.5", "9007199254740993.5", "0.1000000000000000055511151231257827",
		"4503599627370497.5", "9007199254740995", "1.7976931348623157", "4.9406564584124654", "0.0000000000000000001"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		got, ok := fastDecimal([]byte(s))
		if !ok {
			return
		}
		want, err := strconv.ParseFloat(s, 64)
		if err != nil || math.Float64bits(got) != math.Float64bits(want) {
			t.Fatalf("%q: fast %v (%x), strconv %v (%x) %v", s, got, math.Float64bits(got), want, math.Float64bits(want), err)
		}
	})
}

func TestFastDecimalAnswersEverydayForms(t *testing.T) {
	for _, s := range []string{"0", "-0", "12.5", "-3.25", "450.45", "3000", "0.001", "101325", "-273.15", "9007199254740992",
		"9007199254740993", "40.03999999999999", "450.44999999999993", "3002.9999999999995", "18446744073709551606"} {
		if _, ok := fastDecimal([]byte(s)); !ok {
			t.Errorf("%q: fast path refused", s)
		}
	}
	for _, s := range []string{"1e3", "+1", ".5", "5.", "", "-", "NaN", "1.00000000000000000000001", "1_0",
		"18446744073709551616", "0.00000000000000000000001"} {
		if _, ok := fastDecimal([]byte(s)); ok {
			t.Errorf("%q: fast path answered", s)
		}
	}
}

// TestNameCacheKeepsNamesApart: the slot cache in front of the intern
// table compares bytes, so names that share a slot (same length, same
// start, middle and end) still decode to their own tag.
func TestNameCacheKeepsNamesApart(t *testing.T) {
	d := NewDecoder(LineProtocol)
	var names []string
	for i := 0; i < 3000; i++ {
		names = append(names, fmt.Sprintf("plant.unit.%04d.section.turbine.PT101", i)) // differ only past the first 8 bytes
		names = append(names, fmt.Sprintf("t%d", i))
	}
	for pass := 0; pass < 2; pass++ {
		for _, n := range names {
			got, errs := d.Decode([]byte(n+" value=1 1764583200000000000"), time.Time{}, nil, nil)
			if len(errs) != 0 || len(got) != 1 || got[0].Tag != n {
				t.Fatalf("pass %d: %q decoded to %+v %v", pass, n, got, errs)
			}
		}
	}
}

// TestDetect: the first byte that is not a blank decides, as the package
// documentation says; blank or empty payloads are line protocol.
func TestDetect(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want Format
	}{
		{`{"tag":"a","value":1}`, JSON}, {" \t\r\n[{\"tag\":\"a\"}]", JSON}, {"\n\n{", JSON},
		{"a value=1", LineProtocol}, {"  # comment\n{", LineProtocol}, {"", LineProtocol}, {" \t\r\n", LineProtocol},
		{"\v{", LineProtocol}, // vertical tab is not a blank here
	} {
		if got := Detect([]byte(tc.in)); got != tc.want {
			t.Errorf("Detect(%q) = %v, want %v", tc.in, got, tc.want)
		}
	}
}

// TestSharedNames: decoders sharing a Names table, decoding on their own
// goroutines, give the same tag the very same string (same address), and
// the tag text is still right (run with -race to check the sharing).
func TestSharedNames(t *testing.T) {
	names := NewNames()
	const workers, tags = 4, 500
	got := make([][]string, workers)
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			d := NewDecoder(Auto)
			d.ShareNames(names)
			for i := 0; i < tags; i++ {
				k := (i*7 + w*131) % tags // each worker meets the tags in its own order
				smp, errs := d.Decode([]byte(fmt.Sprintf("m%03d.t%d value=1 1764583200000000000", k/10, k%10)), time.Time{}, nil, nil)
				if len(errs) != 0 || len(smp) != 1 {
					t.Errorf("worker %d tag %d: %v %v", w, k, smp, errs)
					return
				}
				if got[w] == nil {
					got[w] = make([]string, tags)
				}
				got[w][k] = smp[0].Tag
			}
		}()
	}
	wg.Wait()
	for k := 0; k < tags; k++ {
		want := fmt.Sprintf("m%03d.t%d", k/10, k%10)
		for w := 0; w < workers; w++ {
			if got[w][k] != want {
				t.Fatalf("worker %d tag %d: got %q, want %q", w, k, got[w][k], want)
			}
			if unsafe.StringData(got[w][k]) != unsafe.StringData(got[0][k]) {
				t.Fatalf("tag %q: worker %d holds another copy than worker 0", want, w)
			}
		}
	}
}

// FuzzLineFastPath is a differential test: the one-pass path for everyday
// lines (fastLine) must decode every input exactly as the general parser
// alone does (same samples, bit for bit, same errors), in each precision.
func FuzzLineFastPath(f *testing.F) {
	for _, s := range []string{
		"m012.t3 value=250.25 1764583200123456789\n", "m012.t3 value=-0 1764583200123456789\r\nb value=1",
		"a value=1", "a value=1 ", "a value=1 \t", "a value=1\t12", "a  value=7.5  12  ", "a value=1 9223372036854775807",
		"a value=1 -9223372036854775808", "a value=1 +12", "a value=12345678901234567 1", "a value=1.5e3 1", "a value=.5",
		"a value=1.", "a value=01 1", "a value=1,b=2 1", "a,t=x value=1", "a\\ b value=1", "a value=\"1\"", "a value=1i",
		"a value=t", "a value=NaN", "a value= 1", "a value=", "a vALUE=1", "a valu=1", " a value=1", "#a value=1",
		"plant,tag=T1.PT101 value=12.5 1764583200123456789\n", "a value=1,quality=\"bad\"", "a value=1 1 1",
	} {
		f.Add([]byte(s), uint8(0))
	}
	precs := []time.Duration{0, time.Nanosecond, time.Microsecond, time.Millisecond, time.Second}
	f.Fuzz(func(t *testing.T, data []byte, p uint8) {
		fast, slow := NewDecoder(LineProtocol), NewDecoder(LineProtocol)
		fast.Precision = precs[int(p)%len(precs)]
		slow.Precision = fast.Precision
		slow.noFastLine = true
		gf, ef := fast.Decode(data, recv, nil, nil)
		gs, es := slow.Decode(data, recv, nil, nil)
		if len(gf) != len(gs) || len(ef) != len(es) {
			t.Fatalf("%q: fast path %d samples %d errors, general %d samples %d errors", data, len(gf), len(ef), len(gs), len(es))
		}
		for i := range gf {
			a, b := gf[i], gs[i]
			if math.Float64bits(a.Value) != math.Float64bits(b.Value) {
				t.Fatalf("%q sample %d: value %v (fast) vs %v", data, i, a.Value, b.Value)
			}
			a.Value, b.Value = 0, 0
			if a != b {
				t.Fatalf("%q sample %d: %+v (fast) vs %+v", data, i, a, b)
			}
		}
		for i := range ef {
			if ef[i].Error() != es[i].Error() {
				t.Fatalf("%q error %d: %v (fast) vs %v", data, i, ef[i], es[i])
			}
		}
	})
}

// TestLineFastPathTakesEverydayLines: the lines the one-pass path exists
// for are taken by it (otherwise the differential fuzz test above would
// pass while comparing the general parser with itself).
func TestLineFastPathTakesEverydayLines(t *testing.T) {
	d := NewDecoder(LineProtocol)
	for _, in := range []string{"m012.t3 value=250.25 1764583200123456789", "a value=-3", "T1.PT101  value=0.001  1 "} {
		if _, ok := d.fastLine([]byte(in), recv); !ok {
			t.Errorf("%q not taken by the fast path", in)
		}
	}
	for _, in := range []string{"m012.t3 value=40.03999999999999 1764583200123456789", "a value=1e3", "a value=7i", "a value=t", "a value=NaN"} {
		if _, ok := d.fastLine([]byte(in), recv); !ok {
			t.Errorf("%q not taken by the fast path", in)
		}
	}
	for _, in := range []string{"a,t=x value=1", "a value=1,q=2", "a value=\"1\"", "a value=1x", "a value=1 \t", "a x=1"} {
		if _, ok := d.fastLine([]byte(in), recv); ok {
			t.Errorf("%q taken by the fast path", in)
		}
	}
}

// FuzzJSONWholeMillis: a "ts" of whole Unix milliseconds takes the integer
// path; it must give the instant (and error) the float path gives.
func FuzzJSONWholeMillis(f *testing.F) {
	for _, n := range []int64{0, 1, -1, 999, -999, 1000, -1001, 1764583200123, -1764583200123, 1e15, -1e15, 1e15 + 1, -1e15 - 1, math.MaxInt64, math.MinInt64} {
		f.Add(n)
	}
	f.Fuzz(func(t *testing.T, n int64) {
		raw := strconv.FormatInt(n, 10)
		d := NewDecoder(JSON)
		got, gerr := d.jsonTime([]byte(raw), span{k: kNumber, start: 0, end: len(raw)})
		want, werr := millisFloat([]byte(raw))
		if (gerr == nil) != (werr == nil) || got != want {
			t.Fatalf("ts %s: integer path %v %v, float path %v %v", raw, got, gerr, want, werr)
		}
	})
}

// FuzzJSONScannerGrammar: the scanner accepts exactly what encoding/json's
// json.Valid accepts (RFC 8259), apart from nesting deeper than maxDepth,
// which only the scanner refuses.
func FuzzJSONScannerGrammar(f *testing.F) {
	for _, s := range []string{`0`, `-0`, `-`, `01`, `1.`, `.5`, `1e`, `1e+`, `1E-7`, `-12.5e+3`, `[1,-2.0,3e4]`, `{"a":-}`,
		`{"tag":"a","value":1.5}`, `"\u00e9\ud83d\ude00"`, `[`, `[[[[]]]]`, `{"a":[true,false,null]}`, ` 1 `, `1 2`} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		s := &scanner{b: data}
		_, ok := s.value(0)
		s.ws()
		ours := ok && s.i == len(data)
		if want := json.Valid(data); ours != want {
			if !ours && bytes.Count(data, []byte("["))+bytes.Count(data, []byte("{")) > maxDepth {
				return
			}
			t.Fatalf("%q: scanner says valid=%v, json.Valid %v", data, ours, want)
		}
	})
}

// FuzzFastDecimalDigits drives the 64-bit digit path: any integer mantissa
// with 0..22 decimals, written out, must parse bit for bit as strconv does
// (or be refused).
func FuzzFastDecimalDigits(f *testing.F) {
	for _, c := range []struct {
		m uint64
		k uint8
	}{{4003999999999999, 14}, {45044999999999993, 14}, {math.MaxUint64, 0}, {math.MaxUint64, 19}, {1<<53 + 1, 0},
		{9007199254740993, 16}, {30000000000000004, 17}, {1, 19}, {12345678901234567, 3}} {
		f.Add(c.m, c.k, false)
	}
	f.Fuzz(func(t *testing.T, m uint64, k uint8, neg bool) {
		digits := strconv.FormatUint(m, 10)
		n := int(k % 23)
		for len(digits) <= n {
			digits = "0" + digits
		}
		s := digits
		if n > 0 {
			s = digits[:len(digits)-n] + "." + digits[len(digits)-n:]
		}
		if neg {
			s = "-" + s
		}
		got, ok := fastDecimal([]byte(s))
		if !ok {
			if m < 1e18 && n <= 19 {
				t.Fatalf("%q refused", s)
			}
			return
		}
		want, err := strconv.ParseFloat(s, 64)
		if err != nil || math.Float64bits(got) != math.Float64bits(want) {
			t.Fatalf("%q: fast %v (%x), strconv %v (%x)", s, got, math.Float64bits(got), want, math.Float64bits(want))
		}
	})
}
