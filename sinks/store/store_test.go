package store

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"path/filepath"
	"reflect"
	"sync"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"
	"go.uber.org/goleak"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/sinks"
)

func TestMain(m *testing.M) { goleak.VerifyTestMain(m) }

var quiet = slog.New(slog.NewTextHandler(io.Discard, nil))

// t0 is an arbitrary evaluation time; records are synthetic ("common
// practice, no source"): the test only checks that what goes in comes out.
var t0 = time.Date(2026, 11, 30, 8, 0, 0, 123456789, time.UTC)

func rec(site, machine string, k int) compute.Record {
	r := compute.Record{
		Time: t0.Add(time.Duration(k) * time.Minute), Site: site, Machine: machine, MachineKind: "compressor",
		Quality: compute.QualityGood,
		Figures: []compute.Figure{
			{Name: "polytropic_efficiency", Value: 0.8 + 1e-4*float64(k), U95: 0.015, HasU95: true, Quality: compute.QualityGood},
			{Name: "power_w", Value: 1.5e6 + float64(k), Quality: compute.QualityGood},
		},
	}
	if k%4 == 2 {
		r.Figures[1] = compute.Figure{Name: "power_w", Value: math.NaN(), Quality: compute.QualityBad, Reasons: []string{"flow_missing"}}
		r.Quality = compute.QualityBad
		r.Reasons = []string{"flow_missing"}
	}
	return r
}

// stored is what a record looks like after the store: a Bad figure keeps no
// value (0, no U95).
func stored(r compute.Record) compute.Record {
	r.Figures = append([]compute.Figure(nil), r.Figures...)
	for i, f := range r.Figures {
		if f.Quality == compute.QualityBad {
			r.Figures[i].Value, r.Figures[i].U95, r.Figures[i].HasU95 = 0, 0, false
		}
	}
	return r
}

func open(t *testing.T, path string) *Store {
	t.Helper()
	s, err := Open("store", Config{Path: path, FlushInterval: 20 * time.Millisecond}, quiet)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func TestWriteReadBack(t *testing.T) {
	s := open(t, filepath.Join(t.TempDir(), "x", "store.db"))
	defer s.Close(context.Background())
	ctx := context.Background()
	var want []compute.Record
	for k := 0; k < 50; k++ {
		for _, m := range []string{"c1", "c2"} {
			r := rec("north", m, k)
			if err := s.WriteRecord(ctx, r); err != nil {
				t.Fatal(err)
			}
			if m == "c1" {
				want = append(want, stored(r))
			}
		}
	}
	got, err := s.Range("north", "c1", t0.Add(10*time.Minute), t0.Add(20*time.Minute), 0)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, want[10:20]) {
		t.Errorf("range: got %d records, want 10\n got[0] %+v\nwant[0] %+v", len(got), got[0], want[10])
	}
	if got, _ := s.Range("north", "c1", time.Time{}, time.Time{}, 0); len(got) != 50 {
		t.Errorf("unbounded range: %d records, want 50", len(got))
	}
	if got, _ := s.Range("north", "c1", time.Time{}, t0.Add(time.Hour*24), 7); len(got) != 7 || !reflect.DeepEqual(got[0], want[0]) {
		t.Errorf("limited range: %d records", len(got))
	}
	last, ok, err := s.Latest("north", "c1")
	if err != nil || !ok || !reflect.DeepEqual(last, want[49]) {
		t.Errorf("latest: ok %v err %v\n got %+v\nwant %+v", ok, err, last, want[49])
	}
	if _, ok, err := s.Latest("north", "nope"); ok || err != nil {
		t.Errorf("latest of unknown machine: ok %v err %v", ok, err)
	}
	all, err := s.LatestAll()
	if err != nil || len(all) != 2 || all[0].Machine != "c1" || all[1].Machine != "c2" || !all[1].Time.Equal(t0.Add(49*time.Minute)) {
		t.Errorf("latest all: %v %+v", err, all)
	}
	ms, err := s.Machines()
	if err != nil || !reflect.DeepEqual(ms, []MachineID{{"north", "c1"}, {"north", "c2"}}) {
		t.Errorf("machines: %v %v", ms, err)
	}
	// a Bad figure is stored without its value
	if b := want[2].Figures[1]; b.Quality != compute.QualityBad || b.Value != 0 {
		t.Fatalf("fixture: %+v", b)
	}

	// events, newest first, filtered by machine
	for i := 0; i < 5; i++ {
		e := compute.Event{Time: t0.Add(time.Duration(i) * time.Second), Site: "north", Machine: fmt.Sprintf("c%d", i%2+1),
			Rule: "eff_low", Class: compute.AlertPerformance, Figure: "polytropic_efficiency", From: compute.AlertPending,
			To: compute.AlertFiring, Value: 0.7, Limit: 0.75, Since: t0, Reason: "below baseline"}
		if err := s.WriteEvent(ctx, e); err != nil {
			t.Fatal(err)
		}
	}
	evs, err := s.RecentEvents("", 3)
	if err != nil || len(evs) != 3 || !evs[0].Time.Equal(t0.Add(4*time.Second)) || evs[0].Reason != "below baseline" || evs[0].To != compute.AlertFiring {
		t.Errorf("recent events: %v %+v", err, evs)
	}
	evs, _ = s.RecentEvents("c2", 0)
	if len(evs) != 2 || evs[0].Machine != "c2" {
		t.Errorf("events of c2: %+v", evs)
	}

	// invalid items are rejected and counted
	bad := rec("north", "c1", 1)
	bad.Figures[0].Value = math.Inf(1)
	if err := s.WriteRecord(ctx, bad); !errors.Is(err, sinks.ErrInvalid) {
		t.Errorf("Inf record: %v", err)
	}
	old := rec("north", "c1", 1)
	old.Time = time.Date(1969, 1, 1, 0, 0, 0, 0, time.UTC)
	if err := s.WriteRecord(ctx, old); !errors.Is(err, sinks.ErrInvalid) {
		t.Errorf("1969 record: %v", err)
	}
	if st := s.Stats(); st.Rejected != 2 || st.Written != 105 || st.Dropped != 0 {
		t.Errorf("stats %+v: want 2 rejected, 105 written", st)
	}
}

// Everything written before Close is there after reopening, including state.
func TestRestartPersistence(t *testing.T) {
	path := filepath.Join(t.TempDir(), "store.db")
	ctx := context.Background()
	s := open(t, path)
	for k := 0; k < 10; k++ {
		if err := s.WriteRecord(ctx, rec("s", "p1", k)); err != nil {
			t.Fatal(err)
		}
	}
	if err := s.PutState("alert", "p1/eff_low", []byte(`{"state":"firing"}`)); err != nil {
		t.Fatal(err)
	}
	if err := s.PutState("steady", "p1", []byte{0, 1, 2, 255}); err != nil {
		t.Fatal(err)
	}
	// no explicit flush: Close must commit the buffer
	if err := s.Close(ctx); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(ctx); err != nil {
		t.Fatalf("second close: %v", err)
	}
	if err := s.WriteRecord(ctx, rec("s", "p1", 11)); !errors.Is(err, sinks.ErrClosed) {
		t.Errorf("write after close: %v", err)
	}

	s = open(t, path)
	defer s.Close(ctx)
	got, err := s.Range("s", "p1", t0, t0.Add(time.Hour), 0)
	if err != nil || len(got) != 10 || !reflect.DeepEqual(got[9], stored(rec("s", "p1", 9))) {
		t.Errorf("after reopen: %v, %d records", err, len(got))
	}
	v, ok, err := s.GetState("steady", "p1")
	if err != nil || !ok || !reflect.DeepEqual(v, []byte{0, 1, 2, 255}) {
		t.Errorf("state after reopen: %v %v %v", v, ok, err)
	}
	all, err := s.ListState("alert")
	if err != nil || len(all) != 1 || string(all["p1/eff_low"]) != `{"state":"firing"}` {
		t.Errorf("list state: %v %v", all, err)
	}
	if err := s.DeleteState("alert", "p1/eff_low"); err != nil {
		t.Fatal(err)
	}
	if _, ok, _ := s.GetState("alert", "p1/eff_low"); ok {
		t.Error("state still there after delete")
	}
	if _, ok, err := s.GetState("none", "x"); ok || err != nil {
		t.Errorf("missing namespace: %v %v", ok, err)
	}
	if err := s.PutState("", "k", nil); err == nil {
		t.Error("empty namespace accepted")
	}
	ns, _ := s.StateNamespaces()
	if !reflect.DeepEqual(ns, []string{"alert", "steady"}) {
		t.Errorf("namespaces %v", ns)
	}
}

func TestRetention(t *testing.T) {
	ctx := context.Background()
	s, err := Open("store", Config{Path: filepath.Join(t.TempDir(), "s.db"), Retention: 2 * time.Hour}, quiet)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close(ctx)
	// 300 records one minute apart (5 h); one machine only has old data
	for k := 0; k < 300; k++ {
		if err := s.WriteRecord(ctx, rec("s", "new", k)); err != nil {
			t.Fatal(err)
		}
	}
	if err := s.WriteRecord(ctx, rec("s", "gone", 0)); err != nil {
		t.Fatal(err)
	}
	for k := 0; k < 300; k += 60 {
		e := compute.Event{Time: t0.Add(time.Duration(k) * time.Minute), Site: "s", Machine: "new", Rule: "r", To: compute.AlertFiring}
		if err := s.WriteEvent(ctx, e); err != nil {
			t.Fatal(err)
		}
	}
	now := t0.Add(300 * time.Minute) // cutoff = t0 + 180 min
	nr, ne, err := s.Prune(now)
	if err != nil {
		t.Fatal(err)
	}
	if nr != 181 || ne != 3 { // records k=0..179 of "new" and the one of "gone"; events at 0, 60, 120 min
		t.Errorf("pruned %d records %d events, want 181 and 3", nr, ne)
	}
	got, _ := s.Range("s", "new", time.Time{}, now.Add(time.Hour), 0)
	if len(got) != 120 || !got[0].Time.Equal(t0.Add(180*time.Minute)) {
		t.Errorf("kept %d records from %v, want 120 from t0+180min", len(got), got[0].Time)
	}
	ms, _ := s.Machines()
	if len(ms) != 1 || ms[0].Machine != "new" {
		t.Errorf("machines after retention: %v", ms)
	}
}

func TestConcurrentWriters(t *testing.T) {
	ctx := context.Background()
	s, err := Open("store", Config{Path: filepath.Join(t.TempDir(), "s.db"), BatchItems: 64, NoSync: true}, quiet)
	if err != nil {
		t.Fatal(err)
	}
	const writers, each = 8, 200
	var wg sync.WaitGroup
	for w := 0; w < writers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			m := fmt.Sprintf("m%d", w)
			for k := 0; k < each; k++ {
				if err := s.WriteRecord(ctx, rec("s", m, k)); err != nil {
					t.Error(err)
					return
				}
				if k%20 == 0 {
					if err := s.PutState("steady", m, []byte(fmt.Sprint(k))); err != nil {
						t.Error(err)
						return
					}
					if _, _, err := s.Latest("s", m); err != nil {
						t.Error(err)
						return
					}
				}
			}
		}()
	}
	wg.Wait()
	for w := 0; w < writers; w++ {
		got, err := s.Range("s", fmt.Sprintf("m%d", w), time.Time{}, t0.Add(24*time.Hour), 0)
		if err != nil || len(got) != each {
			t.Errorf("writer %d: %d records, %v", w, len(got), err)
		}
		for i := 1; i < len(got); i++ {
			if !got[i].Time.After(got[i-1].Time) {
				t.Fatalf("writer %d: records out of order at %d", w, i)
			}
		}
	}
	if st, _ := s.ListState("steady"); len(st) != writers {
		t.Errorf("state entries %d", len(st))
	}
	if err := s.Close(ctx); err != nil {
		t.Fatal(err)
	}
}

func TestFormatCheck(t *testing.T) {
	path := filepath.Join(t.TempDir(), "other.db")
	db, err := bolt.Open(path, 0o600, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := db.Update(func(tx *bolt.Tx) error {
		b, err := tx.CreateBucket(bMeta)
		if err != nil {
			return err
		}
		return b.Put([]byte("format"), []byte("something-else/9"))
	}); err != nil {
		t.Fatal(err)
	}
	db.Close()
	if _, err := Open("store", Config{Path: path}, quiet); !errors.Is(err, ErrFormat) {
		t.Errorf("open foreign file: %v, want ErrFormat", err)
	}
	if err := (Config{Path: path, Retention: -time.Hour, PruneInterval: time.Second, FlushInterval: time.Millisecond, BatchItems: 1}).Validate(); err == nil {
		t.Error("negative retention accepted")
	}
}

func BenchmarkWriteRecord(b *testing.B) {
	ctx := context.Background()
	s, err := Open("store", Config{Path: filepath.Join(b.TempDir(), "s.db"), NoSync: true}, quiet)
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close(ctx)
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		if err := s.WriteRecord(ctx, rec("s", "m", i)); err != nil {
			b.Fatal(err)
		}
	}
}
