package sinks

import (
	"github.com/prometheus/client_golang/prometheus"
)

// Collector exports sink health as Prometheus metrics, reading a fresh
// []Stats on every scrape (e.g. Multi.Stats). Metric names (label "sink"):
//
//	exergywatch_sink_queued_items                  gauge
//	exergywatch_sink_spooled_items                 gauge
//	exergywatch_sink_spooled_bytes                 gauge
//	exergywatch_sink_buffered_bytes                gauge
//	exergywatch_sink_written_total                 counter
//	exergywatch_sink_dropped_total                 counter
//	exergywatch_sink_rejected_total                counter
//	exergywatch_sink_last_error_timestamp_seconds  gauge (0 when none)
//
// The error text itself is not a label (unbounded cardinality); the status
// API shows it.
type Collector struct {
	stats                                                                        func() []Stats
	queued, spooled, spooledBytes, buffered, written, dropped, rejected, lastErr *prometheus.Desc
}

// NewCollector returns a collector over stats. Register it with a
// prometheus.Registry.
func NewCollector(stats func() []Stats) *Collector {
	d := func(name, help string) *prometheus.Desc {
		return prometheus.NewDesc("exergywatch_sink_"+name, help, []string{"sink"}, nil)
	}
	return &Collector{
		stats:        stats,
		queued:       d("queued_items", "Items held in memory by the sink, not yet delivered."),
		spooled:      d("spooled_items", "Items waiting in the sink's on-disk spool."),
		spooledBytes: d("spooled_bytes", "Size of the sink's on-disk spool in bytes."),
		buffered:     d("buffered_bytes", "Bytes held in memory by the sink's client library."),
		written:      d("written_total", "Items acknowledged by the destination."),
		dropped:      d("dropped_total", "Accepted items that were lost (full queue, spool cap, permanent rejection)."),
		rejected:     d("rejected_total", "Items refused as invalid."),
		lastErr:      d("last_error_timestamp_seconds", "Unix time of the sink's last error, 0 when none."),
	}
}

// Describe implements prometheus.Collector.
func (c *Collector) Describe(ch chan<- *prometheus.Desc) {
	for _, d := range []*prometheus.Desc{c.queued, c.spooled, c.spooledBytes, c.buffered, c.written, c.dropped, c.rejected, c.lastErr} {
		ch <- d
	}
}

// Collect implements prometheus.Collector.
func (c *Collector) Collect(ch chan<- prometheus.Metric) {
	for _, s := range c.stats() {
		g := func(d *prometheus.Desc, v float64) {
			ch <- prometheus.MustNewConstMetric(d, prometheus.GaugeValue, v, s.Name)
		}
		k := func(d *prometheus.Desc, v uint64) {
			ch <- prometheus.MustNewConstMetric(d, prometheus.CounterValue, float64(v), s.Name)
		}
		g(c.queued, float64(s.Queued))
		g(c.spooled, float64(s.SpooledItems))
		g(c.spooledBytes, float64(s.SpooledBytes))
		g(c.buffered, float64(s.BufferedBytes))
		k(c.written, s.Written)
		k(c.dropped, s.Dropped)
		k(c.rejected, s.Rejected)
		var ts float64
		if !s.LastErrorTime.IsZero() {
			ts = float64(s.LastErrorTime.UnixNano()) / 1e9
		}
		g(c.lastErr, ts)
	}
}
