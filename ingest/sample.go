// Package ingest turns live sensor tags into samples. It owns the one Sample
// type every source produces (NATS, OPC UA), the reason codes for doubtful
// data, the acknowledgement handles that carry at-least-once delivery from a
// source through the time-alignment window, the bounded queue in front of
// the evaluation, and the ingest metrics.
//
// Sub-packages: payload (NATS payload decoders), tagmap (tag -> machine,
// port, quantity, unit conversion, redundancy), quality (per-tag checks),
// align (time-weighted snapshots per machine), natsrc and opcuasrc (sources).
package ingest

import (
	"sync/atomic"
	"time"
)

// Quality is the three-level quality of a sample.
type Quality uint8

// Quality levels. The zero value is Good so that sources without a quality
// field produce good samples.
const (
	Good Quality = iota
	Uncertain
	Bad
)

func (q Quality) String() string {
	switch q {
	case Good:
		return "good"
	case Uncertain:
		return "uncertain"
	case Bad:
		return "bad"
	}
	return "invalid"
}

// Worse returns the worse of two qualities.
func Worse(a, b Quality) Quality {
	if a > b {
		return a
	}
	return b
}

// QualityFromStatus maps an OPC UA StatusCode to a quality by its severity
// bits 30..31: 00 good, 01 uncertain, 10 and 11 bad (OPC UA Part 4, 7.39
// StatusCode, "Severity").
func QualityFromStatus(code uint32) Quality {
	switch code >> 30 {
	case 0:
		return Good
	case 1:
		return Uncertain
	}
	return Bad
}

// Sample is one reading of one tag, as produced by every source.
type Sample struct {
	// Tag is the source-side tag name (NATS payload tag, or the configured
	// tag name of an OPC UA NodeId).
	Tag string
	// SourceTime is when the device or server sampled the value. Zero when
	// the source gave none; the pipeline then uses ReceiveTime.
	SourceTime time.Time
	// ReceiveTime is when this process received the sample.
	ReceiveTime time.Time
	// Value is the reading in the unit configured for the tag (raw counts if
	// the tag has a linear scaling); tagmap converts it to SI.
	Value float64
	// Quality is good, uncertain or bad.
	Quality Quality
	// StatusCode is the original OPC UA StatusCode when HasStatus is true.
	StatusCode uint32
	HasStatus  bool
	// Ack, when not nil, must be released (Ack.Done) exactly once when the
	// sample has been taken into a machine window and evaluated, or dropped.
	// The align package does this; sources only create it.
	Ack *Ack
}

// Time returns SourceTime, or ReceiveTime when the source gave no time.
func (s *Sample) Time() time.Time {
	if s.SourceTime.IsZero() {
		return s.ReceiveTime
	}
	return s.SourceTime
}

// Ack is a reference-counted acknowledgement handle shared by the samples
// of one delivered message (one JetStream message may hold a batch). When
// every sample has called Done, fn runs once (for JetStream: msg.Ack()).
// A nil *Ack is valid and does nothing (core NATS, OPC UA).
type Ack struct {
	n  atomic.Int32
	fn func()
	c  Completer
}

// Completer is told when the last reference of an acknowledgement handle
// set up with Init is released.
type Completer interface{ Complete() }

// Init sets up a handle embedded in a larger value (so that it needs no
// allocation of its own): after n calls of Done, c.Complete runs once.
// n must be positive, and Init must happen before the handle is shared.
func (a *Ack) Init(n int, c Completer) {
	a.fn, a.c = nil, c
	a.n.Store(int32(n))
}

func (a *Ack) fire() {
	if a.fn != nil {
		a.fn()
	} else if a.c != nil {
		a.c.Complete()
	}
}

// NewAck returns a handle that runs fn after n calls of Done. With n <= 0
// fn runs at once and nil is returned.
func NewAck(n int, fn func()) *Ack {
	if n <= 0 {
		if fn != nil {
			fn()
		}
		return nil
	}
	a := &Ack{fn: fn}
	a.n.Store(int32(n))
	return a
}

// Done releases one reference. Calls beyond the count are ignored.
func (a *Ack) Done() {
	if a == nil {
		return
	}
	if a.n.Add(-1) == 0 {
		a.fire()
	}
}

// DoneN releases n references at once (n <= 0 does nothing); fn runs when
// the count reaches zero. Releases beyond the count are ignored, as with
// Done.
func (a *Ack) DoneN(n int) {
	if a == nil || n <= 0 {
		return
	}
	left := a.n.Add(-int32(n))
	if left <= 0 && left+int32(n) > 0 {
		a.fire()
	}
}

// Pending returns the number of references not yet released.
func (a *Ack) Pending() int {
	if a == nil {
		return 0
	}
	n := a.n.Load()
	if n < 0 {
		return 0
	}
	return int(n)
}

// Clock gives the current time; tests pass a fake one.
type Clock interface{ Now() time.Time }

// SystemClock is the wall clock.
type SystemClock struct{}

// Now returns time.Now().
func (SystemClock) Now() time.Time { return time.Now() }
