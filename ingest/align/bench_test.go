package align

import (
	"fmt"
	"syscall"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
)

// The stream of ingest/natsrc's end-to-end benchmark without NATS and
// decoding: 100 machines x 10 tags (bar, degC, t/h, MW, rpm, %, K; Hampel
// window 7), tag k%1000 every 1000 samples 10 µs apart, 400 000 samples,
// 5 s window, 1 h late horizon, an evaluation every 100 000 samples (the
// end-to-end pipeline's 100 ms ticker at about 1 M samples/s), snapshots
// released.
const (
	benchTags    = 1000
	benchSamples = 400000
)

func benchEngineTagMap() tagmap.Config {
	type q struct{ port, qty, unit string }
	qs := []q{{"inlet", "p", "bar"}, {"inlet", "T", "degC"}, {"outlet", "p", "bar"}, {"outlet", "T", "degC"}, {"inlet", "flow", "t/h"},
		{"shaft", "power", "MW"}, {"shaft", "speed", "rpm"}, {"outlet", "x", "%"}, {"ambient", "rh", "%"}, {"ambient", "T", "K"}}
	var cfg tagmap.Config
	for t := 0; t < benchTags; t++ {
		qq := qs[t%10]
		cfg.Tags = append(cfg.Tags, tagmap.TagConfig{Tag: fmt.Sprintf("m%03d.t%d", t/10, t%10), Machine: fmt.Sprintf("m%03d", t/10),
			Port: qq.port, Quantity: qq.qty, Unit: qq.unit, Checks: tagmap.CheckConfig{SpikeWindow: 7}})
	}
	return cfg
}

// benchStream returns the samples in batches of perBatch, tag names
// interned as a decoder does (one string per tag).
func benchStream(start time.Time, perBatch int) [][]ingest.Sample {
	names := make([]string, benchTags)
	for t := range names {
		names[t] = fmt.Sprintf("m%03d.t%d", t/10, t%10)
	}
	base := []float64{40, 450, 5, 250, 300, 50, 3000, 95, 60, 290}
	var out [][]ingest.Sample
	for k := 0; k < benchSamples; k += perBatch {
		b := make([]ingest.Sample, 0, perBatch)
		for i := k; i < k+perBatch && i < benchSamples; i++ {
			tag := i % benchTags
			b = append(b, ingest.Sample{Tag: names[tag], SourceTime: start.Add(time.Duration(i) * 10 * time.Microsecond),
				ReceiveTime: start, Value: base[tag%10] * (1 + 0.001*float64((i/benchTags)%7))})
		}
		out = append(out, b)
	}
	return out
}

// BenchmarkIngest measures Engine.Ingest (tag map, quality checks, window
// insertion) per sample (ns/sample) and the evaluations in between
// (eval_ns/sample), on one goroutine; cpu_ns/sample is the CPU time of
// the whole process over both (GC included), which a shared machine
// disturbs less than the wall clock.
func BenchmarkIngest(b *testing.B) {
	for _, perBatch := range []int{10, 100, 512} {
		b.Run(fmt.Sprintf("batch=%d", perBatch), func(b *testing.B) {
			start := time.Now().Add(-time.Minute).Truncate(time.Second)
			batches := benchStream(start, perBatch)
			m, err := tagmap.Compile(benchEngineTagMap())
			if err != nil {
				b.Fatal(err)
			}
			b.ReportAllocs()
			b.ResetTimer()
			var elapsed, evals, cpu time.Duration
			for n := 0; n < b.N; n++ {
				b.StopTimer()
				met := &ingest.Metrics{}
				e, err := New(Config{Window: 5 * time.Second, LateHorizon: time.Hour}, m, met, nil)
				if err != nil {
					b.Fatal(err)
				}
				b.StartTimer()
				done := 0
				c0 := cpuTime()
				for _, batch := range batches {
					now := batch[len(batch)-1].SourceTime
					t1 := time.Now()
					e.Ingest(batch, now)
					t2 := time.Now()
					elapsed += t2.Sub(t1)
					if done += len(batch); done%100000 < len(batch) {
						for _, s := range e.Evaluate(now) {
							s.Release()
						}
						evals += time.Since(t2)
					}
				}
				cpu += cpuTime() - c0
				if got := met.Accepted.Load(); got != benchSamples {
					b.Fatalf("accepted %d of %d", got, benchSamples)
				}
			}
			b.ReportMetric(float64(elapsed.Nanoseconds())/float64(b.N*benchSamples), "ns/sample")
			b.ReportMetric(float64(evals.Nanoseconds())/float64(b.N*benchSamples), "eval_ns/sample")
			b.ReportMetric(float64(cpu.Nanoseconds())/float64(b.N*benchSamples), "cpu_ns/sample")
		})
	}
}

// cpuTime is the user and system CPU time of the process so far.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
