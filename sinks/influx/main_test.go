package influx

import (
	"context"
	"testing"
	"time"

	"go.uber.org/goleak"

	"github.com/exergywatch/exergywatch/compute"
)

// Every goroutine a sink starts must end with Close.
func TestMain(m *testing.M) { goleak.VerifyTestMain(m) }

func BenchmarkEncodeRecord(b *testing.B) {
	r := testRecord(1, 1) // three figures, one reason
	buf := make([]byte, 0, 1024)
	b.ReportAllocs()
	for b.Loop() {
		var err error
		buf, _, err = encodeRecord(buf[:0], "exw", r)
		if err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkParseLine(b *testing.B) {
	out, _, err := encodeRecord(nil, "exw", testRecord(1, 2))
	if err != nil {
		b.Fatal(err)
	}
	line := out[:len(out)-1]
	b.ReportAllocs()
	for b.Loop() {
		if _, err := parseLine(line); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkWriteRecordQueue measures the cost of WriteRecord up to the
// memory queue (the server is a dead address; the writer spools).
func BenchmarkWriteRecordQueue(b *testing.B) {
	cfg := Config{URL: "http://127.0.0.1:1", Bucket: "b", SpoolDir: b.TempDir(), MaxQueuedPoints: 1 << 24, BatchPoints: 5000,
		FlushInterval: time.Second, SpoolNoFsync: true, RetryInitial: time.Millisecond, RetryMax: time.Millisecond, DirectAttempts: 1}
	s, err := New("bench", cfg, nil)
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close(context.Background())
	ctx := context.Background()
	recs := make([]compute.Record, 1000)
	for i := range recs {
		recs[i] = testRecord(1, i)
	}
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		if err := s.WriteRecord(ctx, recs[i%len(recs)]); err != nil {
			b.Fatal(err)
		}
		i++
	}
}
