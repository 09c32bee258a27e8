package natsrc

import (
	"context"
	"fmt"
	"sort"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/config/natsconn"
	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/align"
	"github.com/exergywatch/exergywatch/ingest/tagmap"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

const (
	e2eSamples = 400000 // samples in the stream
	e2eTags    = 1000   // 100 machines x 10 tags
)

func e2eTagMap() tagmap.Config {
	type q struct{ port, qty, unit string }
	qs := []q{{"inlet", "p", "bar"}, {"inlet", "T", "degC"}, {"outlet", "p", "bar"}, {"outlet", "T", "degC"}, {"inlet", "flow", "t/h"},
		{"shaft", "power", "MW"}, {"shaft", "speed", "rpm"}, {"outlet", "x", "%"}, {"ambient", "rh", "%"}, {"ambient", "T", "K"}}
	var cfg tagmap.Config
	for t := 0; t < e2eTags; t++ {
		qq := qs[t%10]
		cfg.Tags = append(cfg.Tags, tagmap.TagConfig{Tag: fmt.Sprintf("m%03d.t%d", t/10, t%10), Machine: fmt.Sprintf("m%03d", t/10),
			Port: qq.port, Quantity: qq.qty, Unit: qq.unit, Checks: tagmap.CheckConfig{SpikeWindow: 7}})
	}
	return cfg
}

func e2eFill(b *testing.B, js jetstream.JetStream, start time.Time, perMsg int) {
	b.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	_ = js.DeleteStream(ctx, "BENCH")
	if _, err := js.CreateStream(ctx, jetstream.StreamConfig{Name: "BENCH", Subjects: []string{"bench.>"}, Storage: jetstream.FileStorage}); err != nil {
		b.Fatal(err)
	}
	e2eMsgs := e2eSamples / perMsg
	base := []float64{40, 450, 5, 250, 300, 50, 3000, 95, 60, 290}
	for j := 0; j < e2eMsgs; j++ {
		var sb strings.Builder
		for i := 0; i < perMsg; i++ {
			k := j*perMsg + i // sample number: tag k%1000 every 1000 samples, 10 us apart
			ts := start.Add(time.Duration(k) * 10 * time.Microsecond).UnixNano()
			tag := k % e2eTags
			fmt.Fprintf(&sb, "m%03d.t%d value=%g %d\n", tag/10, tag%10, base[tag%10]*(1+0.001*float64((k/e2eTags)%7)), ts)
		}
		if _, err := js.PublishAsync(fmt.Sprintf("bench.u%d", j%4), []byte(sb.String())); err != nil {
			b.Fatal(err)
		}
		if j%2000 == 1999 { // stay below the async window (a loaded machine stalls it)
			select {
			case <-js.PublishAsyncComplete():
			case <-ctx.Done():
				b.Fatal("publish timed out")
			}
		}
	}
	select {
	case <-js.PublishAsyncComplete():
	case <-ctx.Done():
		b.Fatal("publish timed out")
	}
}

// bareRun consumes the whole stream with a plain nats.go consumer that only
// counts messages, and returns the sample rate (messages x samples per
// message / elapsed).
// With acked, the consumer has AckAll policy and the subscriber sends a
// cumulative ack every 256 messages and at the end: the server-side cost
// of at-least-once delivery without any of our processing.
func bareRun(b *testing.B, js jetstream.JetStream, n, perMsg int, acked bool) rate {
	e2eMsgs := int64(e2eSamples / perMsg)
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	cc := jetstream.ConsumerConfig{Durable: fmt.Sprintf("bare%d", n), AckPolicy: jetstream.AckNonePolicy, FilterSubjects: []string{"bench.>"}}
	if acked {
		cc.Durable, cc.AckPolicy, cc.MaxAckPending = fmt.Sprintf("bareacked%d", n), jetstream.AckAllPolicy, 20000
	}
	cons, err := js.CreateOrUpdateConsumer(ctx, "BENCH", cc)
	if err != nil {
		b.Fatal(err)
	}
	var count atomic.Int64
	done := make(chan struct{})
	var t0 time.Time // set at the first message: setup is not timed
	var c0 time.Duration
	consCtx, err := cons.Consume(func(m jetstream.Msg) {
		n := count.Add(1)
		if n == 1 {
			t0, c0 = time.Now(), processCPU()
		}
		if acked && (n%256 == 0 || n == e2eMsgs) {
			_ = m.Ack()
		}
		if n == e2eMsgs {
			close(done)
		}
	}, jetstream.PullMaxMessages(512))
	if err != nil {
		b.Fatal(err)
	}
	select {
	case <-done:
	case <-ctx.Done():
		b.Fatalf("bare subscriber got %d of %d", count.Load(), e2eMsgs)
	}
	el, cpu := time.Since(t0), processCPU()-c0
	consCtx.Stop()
	<-consCtx.Closed()
	return rate{float64(e2eSamples) / el.Seconds(), cpu.Seconds() / el.Seconds()}
}

// rate is one timed run: samples per second, and the cores the whole
// process (embedded server included) kept busy meanwhile.
type rate struct{ samples, cores float64 }

func rates(rs []rate) (samples, cores []float64) {
	for _, r := range rs {
		samples, cores = append(samples, r.samples), append(cores, r.cores)
	}
	return samples, cores
}

// pipelineRun runs the NATS source (JetStream durable, cumulative acks) ->
// bounded queue -> engine (map, checks, window) -> snapshots every 100 ms
// -> release (acks). The rate is timed until every sample was taken into a
// window; then it waits (untimed) until every message was acknowledged.
func pipelineRun(b *testing.B, url string, n, perMsg int) (rate, *ingest.Metrics) {
	return pipelineRunMode(b, url, n, perMsg, ModeJetStream, nil)
}

// pipelineRunMode is pipelineRun for either delivery mode. In core mode
// publish (called once the subscription is up) sends the stream; the rate
// is timed from the first message until every sample was taken into a
// window or dropped at the full queue (counted in QueueDropped).
func pipelineRunMode(b *testing.B, url string, n, perMsg int, mode string, publish func()) (rate, *ingest.Metrics) {
	e2eMsgs := uint64(e2eSamples / perMsg)
	tm, err := tagmap.Compile(e2eTagMap())
	if err != nil {
		b.Fatal(err)
	}
	met := &ingest.Metrics{}
	eng, err := align.New(align.Config{Window: 5 * time.Second, LateHorizon: time.Hour}, tm, met, quietLog())
	if err != nil {
		b.Fatal(err)
	}
	q := ingest.NewQueue(256, met)
	cfg := Config{Settings: natsconn.Settings{URLs: []string{url}}, Subjects: []string{"bench.>"}, Mode: ModeJetStream, Stream: "BENCH",
		Durable: fmt.Sprintf("ew%d", n), FetchBatch: 512, AckFlush: 20 * time.Millisecond}
	if mode == ModeCore {
		cfg = Config{Settings: natsconn.Settings{URLs: []string{url}}, Subjects: []string{"benchc.>"}, Mode: ModeCore,
			PendingMsgs: int(e2eMsgs) + 16, PendingBytes: 1 << 30}
	}
	src, err := New(cfg, q, met, quietLog(), nil)
	if err != nil {
		b.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	ticker := time.NewTicker(100 * time.Millisecond)
	defer ticker.Stop()
	out := make(chan []*align.Snapshot, 4)
	engDone, srcDone, relDone := make(chan error, 1), make(chan error, 1), make(chan struct{})
	go func() { engDone <- eng.Run(ctx, q, ticker.C, nil, out) }()
	go func() {
		defer close(relDone)
		for {
			select {
			case <-ctx.Done():
				return
			case snaps := <-out:
				for _, s := range snaps {
					s.Release()
				}
			}
		}
	}()
	go func() { srcDone <- src.Run(ctx) }()
	deadline := time.Now().Add(2 * time.Minute)
	if mode == ModeCore {
		waitSubscribed(b, src, deadline)
		go publish()
	}
	for met.Messages.Load() == 0 { // setup (connect, consumer) is not timed
		if time.Now().After(deadline) {
			b.Fatal("pipeline: no message")
		}
		time.Sleep(50 * time.Microsecond)
	}
	t0, c0 := time.Now(), processCPU()
	for met.Accepted.Load()+met.Reason(ingest.ReasonQueueFull) < e2eSamples {
		if time.Now().After(deadline) {
			b.Fatalf("pipeline: accepted %d of %d", met.Accepted.Load(), e2eSamples)
		}
		time.Sleep(time.Millisecond)
	}
	el, cpu := time.Since(t0), processCPU()-c0
	// Every message must also be acknowledged (after the next tick and
	// ack flush); not part of the timed throughput.
	for mode == ModeJetStream && met.Acked.Load() < e2eMsgs {
		if time.Now().After(deadline) {
			b.Fatalf("pipeline: acked %d of %d messages", met.Acked.Load(), e2eMsgs)
		}
		time.Sleep(time.Millisecond)
	}
	cancel()
	<-srcDone
	<-engDone
	<-relDone
	return rate{float64(met.Accepted.Load()) / el.Seconds(), cpu.Seconds() / el.Seconds()}, met
}

// BenchmarkEndToEndJetStream compares, in the same run and on the same
// stored stream (400 000 line-protocol samples, 1, 10 or 100 per message),
// the full pipeline against a bare nats.go subscriber that only counts
// messages. Run with -benchtime=Nx; the rates are medians over N runs,
// bare and pipeline runs alternating so that both see the same load.
//
// Fairness: both consumers pull 512 messages at a time from their own
// durable consumer on the same stream; the bare one acknowledges nothing
// (bare_acked shows the server-side cost of acknowledgements alone). The
// pipeline's clock stops when the last sample is in a window, which
// includes up to one batch linger (5 ms) and one 1 ms poll: that counts
// against the pipeline, never for it.
//
// Also reported: the cores the whole process kept busy during each timed
// span (*_cores), and pipeline_%_of_bare_per_core, the ratio of samples
// per CPU-second (see perCorePercent): on a loaded machine the wall-clock
// ratio mostly measures how the OS shared the cores between the runs.
func BenchmarkEndToEndJetStream(b *testing.B) {
	ns := startNATS(b, baseOpts(b, true))
	nc, err := nats.Connect(ns.url())
	if err != nil {
		b.Fatal(err)
	}
	defer nc.Close()
	js, err := jetstream.New(nc)
	if err != nil {
		b.Fatal(err)
	}
	for _, perMsg := range []int{1, 10, 100} {
		b.Run(fmt.Sprintf("samples_per_msg=%d", perMsg), func(b *testing.B) {
			e2eFill(b, js, time.Now(), perMsg)
			var bare, bareAcked, ours []rate
			b.ResetTimer()
			for n := 0; n < b.N; n++ {
				bare = append(bare, bareRun(b, js, n, perMsg, false))
				bareAcked = append(bareAcked, bareRun(b, js, n, perMsg, true))
				r, met := pipelineRun(b, ns.url(), n, perMsg)
				ours = append(ours, r)
				if d := met.QueueDropped.Load(); d != 0 {
					b.Fatalf("jetstream mode dropped %d batches", d)
				}
			}
			b.StopTimer()
			bs, bc := rates(bare)
			ps, pc := rates(ours)
			as, _ := rates(bareAcked)
			mb, mo := median(bs), median(ps)
			b.ReportMetric(mb, "bare_samples/s")
			b.ReportMetric(median(as), "bare_acked_samples/s")
			b.ReportMetric(mo, "pipeline_samples/s")
			b.ReportMetric(100*mo/mb, "pipeline_%_of_bare")
			b.ReportMetric(median(bc), "bare_cores")
			b.ReportMetric(median(pc), "pipeline_cores")
			b.ReportMetric(perCorePercent(bare, ours), "pipeline_%_of_bare_per_core")
		})
	}
}

// perCorePercent is the median over paired runs of the pipeline's samples
// per CPU-second as a percentage of the bare subscriber's. On a machine
// shared with other work the two runs of a pair may get different shares
// of the cores; this ratio compares the work done per CPU instead (the
// embedded server's CPU counts on both sides).
func perCorePercent(bare, ours []rate) float64 {
	var v []float64
	for i := range ours {
		if i < len(bare) && bare[i].cores > 0 && ours[i].cores > 0 {
			v = append(v, 100*(ours[i].samples/ours[i].cores)/(bare[i].samples/bare[i].cores))
		}
	}
	return median(v)
}

func median(v []float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	if len(s) == 0 {
		return 0
	}
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return (s[len(s)/2-1] + s[len(s)/2]) / 2
}

// corePayloads builds the core NATS stream in memory: the same
// line-protocol samples as e2eFill, source times in the last seconds.
func corePayloads(perMsg int) [][]byte {
	start := time.Now().Add(-5 * time.Second)
	base := []float64{40, 450, 5, 250, 300, 50, 3000, 95, 60, 290}
	msgs := make([][]byte, e2eSamples/perMsg)
	for j := range msgs {
		var sb strings.Builder
		for i := 0; i < perMsg; i++ {
			k := j*perMsg + i
			ts := start.Add(time.Duration(k) * 10 * time.Microsecond).UnixNano()
			tag := k % e2eTags
			fmt.Fprintf(&sb, "m%03d.t%d value=%g %d\n", tag/10, tag%10, base[tag%10]*(1+0.001*float64((k/e2eTags)%7)), ts)
		}
		msgs[j] = []byte(sb.String())
	}
	return msgs
}

// corePublish sends msgs on its own connection as fast as nats.go allows,
// then flushes.
func corePublish(b *testing.B, url string, msgs [][]byte) {
	pc, err := nats.Connect(url)
	if err != nil {
		b.Error(err)
		return
	}
	defer pc.Close()
	for j, m := range msgs {
		if err := pc.Publish(fmt.Sprintf("benchc.u%d", j%4), m); err != nil {
			b.Error(err)
			return
		}
	}
	if err := pc.FlushTimeout(time.Minute); err != nil {
		b.Error(err)
	}
}

// waitSubscribed waits until the core source's subscription is up (the
// server counts one more subscription than before the source connected).
func waitSubscribed(b *testing.B, src *Source, deadline time.Time) {
	select {
	case <-src.Connected():
	case <-time.After(time.Until(deadline)):
		b.Fatal("pipeline: no connection")
	}
	// The subscription follows the connect; a flush round trip on the
	// source's own connection is not reachable from here, so poll.
	for !src.subscribed.Load() {
		if time.Now().After(deadline) {
			b.Fatal("pipeline: not subscribed")
		}
		time.Sleep(100 * time.Microsecond)
	}
}

// bareCoreRun counts the messages of the core stream with a plain nats.go
// subscription (same pending limits as the pipeline) and returns the
// sample rate from the first to the last message.
func bareCoreRun(b *testing.B, url string, msgs [][]byte, perMsg int) rate {
	nc, err := nats.Connect(url)
	if err != nil {
		b.Fatal(err)
	}
	defer nc.Close()
	total := int64(len(msgs))
	var count atomic.Int64
	done := make(chan struct{})
	var t0 time.Time
	var c0 time.Duration
	sub, err := nc.Subscribe("benchc.>", func(*nats.Msg) {
		n := count.Add(1)
		if n == 1 {
			t0, c0 = time.Now(), processCPU()
		}
		if n == total {
			close(done)
		}
	})
	if err != nil {
		b.Fatal(err)
	}
	if err := sub.SetPendingLimits(len(msgs)+16, 1<<30); err != nil {
		b.Fatal(err)
	}
	if err := nc.Flush(); err != nil { // subscription registered
		b.Fatal(err)
	}
	go corePublish(b, url, msgs)
	select {
	case <-done:
	case <-time.After(time.Minute):
		b.Fatalf("bare core subscriber got %d of %d", count.Load(), total)
	}
	el, cpu := time.Since(t0), processCPU()-c0
	_ = sub.Unsubscribe()
	return rate{float64(total*int64(perMsg)) / el.Seconds(), cpu.Seconds() / el.Seconds()}
}

// BenchmarkEndToEndCore is BenchmarkEndToEndJetStream for core NATS (at
// most once): a publisher sends the same 400 000 line-protocol samples (1,
// 10 or 100 per message) once to a bare nats.go subscriber that only
// counts them and once to the pipeline (source -> bounded queue ->
// engine). Both subscriptions have the same pending limits (the whole
// stream), so neither loses messages in the client; samples the pipeline
// drops at its full queue are reported (dropped_%) and not counted in its
// rate. Run with -benchtime=Nx; the rates are medians over N runs.
func BenchmarkEndToEndCore(b *testing.B) {
	ns := startNATS(b, baseOpts(b, false))
	for _, perMsg := range []int{1, 10, 100} {
		b.Run(fmt.Sprintf("samples_per_msg=%d", perMsg), func(b *testing.B) {
			msgs := corePayloads(perMsg)
			var bare, ours []rate
			var dropped []float64
			b.ResetTimer()
			for n := 0; n < b.N; n++ {
				bare = append(bare, bareCoreRun(b, ns.url(), msgs, perMsg))
				r, met := pipelineRunMode(b, ns.url(), n, perMsg, ModeCore, func() { corePublish(b, ns.url(), msgs) })
				ours = append(ours, r)
				dropped = append(dropped, 100*float64(met.Reason(ingest.ReasonQueueFull))/e2eSamples)
			}
			b.StopTimer()
			bs, bc := rates(bare)
			ps, pc := rates(ours)
			mb, mo := median(bs), median(ps)
			b.ReportMetric(mb, "bare_samples/s")
			b.ReportMetric(mo, "pipeline_samples/s")
			b.ReportMetric(100*mo/mb, "pipeline_%_of_bare")
			b.ReportMetric(median(dropped), "dropped_%")
			b.ReportMetric(median(bc), "bare_cores")
			b.ReportMetric(median(pc), "pipeline_cores")
			b.ReportMetric(perCorePercent(bare, ours), "pipeline_%_of_bare_per_core")
		})
	}
}
