package store

import (
	"context"
	"fmt"
	"path/filepath"
	"syscall"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/compute"
)

// BenchmarkWriteRecordsBulk writes a replay's worth of records: 24
// machines, one record each per minute, 20 figures per record (the size of
// a compressor record with trends and cost), through WriteRecord with the
// default batching and fsync, then Close (everything committed). ns/record
// (wall) and cpu-ns/record (process CPU time) include encoding and the
// commits; the difference is mostly waiting for fsync.
func BenchmarkWriteRecordsBulk(b *testing.B) {
	const machines, ticks = 24, 1440
	base := time.Date(2025, 1, 1, 0, 0, 0, 0, time.UTC)
	recs := make([]compute.Record, machines)
	for m := range recs {
		r := compute.Record{Site: "quillmoor", Machine: fmt.Sprintf("gas-compressor-%03d", m), MachineKind: "compressor",
			Quality: compute.QualityGood}
		for k := 0; k < 20; k++ {
			r.Figures = append(r.Figures, compute.Figure{Name: fmt.Sprintf("figure_%02d_w_per_k", k), Value: 1234.5678 * float64(k+1),
				U95: 12.345 * float64(k+1), HasU95: k%3 != 0, Quality: compute.QualityGood})
		}
		recs[m] = r
	}
	ctx := context.Background()
	var cpu time.Duration
	for b.Loop() {
		b.StopTimer()
		s, err := Open("bulk", Config{Path: filepath.Join(b.TempDir(), "bulk.db")}, quiet)
		if err != nil {
			b.Fatal(err)
		}
		cpu0 := cpuTime()
		b.StartTimer()
		for k := 0; k < ticks; k++ {
			for m := range recs {
				r := recs[m]
				r.Time = base.Add(time.Duration(k) * time.Minute)
				r.Figures[0].Value = float64(k)
				if err := s.WriteRecord(ctx, r); err != nil {
					b.Fatal(err)
				}
			}
		}
		if err := s.Close(ctx); err != nil {
			b.Fatal(err)
		}
		b.StopTimer()
		cpu += cpuTime() - cpu0
		b.StartTimer()
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*machines*ticks), "ns/record")
	b.ReportMetric(float64(cpu.Nanoseconds())/float64(b.N*machines*ticks), "cpu-ns/record")
}

// cpuTime is the user+system CPU time of this process so far.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
