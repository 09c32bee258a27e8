package payload

import (
	"fmt"
	"strings"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
)

// benchPayloads builds 1000 messages of perMsg samples over 1000 tags
// (names like m012.t3), in line protocol or as JSON batches, with the
// values the end-to-end benchmark sends (%g of a base times 1.00k).
func benchPayloads(format string, perMsg int) [][]byte {
	base := []float64{40, 450, 5, 250, 300, 50, 3000, 95, 60, 290}
	start := time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)
	msgs := make([][]byte, 1000)
	for j := range msgs {
		var sb strings.Builder
		if format == "json" {
			sb.WriteString(`{"samples":[`)
		}
		for i := 0; i < perMsg; i++ {
			k := j*perMsg + i
			ts := start.Add(time.Duration(k) * 10 * time.Microsecond)
			tag := k % 1000
			v := base[tag%10] * (1 + 0.001*float64((k/1000)%7))
			if format == "json" {
				if i > 0 {
					sb.WriteByte(',')
				}
				fmt.Fprintf(&sb, `{"tag":"m%03d.t%d","ts":%d,"value":%g}`, tag/10, tag%10, ts.UnixMilli(), v)
			} else {
				fmt.Fprintf(&sb, "m%03d.t%d value=%g %d\n", tag/10, tag%10, v, ts.UnixNano())
			}
		}
		if format == "json" {
			sb.WriteString(`]}`)
		}
		msgs[j] = []byte(sb.String())
	}
	return msgs
}

// BenchmarkDecode is the decode alone (one goroutine): ns/op per message,
// samples/s per core.
func BenchmarkDecode(b *testing.B) {
	for _, format := range []string{"line", "json"} {
		for _, perMsg := range []int{1, 10, 100} {
			b.Run(fmt.Sprintf("%s/samples_per_msg=%d", format, perMsg), func(b *testing.B) {
				msgs := benchPayloads(format, perMsg)
				d := NewDecoder(Auto)
				var dst []ingest.Sample
				var errs []Error
				recv := time.Now()
				b.ReportAllocs()
				b.ResetTimer()
				for n := 0; n < b.N; n++ {
					dst, errs = d.Decode(msgs[n%len(msgs)], recv, dst[:0], errs[:0])
					if len(errs) != 0 || len(dst) != perMsg {
						b.Fatalf("%d samples, errors %v", len(dst), errs)
					}
				}
				b.ReportMetric(float64(b.N*perMsg)/b.Elapsed().Seconds(), "samples/s")
			})
		}
	}
}
