package ingest_test

import (
	"fmt"
	"strings"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/align"
	"github.com/exergywatch/exergywatch/ingest/payload"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
)

// Benchmark plant: 100 machines x 10 tags (p in barg with site pressure,
// T in degC, flow in t/h, power in MW, speed in rpm, ...), messages of
// 100 samples, each tag sampled every 10 ms of source time, a 1 s window
// evaluated every 1 s of source time and released.
const (
	benchMachines   = 100
	benchTagsPerM   = 10
	benchPerMsg     = 100
	benchMsgs       = 2000 // messages per pass (200 000 samples)
	benchMsgSpacing = time.Millisecond
)

var benchBase = time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)

func benchTagMap() tagmap.Config {
	type q struct{ port, qty, unit string }
	qs := []q{{"inlet", "p", "barg"}, {"inlet", "T", "degC"}, {"outlet", "p", "bar"}, {"outlet", "T", "degC"}, {"inlet", "flow", "t/h"},
		{"shaft", "power", "MW"}, {"shaft", "speed", "rpm"}, {"outlet", "x", "%"}, {"ambient", "rh", "%"}, {"ambient", "T", "K"}}
	cfg := tagmap.Config{SitePressure: "101.325kPa"}
	for m := 0; m < benchMachines; m++ {
		for k, qq := range qs {
			cfg.Tags = append(cfg.Tags, tagmap.TagConfig{Tag: fmt.Sprintf("m%03d.t%d", m, k), Machine: fmt.Sprintf("m%03d", m),
				Port: qq.port, Quantity: qq.qty, Unit: qq.unit,
				Checks: tagmap.CheckConfig{SpikeWindow: 7, StaleAfter: 30 * time.Second}})
		}
	}
	return cfg
}

// benchValue is a plausible reading for tag index k in its configured unit.
func benchValue(k, i int) float64 {
	base := []float64{40, 450, 5, 250, 300, 50, 3000, 95, 60, 290}[k]
	return base * (1 + 0.001*float64(i%7))
}

// BenchMessages builds benchMsgs payloads in format f ("json" or "line").
func benchMessages(f string) [][]byte {
	msgs := make([][]byte, benchMsgs)
	nTags := benchMachines * benchTagsPerM
	for j := range msgs {
		ts := benchBase.Add(time.Duration(j) * benchMsgSpacing)
		var b strings.Builder
		if f == "json" {
			b.WriteString(`{"ts":"` + ts.Format(time.RFC3339Nano) + `","samples":[`)
		}
		for i := 0; i < benchPerMsg; i++ {
			tag := (j%(nTags/benchPerMsg))*benchPerMsg + i
			name := fmt.Sprintf("m%03d.t%d", tag/benchTagsPerM, tag%benchTagsPerM)
			v := benchValue(tag%benchTagsPerM, j)
			if f == "json" {
				if i > 0 {
					b.WriteByte(',')
				}
				fmt.Fprintf(&b, `{"tag":%q,"value":%g}`, name, v)
			} else {
				fmt.Fprintf(&b, "%s value=%g %d\n", name, v, ts.UnixNano())
			}
		}
		if f == "json" {
			b.WriteString("]}")
		}
		msgs[j] = []byte(b.String())
	}
	return msgs
}

func newBenchEngine(b *testing.B) (*align.Engine, *ingest.Metrics) {
	m, err := tagmap.Compile(benchTagMap())
	if err != nil {
		b.Fatal(err)
	}
	met := &ingest.Metrics{}
	e, err := align.New(align.Config{Window: time.Second, LateHorizon: 2 * time.Second}, m, met, nil)
	if err != nil {
		b.Fatal(err)
	}
	return e, met
}

// BenchmarkDecodeMapWindow measures decode + tag map + quality checks +
// window insertion (+ the 1 s evaluations) per message of 100 samples; the
// samples/s metric is per core (the loop runs on one goroutine).
func BenchmarkDecodeMapWindow(b *testing.B) {
	for _, f := range []string{"json", "line"} {
		b.Run(f, func(b *testing.B) {
			msgs := benchMessages(f)
			dec := payload.NewDecoder(payload.Auto)
			e, met := newBenchEngine(b)
			var batch []ingest.Sample
			var errs []payload.Error
			evalEvery := int(time.Second / benchMsgSpacing)
			offset := time.Duration(0)
			b.ReportAllocs()
			b.ResetTimer()
			for n := 0; n < b.N; n++ {
				j := n % benchMsgs
				if j == 0 && n > 0 {
					// Next pass: same payloads, so start a fresh engine
					// (source times would otherwise be late).
					b.StopTimer()
					e, met = newBenchEngine(b)
					offset = 0
					b.StartTimer()
				}
				now := benchBase.Add(time.Duration(j)*benchMsgSpacing + offset)
				batch, errs = dec.Decode(msgs[j], now, batch[:0], errs[:0])
				if len(errs) > 0 {
					b.Fatal(errs[0])
				}
				e.Ingest(batch, now)
				if (j+1)%evalEvery == 0 {
					for _, s := range e.Evaluate(now) {
						s.Release()
					}
				}
			}
			b.StopTimer()
			if met.Accepted.Load() == 0 {
				b.Fatal("nothing accepted")
			}
			b.ReportMetric(float64(b.N*benchPerMsg)/b.Elapsed().Seconds(), "samples/s")
		})
	}
}
