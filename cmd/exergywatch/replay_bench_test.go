package main

// Benchmarks of the replay pipeline around the machine models: the file
// readers (CSV and line protocol), the alignment engine as the replay drives
// it, and the in-memory sample source used by BenchmarkReplay.

import (
	"bufio"
	"context"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/config"
	"github.com/exergywatch/exergywatch/ingest"
)

// sliceSource replays samples generated beforehand, so that a benchmark
// times the pipeline and not the generator.
type sliceSource struct {
	s []ingest.Sample
	i int
}

func (s *sliceSource) next() (ingest.Sample, bool, error) {
	if s.i >= len(s.s) {
		return ingest.Sample{}, false, nil
	}
	s.i++
	return s.s[s.i-1], true, nil
}

func (s *sliceSource) progress() float64 {
	if len(s.s) == 0 {
		return 1
	}
	return float64(s.i) / float64(len(s.s))
}

// generate drains a copy of sp (with the given noise seed) into memory.
func (s *synthPlant) generate(seed1, seed2 uint64) []ingest.Sample {
	src := *s
	src.rng = rand.New(rand.NewPCG(seed1, seed2))
	out := make([]ingest.Sample, 0, src.steps*len(src.tags))
	for {
		x, ok, _ := src.next()
		if !ok {
			return out
		}
		out = append(out, x)
	}
}

// writeSynth writes the samples in the format of `exergywatch simulate`
// (writeReadings): CSV tag,time,value,quality with RFC 3339 times, or line
// protocol with nanosecond times; values with 9 significant digits.
func writeSynth(path string, ss []ingest.Sample, lineProto bool) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	w := bufio.NewWriterSize(f, 1<<20)
	var b []byte
	if !lineProto {
		b = append(b, "tag,time,value,quality\n"...)
	}
	for _, s := range ss {
		if lineProto {
			b = append(b, s.Tag...)
			b = append(b, " value="...)
			b = strconv.AppendFloat(b, s.Value, 'g', 9, 64)
			b = append(b, `,quality="good" `...)
			b = strconv.AppendInt(b, s.SourceTime.UnixNano(), 10)
		} else {
			b = append(b, s.Tag...)
			b = append(b, ',')
			b = s.SourceTime.AppendFormat(b, time.RFC3339Nano)
			b = append(b, ',')
			b = strconv.AppendFloat(b, s.Value, 'g', 9, 64)
			b = append(b, ",good"...)
		}
		b = append(b, '\n')
		if len(b) > 64<<10 {
			if _, err := w.Write(b); err != nil {
				f.Close()
				return err
			}
			b = b[:0]
		}
	}
	if _, err := w.Write(b); err != nil {
		f.Close()
		return err
	}
	if err := w.Flush(); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

// daySamples is a day of 1-minute data of 4 plant copies (24 machines, 136
// tags), the BenchmarkReplay input.
func daySamples(b *testing.B) []ingest.Sample {
	start := time.Date(2025, 1, 1, 0, 0, 0, 0, time.UTC)
	sp := newSynthPlant(b, yearOptions(start, 4), time.Minute, 24*time.Hour, time.Hour)
	return sp.generate(1, 2)
}

// BenchmarkReplayParse reads a day of 1-minute data of 4 plant copies
// (136 tags, 195 976 rows) as `exergywatch simulate` writes it, through the
// replay's readers (openInputs: line reader, parser, reorder buffer, merge):
// one CSV file, one line-protocol file, and the same CSV split into one file
// per tag (136-way merge). samples/s is on one goroutine (the replay reads
// on one); cpu-ns/sample is the process CPU time per sample (with the
// garbage collector; steadier than wall time on a shared machine).
func BenchmarkReplayParse(b *testing.B) {
	ss := daySamples(b)
	dir := b.TempDir()
	csvPath, lpPath := filepath.Join(dir, "day.csv"), filepath.Join(dir, "day.lp")
	if err := writeSynth(csvPath, ss, false); err != nil {
		b.Fatal(err)
	}
	if err := writeSynth(lpPath, ss, true); err != nil {
		b.Fatal(err)
	}
	byTag := map[string][]ingest.Sample{}
	var tags []string
	for _, s := range ss {
		if _, ok := byTag[s.Tag]; !ok {
			tags = append(tags, s.Tag)
		}
		byTag[s.Tag] = append(byTag[s.Tag], s)
	}
	var perTag []string
	for i, tg := range tags {
		p := filepath.Join(dir, "tag"+strconv.Itoa(i)+".csv")
		if err := writeSynth(p, byTag[tg], false); err != nil {
			b.Fatal(err)
		}
		perTag = append(perTag, p)
	}
	for _, tc := range []struct {
		name   string
		inputs []string
	}{{"csv", []string{csvPath}}, {"line", []string{lpPath}}, {"csv-per-tag", perTag}} {
		b.Run(tc.name, func(b *testing.B) {
			var size int64
			for _, p := range tc.inputs {
				st, err := os.Stat(p)
				if err != nil {
					b.Fatal(err)
				}
				size += st.Size()
			}
			var ms0, ms1 runtime.MemStats
			runtime.ReadMemStats(&ms0)
			cpu0 := cpuTime()
			n := 0
			for b.Loop() {
				var rej rejects
				in, err := openInputs(tc.inputs, "auto", time.Nanosecond, &rej)
				if err != nil {
					b.Fatal(err)
				}
				k := 0
				for {
					s, ok, err := in.next()
					if err != nil {
						b.Fatal(err)
					}
					if !ok {
						break
					}
					if s.Tag == "" {
						b.Fatal("sample without tag")
					}
					k++
				}
				in.Close()
				if k != len(ss) || rej.Total != 0 {
					b.Fatalf("read %d samples, %d rejected; want %d, 0", k, rej.Total, len(ss))
				}
				n += k
			}
			cpu := cpuTime() - cpu0
			runtime.ReadMemStats(&ms1)
			b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "samples/s")
			b.ReportMetric(float64(cpu.Nanoseconds())/float64(n), "cpu-ns/sample")
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(n), "ns/sample")
			b.ReportMetric(float64(ms1.Mallocs-ms0.Mallocs)/float64(n), "allocs/sample")
			b.ReportMetric(float64(size)/float64(len(ss)), "bytes/sample")
		})
	}
}

// BenchmarkReplayAlign drives the alignment engine of the replay
// configuration (4 plant copies, 1-minute ticks) the way replay does:
// samples in chunks into Engine.Ingest, a snapshot per machine at every tick
// from Engine.Evaluate, each released at once. Metrics: ingest ns per sample
// and evaluate ns per snapshot (wall), allocations and process CPU time
// (with the garbage collector) per sample overall.
func BenchmarkReplayAlign(b *testing.B) {
	ss := daySamples(b)
	cfg, err := config.Load(replayConfig(b, b.TempDir(), 4, time.Minute, time.Minute))
	if err != nil {
		b.Fatal(err)
	}
	cfg.Sinks = nil
	iv := cfg.Evaluation.Interval.D()
	var ingestNs, evalNs time.Duration
	var samples, snaps int
	var mallocs uint64
	var ms0, ms1 runtime.MemStats
	var cpu time.Duration
	for b.Loop() {
		b.StopTimer()
		p, err := buildPipeline(cfg, pipelineOptions{})
		if err != nil {
			b.Fatal(err)
		}
		runtime.ReadMemStats(&ms0)
		cpu0 := cpuTime()
		b.StartTimer()
		tick := ss[0].SourceTime.Truncate(iv).Add(iv)
		chunk := make([]ingest.Sample, 0, 4096)
		flush := func() {
			if len(chunk) == 0 {
				return
			}
			t0 := time.Now()
			p.engine.Ingest(chunk, chunk[len(chunk)-1].SourceTime)
			ingestNs += time.Since(t0)
			samples += len(chunk)
			chunk = chunk[:0]
		}
		evaluate := func(t time.Time) {
			flush()
			t0 := time.Now()
			out := p.engine.Evaluate(t)
			evalNs += time.Since(t0)
			snaps += len(out)
			for _, s := range out {
				s.Release()
			}
		}
		for _, s := range ss {
			for s.SourceTime.After(tick) {
				evaluate(tick)
				tick = tick.Add(iv)
			}
			if len(chunk) >= 4096 {
				flush()
			}
			chunk = append(chunk, s)
		}
		evaluate(tick)
		b.StopTimer()
		cpu += cpuTime() - cpu0
		runtime.ReadMemStats(&ms1)
		mallocs += ms1.Mallocs - ms0.Mallocs
		if err := p.close(); err != nil {
			b.Fatal(err)
		}
		b.StartTimer()
	}
	b.ReportMetric(float64(ingestNs.Nanoseconds())/float64(samples), "ingest-ns/sample")
	b.ReportMetric(float64(evalNs.Nanoseconds())/float64(snaps), "evaluate-ns/snapshot")
	b.ReportMetric(float64(evalNs.Nanoseconds()+ingestNs.Nanoseconds())/float64(samples), "ns/sample")
	b.ReportMetric(float64(mallocs)/float64(samples), "allocs/sample")
	b.ReportMetric(float64(cpu.Nanoseconds())/float64(samples), "cpu-ns/sample")
}

// BenchmarkReplayFeed is the replay without the machine models: a day of
// 1-minute data of 4 plant copies read from a file (as `exergywatch
// simulate` writes it), merged, aligned and ticked by replay, with the
// evaluators removed so each snapshot is released unevaluated. It is the
// cost per sample of everything around the models, and its samples/s the
// most a replay from files can reach however fast the models become.
func BenchmarkReplayFeed(b *testing.B) {
	ss := daySamples(b)
	dir := b.TempDir()
	for _, tc := range []struct {
		name      string
		lineProto bool
	}{{"csv", false}, {"line", true}} {
		b.Run(tc.name, func(b *testing.B) {
			path := filepath.Join(dir, "day."+tc.name)
			if err := writeSynth(path, ss, tc.lineProto); err != nil {
				b.Fatal(err)
			}
			cfg, err := config.Load(replayConfig(b, b.TempDir(), 4, time.Minute, time.Minute))
			if err != nil {
				b.Fatal(err)
			}
			cfg.Sinks = nil
			var cpu time.Duration
			n := uint64(0)
			for b.Loop() {
				b.StopTimer()
				p, err := buildPipeline(cfg, pipelineOptions{})
				if err != nil {
					b.Fatal(err)
				}
				clear(p.evals)
				var rej rejects
				in, err := openInputs([]string{path}, "auto", time.Nanosecond, &rej)
				if err != nil {
					b.Fatal(err)
				}
				cpu0 := cpuTime()
				b.StartTimer()
				res, err := replay(context.Background(), p, in, replayOptions{})
				if err != nil {
					b.Fatal(err)
				}
				b.StopTimer()
				cpu += cpuTime() - cpu0
				in.Close()
				if err := p.close(); err != nil {
					b.Fatal(err)
				}
				if res.Samples != uint64(len(ss)) || res.Evaluations != 0 {
					b.Fatalf("%d samples, %d evaluations; want %d, 0", res.Samples, res.Evaluations, len(ss))
				}
				n += res.Samples
				b.StartTimer()
			}
			b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "samples/s")
			b.ReportMetric(float64(cpu.Nanoseconds())/float64(n), "cpu-ns/sample")
		})
	}
}
