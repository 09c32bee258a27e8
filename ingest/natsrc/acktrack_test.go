package natsrc

import "testing"

// TestAckTrackerNeverPassesInFlight: cumulative acknowledgement (AckAll
// semantics, nats-server consumer.go processAckMsg) must not cover a
// message still being processed.
func TestAckTrackerNeverPassesInFlight(t *testing.T) {
	var acked []uint64
	tr := &ackTracker{}
	add := func(seq uint64) func() {
		return tr.add(seq, func() error { acked = append(acked, seq); return nil })
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
