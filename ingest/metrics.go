package ingest

import (
	"sync/atomic"

	"github.com/prometheus/client_golang/prometheus"
)

// Metrics holds the ingest counters. The hot path only does atomic adds;
// Register exposes them on a Prometheus registry as
// exergywatch_ingest_<thing>_<unit>. A nil *Metrics is valid and counts
// nothing.
type Metrics struct {
	Received      atomic.Uint64 // samples received from sources
	Accepted      atomic.Uint64 // samples taken into a machine window
	Messages      atomic.Uint64 // transport messages received
	Reconnects    atomic.Uint64 // source reconnections
	GapNanos      atomic.Uint64 // total reported data gap, ns
	QueueDropped  atomic.Uint64 // batches dropped because the queue was full
	QueueDepth    atomic.Int64  // batches waiting in the queue
	Acked         atomic.Uint64 // transport acknowledgements sent
	Snapshots     atomic.Uint64 // machine snapshots built
	DecodeErrors  atomic.Uint64 // payloads (or lines) that failed to decode
	reasonsCounts [NumReasons]atomic.Uint64
}

// Count adds n to the counter of reason r.
func (m *Metrics) Count(r Reason, n uint64) {
	if m == nil || int(r) >= NumReasons {
		return
	}
	m.reasonsCounts[r].Add(n)
}

// Reason returns the count of reason r.
func (m *Metrics) Reason(r Reason) uint64 {
	if m == nil || int(r) >= NumReasons {
		return 0
	}
	return m.reasonsCounts[r].Load()
}

// Register adds a collector for these metrics to reg.
func (m *Metrics) Register(reg *prometheus.Registry) error {
	return reg.Register(&collector{m: m})
}

type collector struct{ m *Metrics }

var (
	descReceived   = prometheus.NewDesc("exergywatch_ingest_received_samples_total", "Samples received from all sources.", nil, nil)
	descAccepted   = prometheus.NewDesc("exergywatch_ingest_accepted_samples_total", "Samples taken into a machine window.", nil, nil)
	descMessages   = prometheus.NewDesc("exergywatch_ingest_messages_total", "Transport messages received.", nil, nil)
	descReconnects = prometheus.NewDesc("exergywatch_ingest_reconnects_total", "Source reconnections.", nil, nil)
	descGap        = prometheus.NewDesc("exergywatch_ingest_gap_seconds_total", "Total data gap reported by sources after lost connections.", nil, nil)
	descQDropped   = prometheus.NewDesc("exergywatch_ingest_queue_dropped_batches_total", "Batches dropped because the queue in front of the evaluation was full.", nil, nil)
	descQDepth     = prometheus.NewDesc("exergywatch_ingest_queue_depth_batches", "Batches waiting in the queue in front of the evaluation.", nil, nil)
	descAcked      = prometheus.NewDesc("exergywatch_ingest_acked_messages_total", "Transport messages acknowledged after evaluation.", nil, nil)
	descSnapshots  = prometheus.NewDesc("exergywatch_ingest_snapshots_total", "Machine snapshots built.", nil, nil)
	descDecode     = prometheus.NewDesc("exergywatch_ingest_decode_errors_total", "Payloads or lines that failed to decode.", nil, nil)
	descReasons    = prometheus.NewDesc("exergywatch_ingest_flagged_samples_total", "Samples flagged or dropped, by reason code.", []string{"reason"}, nil)
)

func (c *collector) Describe(ch chan<- *prometheus.Desc) {
	for _, d := range []*prometheus.Desc{descReceived, descAccepted, descMessages, descReconnects, descGap, descQDropped, descQDepth, descAcked, descSnapshots, descDecode, descReasons} {
		ch <- d
	}
}

func (c *collector) Collect(ch chan<- prometheus.Metric) {
	m := c.m
	cnt := func(d *prometheus.Desc, v uint64) {
		ch <- prometheus.MustNewConstMetric(d, prometheus.CounterValue, float64(v))
	}
	cnt(descReceived, m.Received.Load())
	cnt(descAccepted, m.Accepted.Load())
	cnt(descMessages, m.Messages.Load())
	cnt(descReconnects, m.Reconnects.Load())
	ch <- prometheus.MustNewConstMetric(descGap, prometheus.CounterValue, float64(m.GapNanos.Load())/1e9)
	cnt(descQDropped, m.QueueDropped.Load())
	ch <- prometheus.MustNewConstMetric(descQDepth, prometheus.GaugeValue, float64(m.QueueDepth.Load()))
	cnt(descAcked, m.Acked.Load())
	cnt(descSnapshots, m.Snapshots.Load())
	cnt(descDecode, m.DecodeErrors.Load())
	for r := Reason(1); r < numReasons; r++ {
		ch <- prometheus.MustNewConstMetric(descReasons, prometheus.CounterValue, float64(m.reasonsCounts[r].Load()), r.String())
	}
}
