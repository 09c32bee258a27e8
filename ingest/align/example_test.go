package align_test

import (
	"fmt"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/align"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
)

// Example shows the hand-over to compute: samples in, one snapshot per
// machine and tick out, Release after evaluation (JetStream acks).
// Numbers: 10 barg + 101.325 kPa = 1101325 Pa held for the whole window;
// 500 degC = 773.15 K (hand computed).
func Example() {
	tm, err := tagmap.Compile(tagmap.Config{SitePressure: "101.325kPa", Tags: []tagmap.TagConfig{
		{Tag: "U1.PT101", Machine: "hp-turbine", Port: "inlet", Quantity: "p", Unit: "barg"},
		{Tag: "U1.TT101", Machine: "hp-turbine", Port: "inlet", Quantity: "T", Unit: "degC"},
	}})
	if err != nil {
		panic(err)
	}
	eng, err := align.New(align.Config{Window: time.Minute}, tm, &ingest.Metrics{}, nil)
	if err != nil {
		panic(err)
	}
	t0 := time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC)
	eng.Ingest([]ingest.Sample{
		{Tag: "U1.PT101", SourceTime: t0.Add(-time.Minute), Value: 10},
		{Tag: "U1.TT101", SourceTime: t0.Add(-time.Minute), Value: 500},
	}, t0.Add(-time.Minute))
	for _, snap := range eng.Evaluate(t0) {
		for _, k := range []tagmap.Key{{Port: "inlet", Quantity: "p"}, {Port: "inlet", Quantity: "T"}} {
			v := snap.Values[k]
			fmt.Printf("%s %s = %.2f %s (%s, coverage %.0f%%)\n", snap.Machine, k, v.SI, v.Unit, v.Quality, 100*v.Coverage)
		}
		snap.Release() // after compute evaluated it
	}
	// Output:
	// hp-turbine inlet.p = 1101325.00 Pa (good, coverage 100%)
	// hp-turbine inlet.T = 773.15 K (good, coverage 100%)
}
