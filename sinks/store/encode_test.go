package store

import (
	"bytes"
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/sinks"
)

// checkSameAsWire fails unless marshalRecord gives the bytes (or the error)
// of sinks.MarshalRecord, the encoding/json reference; it reports whether
// the record took the hand-written path.
func checkSameAsWire(t *testing.T, r compute.Record) bool {
	t.Helper()
	got, err := marshalRecord(r)
	want, werr := sinks.MarshalRecord(r)
	if (err == nil) != (werr == nil) || err != nil && err.Error() != werr.Error() {
		t.Fatalf("record %+v: error %v, reference %v", r, err, werr)
	}
	if !bytes.Equal(got, want) {
		t.Fatalf("record %+v:\n got  %s\n want %s", r, got, want)
	}
	_, fast := appendRecordJSON(nil, &r)
	return fast
}

// The hand-written record encoder writes exactly what encoding/json writes
// through sinks.MarshalRecord, over random records: plain and escaped
// strings, floats around the exponent-form limits, negative zero, bad
// figures, missing and empty reasons, unknown qualities, times in other
// zones and outside years 0..9999.
func TestMarshalRecordEqualsWire(t *testing.T) {
	strs := []string{"", "quillmoor", "gas-compressor-001", "isentropic_efficiency", "input:T@outlet:stuck", "a b", "x<y", "r&d",
		"p>q", `say "hi"`, `back\slash`, "tab\there", "line\nbreak", "caf\u00e9", "\u2028", "\xff\xfe", "~!@#$%^*()_+{}|:?[];',./`"}
	floats := []float64{0, math.Copysign(0, -1), 1, -1, 0.8765432109876543, 1e-6, 9.99999e-7, 1e-7, -1e-7, 1.5e-300, 1e20, 1e21,
		-1e21, 123456789012345678901.0, math.MaxFloat64, math.SmallestNonzeroFloat64, 2.5e-10, 1234.5678e10, math.NaN(), math.Inf(1)}
	zones := []*time.Location{time.UTC, time.FixedZone("plus2", 2*3600), time.FixedZone("minus530", -(5*3600 + 1800))}
	rng := rand.New(rand.NewPCG(5, 6))
	pick := func(ss []string) string { return ss[rng.IntN(len(ss))] }
	reasons := func() []string {
		switch rng.IntN(4) {
		case 0:
			return nil
		case 1:
			return []string{}
		}
		out := make([]string, 1+rng.IntN(3))
		for i := range out {
			out[i] = pick(strs)
		}
		return out
	}
	quality := func() compute.Quality {
		if rng.IntN(40) == 0 {
			return compute.Quality(rng.IntN(8) - 2)
		}
		return compute.Quality(rng.IntN(4))
	}
	fast, total := 0, 0
	for i := 0; i < 20000; i++ {
		plainOnly := i%2 == 0
		s := func() string {
			if plainOnly {
				return strs[1+rng.IntN(4)]
			}
			return pick(strs)
		}
		tm := time.Date(2025, 1, 1, 0, 0, 0, 0, time.UTC).Add(time.Duration(rng.Int64N(int64(400 * 24 * time.Hour))))
		switch rng.IntN(50) {
		case 0:
			tm = time.Time{}
		case 1:
			tm = time.Date(10000, 1, 1, 0, 0, 0, 0, time.UTC)
		case 2:
			tm = time.Date(5, 3, 1, 0, 0, 0, 7, time.UTC)
		}
		r := compute.Record{Time: tm.In(zones[rng.IntN(len(zones))]), Site: s(), Machine: s(), MachineKind: s(),
			Quality: quality(), Reasons: reasons()}
		if plainOnly {
			r.Quality = compute.Quality(rng.IntN(4))
		}
		nf := rng.IntN(25)
		if rng.IntN(10) == 0 {
			nf = 0
		}
		for k := 0; k < nf; k++ {
			f := compute.Figure{Name: s(), Value: floats[rng.IntN(len(floats)-2)], U95: math.Abs(floats[rng.IntN(len(floats)-2)]),
				HasU95: rng.IntN(2) == 0, Quality: quality(), Reasons: reasons()}
			if plainOnly {
				f.Quality = compute.Quality(rng.IntN(4))
				f.Reasons = nil
				if rng.IntN(3) == 0 {
					f.Reasons = []string{s()}
				}
			}
			if rng.IntN(30) == 0 {
				f.Value = floats[len(floats)-2+rng.IntN(2)] // NaN or Inf: valid only when bad
			}
			if f.Quality == compute.QualityBad && rng.IntN(2) == 0 {
				f.Value = math.NaN()
			}
			r.Figures = append(r.Figures, f)
		}
		if checkSameAsWire(t, r) {
			fast++
		}
		total++
	}
	if fast < total/5 {
		t.Fatalf("only %d of %d records took the hand-written path", fast, total)
	}
	t.Logf("%d of %d records written by hand", fast, total)
}

// FuzzMarshalRecord: any record built from the fuzzed fields encodes to
// the bytes (or the error) of sinks.MarshalRecord.
func FuzzMarshalRecord(f *testing.F) {
	f.Add("quillmoor", "hp-turbine-001", "isentropic_efficiency", "transient", 0.8712, 0.0123, true, 0, int64(1735689660000000000))
	f.Add("s", "m", "x<y", "", 1e-7, 1e21, false, 2, int64(1))
	f.Add("", "m", "n", "r", math.NaN(), 0.0, false, 3, int64(-5))
	f.Add("caf\u00e9", "m\n", "n", "\xff", -0.0, -1.0, true, 7, int64(math.MaxInt64))
	f.Fuzz(func(t *testing.T, site, machine, name, reason string, v, u float64, hasU bool, q int, ns int64) {
		r := compute.Record{Time: time.Unix(0, ns).UTC(), Site: site, Machine: machine, MachineKind: "turbine",
			Quality: compute.Quality(q % 6), Reasons: []string{reason}}
		r.Figures = []compute.Figure{
			{Name: name, Value: v, U95: u, HasU95: hasU, Quality: compute.Quality(q % 5), Reasons: []string{reason}},
			{Name: name + "_trend", Value: v / 3, Quality: compute.QualityGood},
		}
		checkSameAsWire(t, r)
	})
}

func BenchmarkMarshalRecord(b *testing.B) {
	r := compute.Record{Time: time.Date(2025, 1, 1, 0, 1, 0, 0, time.UTC), Site: "quillmoor", Machine: "gas-compressor-001",
		MachineKind: "compressor", Quality: compute.QualityUncertain, Reasons: []string{"input:T@outlet:stuck"}}
	for k := 0; k < 20; k++ {
		r.Figures = append(r.Figures, compute.Figure{Name: "figure_" + string(rune('a'+k)) + "_w_per_k", Value: 1234.5678 * float64(k+1),
			U95: 12.345 * float64(k+1), HasU95: k%3 != 0, Quality: compute.Quality(k % 4)})
	}
	for _, tc := range []struct {
		name string
		f    func(compute.Record) ([]byte, error)
	}{{"wire", sinks.MarshalRecord}, {"store", marshalRecord}} {
		b.Run(tc.name, func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := tc.f(r); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
