// Package sinks holds what every output of exergywatch shares: the Sink
// contract, the health view each sink reports, the JSON wire form of records
// and alert events (used by the NATS sink and the embedded store), and Multi,
// the fan-out that writes to several sinks at once without letting one slow
// or broken sink hold up the others.
//
// The concrete sinks live in sub-packages:
//
//	sinks/influx   InfluxDB v2 write API with batching, retries and an on-disk spool
//	sinks/natsout  JSON on NATS subjects, core or JetStream
//	sinks/store    embedded bbolt store (history, status queries, key-value state)
//	sinks/vmtest   test helper that starts a real VictoriaMetrics server
package sinks

import (
	"context"
	"errors"
	"time"

	"github.com/exergywatch/exergywatch/compute"
)

// Sink is one output of derived records and alert events. The daemon declares
// an identical interface in its own package; this copy exists so that each
// sink package can assert at compile time that it satisfies the contract.
type Sink interface {
	// WriteRecord hands one record to the sink. It never blocks longer than
	// ctx allows and never drops silently: a record that cannot be kept is
	// counted in Stats.Dropped or Stats.Rejected and reported by the error.
	WriteRecord(ctx context.Context, r compute.Record) error
	// WriteEvent is WriteRecord for alert events.
	WriteEvent(ctx context.Context, e compute.Event) error
	// Close flushes what the sink holds and releases it. It is idempotent:
	// later calls return the result of the first.
	Close(ctx context.Context) error
}

// Reporter is implemented by sinks that expose their health for /metrics and
// the status API. All sinks in this module implement it.
type Reporter interface {
	Stats() Stats
}

// Stats is a point-in-time health view of one sink. Counters are cumulative
// since the sink was opened; the unit of the counters is the sink's item,
// which its package documents (records and events for most sinks,
// line-protocol points for the InfluxDB sink).
type Stats struct {
	Name          string    // sink name as configured
	Queued        int64     // items held in memory, not yet delivered (count)
	SpooledItems  int64     // items waiting in an on-disk spool (count)
	SpooledBytes  int64     // size of the on-disk spool (bytes)
	BufferedBytes int64     // bytes held in memory by a client library, e.g. the NATS reconnect buffer
	Written       uint64    // items acknowledged by the destination (count)
	Dropped       uint64    // accepted items that were lost: full queue, spool cap, permanent rejection by the server (count)
	Rejected      uint64    // items refused at the door as invalid, e.g. a non-finite value (count)
	LastError     string    // text of the most recent error, "" when none
	LastErrorTime time.Time // when LastError happened, zero when none
}

// Sentinel errors. Sinks wrap them with %w and details; callers branch with
// errors.Is.
var (
	// ErrClosed is returned by writes after Close.
	ErrClosed = errors.New("sink closed")
	// ErrInvalid marks an item refused because it breaks the record
	// contract (compute.Record.Validate) or cannot be encoded. It was
	// counted in Stats.Rejected.
	ErrInvalid = errors.New("invalid item")
	// ErrQueueFull marks an item dropped because a bounded queue stayed full
	// until the context ended. It was counted in Stats.Dropped.
	ErrQueueFull = errors.New("sink queue full")
)

// Compile-time guard: Multi is a Sink and a Reporter of its children.
var _ Sink = (*Multi)(nil)
