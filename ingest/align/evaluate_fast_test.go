package align

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
)

// sameValue compares two values field by field, NaN equal to NaN (a value
// without data carries NaN).
func sameValue(a, b Value) bool {
	return math.Float64bits(a.SI) == math.Float64bits(b.SI) && a.Unit == b.Unit && a.Quality == b.Quality &&
		a.Reasons == b.Reasons && a.From.Equal(b.From) && a.To.Equal(b.To) && a.Coverage == b.Coverage &&
		a.Samples == b.Samples && a.Newest.Equal(b.Newest) && a.Tag == b.Tag
}

// Evaluate builds snapshots of machines with distinct value keys in a
// reused slice and fills each map once; the snapshots and the counted
// reasons must equal those built through the map (snapshotMap, the
// original construction), on random data with redundancy groups, bad and
// uncertain samples, stale and skewed inputs, and silent tags.
func TestSnapshotEqualsMapConstruction(t *testing.T) {
	tm := tagmap.Config{SitePressure: "101.325kPa", Tags: []tagmap.TagConfig{
		{Tag: "pg", Machine: "pump", Port: "discharge", Quantity: "p", Unit: "barg"},
		{Tag: "ps", Machine: "pump", Port: "suction", Quantity: "p", Unit: "kPag", Checks: tagmap.CheckConfig{StaleAfter: 25 * time.Second}},
		{Tag: "ta", Machine: "pump", Port: "suction", Quantity: "T", Unit: "degC"},
		{Tag: "tb", Machine: "pump", Port: "suction", Quantity: "T", Unit: "degC"},
		{Tag: "f1", Machine: "pump", Port: "suction", Quantity: "flow", Unit: "t/h"},
		{Tag: "f2", Machine: "pump", Port: "suction", Quantity: "flow", Unit: "t/h"},
		{Tag: "f3", Machine: "pump", Port: "suction", Quantity: "flow", Unit: "t/h"},
		{Tag: "w1", Machine: "pump", Port: "shaft", Quantity: "power", Unit: "kW"},
		{Tag: "w2", Machine: "pump", Port: "shaft", Quantity: "power", Unit: "kW"},
		{Tag: "a", Machine: "m", Port: "inlet", Quantity: "p", Checks: tagmap.CheckConfig{StaleAfter: 30 * time.Second}},
		{Tag: "b", Machine: "m", Port: "outlet", Quantity: "p"},
		{Tag: "c", Machine: "m", Port: "outlet", Quantity: "T"},
		{Tag: "site", Quantity: "T"},
	}, Groups: []tagmap.GroupConfig{
		{Name: "T", Mode: tagmap.AB, Tags: []string{"ta", "tb"}, Divergence: "1K"},
		{Name: "flow", Mode: tagmap.Median3, Tags: []string{"f1", "f2", "f3"}, Divergence: "10t/h"},
		{Name: "power", Mode: tagmap.Preferred, Tags: []string{"w1", "w2"}},
	}}
	cfg := Config{Window: 10 * time.Second, LateHorizon: 20 * time.Second, MaxSkew: 5 * time.Second}
	fast, mf := newEngine(t, cfg, tm)
	ref, mr := newEngine(t, cfg, tm)
	ref.mapPath = true
	for _, mc := range fast.machines {
		if !mc.uniqueKeys {
			t.Fatalf("machine %s: keys not unique, the fast path is not exercised", mc.name)
		}
	}
	tags := []string{"pg", "ps", "ta", "tb", "f1", "f2", "f3", "w1", "w2", "a", "b", "c", "site"}
	base := map[string]float64{"pg": 5, "ps": 20, "ta": 50, "tb": 50.5, "f1": 360, "f2": 362, "f3": 361, "w1": 750, "w2": 752,
		"a": 1e5, "b": 2e5, "c": 300, "site": 290}
	rng := rand.New(rand.NewPCG(3, 4))
	silent := map[string]int{}
	var skewSeen, staleSeen, badSeen bool
	for tick := 1; tick <= 400; tick++ {
		now := at(float64(10 * tick))
		var batch []ingest.Sample
		for _, tg := range tags {
			if silent[tg] > 0 {
				silent[tg]--
				continue
			}
			if rng.Float64() < 0.03 {
				silent[tg] = 1 + rng.IntN(6)
			}
			for k := 0; k < 1+rng.IntN(4); k++ {
				ts := float64(10*(tick-1)) + 10*rng.Float64()
				s := smp(tg, ts, base[tg]*(1+0.05*rng.NormFloat64()))
				switch r := rng.Float64(); {
				case r < 0.03:
					s.Quality = ingest.Bad
				case r < 0.06:
					s.Quality = ingest.Uncertain
				}
				batch = append(batch, s)
			}
		}
		cp := append([]ingest.Sample(nil), batch...)
		fast.Ingest(batch, now)
		ref.Ingest(cp, now)
		got, want := fast.Evaluate(now), ref.Evaluate(now)
		if len(got) != len(want) {
			t.Fatalf("tick %d: %d snapshots, reference %d", tick, len(got), len(want))
		}
		for i, g := range got {
			w := want[i]
			if g.Machine != w.Machine || !g.At.Equal(w.At) || !g.From.Equal(w.From) || g.Quality != w.Quality ||
				g.Reasons != w.Reasons || g.Skew != w.Skew || len(g.Values) != len(w.Values) {
				t.Fatalf("tick %d %s: got %v %v %v skew %v (%d values), reference %v %v %v skew %v (%d values)", tick, g.Machine,
					g.At, g.Quality, g.Reasons, g.Skew, len(g.Values), w.At, w.Quality, w.Reasons, w.Skew, len(w.Values))
			}
			skewSeen = skewSeen || g.Reasons.Has(ingest.ReasonSkew)
			for k, wv := range w.Values {
				gv, ok := g.Values[k]
				if !ok || !sameValue(gv, wv) {
					t.Fatalf("tick %d %s %v: got %+v (present %v), reference %+v", tick, g.Machine, k, gv, ok, wv)
				}
				staleSeen = staleSeen || wv.Reasons.Has(ingest.ReasonStale)
				badSeen = badSeen || wv.Quality == ingest.Bad
			}
		}
	}
	for r := ingest.Reason(1); int(r) < ingest.NumReasons; r++ {
		if mf.Reason(r) != mr.Reason(r) {
			t.Errorf("reason %v counted %d times, reference %d", r, mf.Reason(r), mr.Reason(r))
		}
	}
	if mf.Snapshots.Load() != mr.Snapshots.Load() {
		t.Errorf("snapshots counted %d, reference %d", mf.Snapshots.Load(), mr.Snapshots.Load())
	}
	if !skewSeen || !staleSeen || !badSeen {
		t.Errorf("the data did not exercise skew (%v), stale (%v) and bad (%v) values", skewSeen, staleSeen, badSeen)
	}
}
