package natsrc

import "testing"

// TestAckTrackerNeverPassesInFlight: cumulative acknowledgement (AckAll
// semantics, nats-server consumer.go processAckMsg) must not cover a
// message still being processed.
func TestAckTrackerNeverPassesInFlight(t *testing.T) {
	var acked []uint64
	tr := &ackTracker{}
	add := func(seq uint64) func() {
		return tr.add(seq, ackFunc(func() error { acked = append(acked, seq); return nil })).Complete
	}
	flush := func(wantSeq uint64, wantN int) {
		t.Helper()
		before := len(acked)
		n, _ := tr.flush()
		if wantSeq == 0 {
			if len(acked) != before {
				t.Fatalf("acked %v, want nothing new", acked[before:])
			}
			return
		}
		if len(acked) != before+1 || acked[len(acked)-1] != wantSeq || n != wantN {
			t.Fatalf("acked %v (n=%d), want %d covering %d", acked[before:], n, wantSeq, wantN)
		}
	}
	d1, d2, d3 := add(1), add(2), add(3)
	d2()
	flush(0, 0) // 1 still in flight
	d1()
	flush(2, 2)
	flush(0, 0) // nothing new
	// 5 arrives, then 2 is redelivered (already acked: harmless) and 4 is
	// redelivered later (a restart): 5 must not be acked while 4 is open.
	d5 := add(5)
	d4 := add(4)
	d3()
	d5()
	flush(0, 0)
	d4()
	flush(5, 3)
}

type ackFunc func() error

func (f ackFunc) Ack() error { return f() }

func TestStreamSeq(t *testing.T) {
	// Layouts from nats.go v1.55.0 internal/parser/parse.go.
	for _, tc := range []struct {
		in   string
		want uint64
		ok   bool
	}{
		{"$JS.ACK.PLANT.ew.1.4711.12.1764583200000000000.0", 4711, true},
		{"$JS.ACK._.ABCHASH.PLANT.ew.2.99.13.1764583200000000000.5.XyZ", 99, true},
		{"$JS.ACK.dom.ABCHASH.PLANT.ew.2.100.13.1764583200000000000.5", 100, true},
		{"$JS.ACK.PLANT.ew.1.x.12.1.0", 0, false},
		{"$JS.ACK.a.b.c", 0, false},
		{"_INBOX.abc", 0, false},
	} {
		got, ok := streamSeq(tc.in)
		if got != tc.want || ok != tc.ok {
			t.Errorf("%s: got %d %v", tc.in, got, ok)
		}
	}
}
