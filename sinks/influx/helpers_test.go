package influx

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/sinks/vmtest"
)

// t0 is the first evaluation time of the synthetic records (arbitrary, in the
// past so that no retention question arises).
var t0 = time.Date(2026, 11, 30, 8, 0, 0, 0, time.UTC)

// testRecord builds a deterministic record for machine m at step k (one
// evaluation per second on the compressed clock). The numbers are synthetic
// ("common practice, no source"): plausible efficiencies and rates whose
// exact values the read-back test compares. Every 7th step the lost-work
// figure is Bad with a NaN value (it must never reach the server); every 5th
// step a figure carries a reason code.
func testRecord(m, k int) compute.Record {
	eff := 0.80 + 0.0001*float64(m) + 1e-6*float64(k%1000)
	sgen := 1234.5 + float64(m) + 0.25*float64(k%400)
	r := compute.Record{
		Time:        t0.Add(time.Duration(k) * time.Second).Add(123 * time.Millisecond),
		Site:        "north plant",
		Machine:     fmt.Sprintf("m%d", m),
		MachineKind: []string{"turbine", "pump", "compressor"}[m%3],
		Quality:     compute.QualityGood,
		Figures: []compute.Figure{
			{Name: "isentropic_efficiency", Value: eff, U95: 0.012, HasU95: true, Quality: compute.QualityGood},
			{Name: "entropy_generation_rate_w_per_k", Value: sgen, U95: 20.5, HasU95: true, Quality: compute.QualityGood},
			{Name: "lost_work_rate_w", Value: 298.15 * sgen, Quality: compute.QualityGood},
		},
	}
	if k%7 == 3 {
		r.Figures[2] = compute.Figure{Name: "lost_work_rate_w", Value: math.NaN(), Quality: compute.QualityBad, Reasons: []string{"input_bad"}}
		r.Quality = compute.QualityBad
		r.Reasons = []string{"input_bad"}
	} else if k%5 == 1 {
		r.Figures[0].Quality = compute.QualityUncertain
		r.Figures[0].Reasons = []string{"near_saturation"}
		r.Quality = compute.QualityUncertain
	}
	return r
}

// sample is one expected point of an exported series.
type sample struct {
	ms int64
	v  float64
}

// expectRecord adds the points a record must produce to want, keyed by the
// vmtest.Series key. It follows the series design documented in
// lineproto.go, written out by hand here rather than through the encoder.
func expectRecord(want map[string][]sample, r compute.Record) {
	ms := r.Time.UnixMilli()
	add := func(labels map[string]string, v float64) {
		k := vmtest.Series{Metric: labels}.Key()
		want[k] = append(want[k], sample{ms, v})
	}
	lab := func(name string, extra ...string) map[string]string {
		m := map[string]string{"__name__": name, "site": r.Site, "machine": r.Machine, "kind": r.MachineKind}
		for i := 0; i+1 < len(extra); i += 2 {
			m[extra[i]] = extra[i+1]
		}
		return m
	}
	q := r.Quality.String()
	add(lab("exw_machine_quality_code", "quality", q), float64(r.Quality))
	for _, f := range r.Figures {
		if f.Quality != compute.QualityBad {
			add(lab("exw_machine_"+f.Name, "quality", q), f.Value)
			if f.HasU95 {
				add(lab("exw_machine_"+f.Name+"_u95", "quality", q), f.U95)
			}
		}
		add(lab("exw_machine_"+f.Name+"_quality_code", "quality", q), float64(f.Quality))
		for _, reason := range f.Reasons {
			add(lab("exw_reason_active", "scope", f.Name, "reason", reason), 1)
		}
	}
	for _, reason := range r.Reasons {
		add(lab("exw_reason_active", "scope", "record", "reason", reason), 1)
	}
}

// compareExport checks that the exported series are exactly want: same label
// sets, each sample present exactly once at the same millisecond, values
// equal within VictoriaMetrics' storage precision. VictoriaMetrics 1.79.5
// keeps about 12 significant decimal digits per block (measured here: 0.85123456789012 came back as 0.85123456789;
// no published figure), so values compare to 1e-9 relative to the largest
// magnitude of the series.
func compareExport(t *testing.T, got []vmtest.Series, want map[string][]sample) {
	t.Helper()
	gotBy := map[string]vmtest.Series{}
	for _, s := range got {
		gotBy[s.Key()] = s
	}
	for k := range gotBy {
		if _, ok := want[k]; !ok {
			t.Errorf("unexpected series %s", k)
		}
	}
	bad := 0
	for k, ws := range want {
		g, ok := gotBy[k]
		if !ok {
			t.Errorf("missing series %s (%d points)", k, len(ws))
			continue
		}
		sort.Slice(ws, func(i, j int) bool { return ws[i].ms < ws[j].ms })
		if len(g.Timestamps) != len(ws) {
			t.Errorf("series %s: %d points, want %d", k, len(g.Timestamps), len(ws))
		}
		scale := 0.0
		for _, w := range ws {
			scale = math.Max(scale, math.Abs(w.v))
		}
		for i := 0; i < len(ws) && i < len(g.Timestamps); i++ {
			if g.Timestamps[i] != ws[i].ms || math.Abs(g.Values[i]-ws[i].v) > 1e-9*scale {
				if bad++; bad < 10 {
					t.Errorf("series %s point %d: got %d=%s, want %d=%s", k, i, g.Timestamps[i],
						strconv.FormatFloat(g.Values[i], 'g', -1, 64), ws[i].ms, strconv.FormatFloat(ws[i].v, 'g', -1, 64))
				}
			}
		}
	}
}
