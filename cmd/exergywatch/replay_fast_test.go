package main

// The replay's fast paths against the general code they replace:
// the hand-written RFC 3339 and Unix-millisecond readers against
// time.Parse/strconv (the reference is the earlier parseTime, kept here
// verbatim), and the ring-plus-heap reorder buffer and the key-heap merge
// against the earlier container/heap versions (kept here too).

import (
	"bytes"
	"container/heap"
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/config"
	"github.com/exergywatch/exergywatch/ingest"
)

// parseTimeRef is parseTime as it was before the fast paths.
func parseTimeRef(b []byte) (time.Time, error) {
	b = bytes.TrimSpace(b)
	if len(b) == 0 {
		return time.Time{}, errors.New("empty")
	}
	if bytes.IndexByte(b, 'T') < 0 && bytes.IndexByte(b, 't') < 0 {
		s := string(b)
		ip, frac, hasFrac := strings.Cut(s, ".")
		ms, err := strconv.ParseInt(ip, 10, 64)
		if err != nil || ip == "" || ip[0] == '+' {
			return time.Time{}, fmt.Errorf("%q is neither RFC 3339 nor Unix milliseconds", s)
		}
		var ns int64
		if hasFrac {
			if len(frac) == 0 || len(frac) > 6 {
				return time.Time{}, fmt.Errorf("%q: Unix milliseconds take 1 to 6 decimals", s)
			}
			f, err := strconv.ParseUint(frac, 10, 32)
			if err != nil {
				return time.Time{}, fmt.Errorf("%q is neither RFC 3339 nor Unix milliseconds", s)
			}
			ns = int64(f)
			for k := len(frac); k < 6; k++ {
				ns *= 10
			}
			if ms < 0 || ip[0] == '-' {
				ns = -ns
			}
		}
		const lim = math.MaxInt64/int64(time.Millisecond) - 1
		if ms > lim || ms < -lim {
			return time.Time{}, fmt.Errorf("%q: out of range", s)
		}
		return time.Unix(0, ms*int64(time.Millisecond)+ns).UTC(), nil
	}
	t, err := time.Parse(time.RFC3339Nano, string(b))
	if err != nil {
		return time.Time{}, fmt.Errorf("%q is neither RFC 3339 nor Unix milliseconds", string(b))
	}
	return t.UTC(), nil
}

// FuzzParseTimeFastPath: parseTime accepts exactly what the general
// reader accepts, with the same instant in UTC and the same error text.
func FuzzParseTimeFastPath(f *testing.F) {
	for _, s := range []string{
		"2026-06-01T00:00:00Z", "2026-06-01T00:00:00.5Z", "2026-06-01T23:59:59.123456789Z", "2026-06-01T23:59:59.1234567891Z",
		"2026-06-01T02:00:00+02:00", "2026-06-01T02:00:00-00:00", "2026-06-01T02:00:00+24:00", "2026-06-01T02:00:00+23:60",
		"2024-02-29T00:00:00Z", "2025-02-29T00:00:00Z", "2000-02-29T12:00:00Z", "1900-02-29T12:00:00Z", "2026-04-31T00:00:00Z",
		"2026-13-01T00:00:00Z", "2026-00-01T00:00:00Z", "2026-06-00T00:00:00Z", "2026-06-01T24:00:00Z", "2026-06-01T23:60:00Z",
		"2026-06-01T23:59:60Z", "2026-06-01t00:00:00z", "2026-06-01T00:00:00,5Z", "2026-06-01T00:00:00.Z", "0000-01-01T00:00:00Z",
		"9999-12-31T23:59:59.999999999-23:59", "2026-06-01T00:00:00", "2026-06-01 00:00:00Z", "+026-06-01T00:00:00Z",
		"1780272000000", "1780272000000.25", "-1000", "-0.5", "0", "00012", "1780272000000.", "1780272000000.1234567",
		"+1780272000000", "99999999999999999999", "9223372036854775", "9223372036853", "9223372036854", "-9223372036854",
		"1e3", "", " 12 ", "-", ".5", "12.5.5",
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		got, err := parseTime([]byte(s))
		want, werr := parseTimeRef([]byte(s))
		if (err == nil) != (werr == nil) {
			t.Fatalf("parseTime(%q): err %v, reference err %v", s, err, werr)
		}
		if err != nil {
			if err.Error() != werr.Error() {
				t.Fatalf("parseTime(%q): error %q, reference %q", s, err, werr)
			}
			return
		}
		if !got.Equal(want) || got.Location() != time.UTC || got != want {
			t.Fatalf("parseTime(%q) = %v (%v), reference %v (%v)", s, got, got.Location(), want, want.Location())
		}
	})
}

// ---- the earlier reorder buffer and merge, as references ----------------

type refSeqSample struct {
	s   ingest.Sample
	t   int64
	seq uint64
	src int
}

type refHeap []refSeqSample

func (h refHeap) Len() int { return len(h) }
func (h refHeap) Less(i, j int) bool {
	if h[i].t != h[j].t {
		return h[i].t < h[j].t
	}
	return h[i].seq < h[j].seq
}
func (h refHeap) Swap(i, j int) { h[i], h[j] = h[j], h[i] }
func (h *refHeap) Push(x any)   { *h = append(*h, x.(refSeqSample)) }
func (h *refHeap) Pop() any {
	old := *h
	x := old[len(old)-1]
	*h = old[:len(old)-1]
	return x
}

type refReorder struct {
	src  rowSource
	h    refHeap
	seq  uint64
	done bool
}

func (r *refReorder) next() (ingest.Sample, bool, error) {
	for !r.done && len(r.h) < reorderDepth {
		s, ok, err := r.src.next()
		if err != nil {
			return s, false, err
		}
		if !ok {
			r.done = true
			break
		}
		r.seq++
		heap.Push(&r.h, refSeqSample{s: s, t: s.SourceTime.UnixNano(), seq: r.seq})
	}
	if len(r.h) == 0 {
		return ingest.Sample{}, false, nil
	}
	return heap.Pop(&r.h).(refSeqSample).s, true, nil
}

type refMerger struct {
	srcs []rowSource
	h    refHeap
	init bool
	seq  uint64
}

func (m *refMerger) pull(i int) error {
	s, ok, err := m.srcs[i].next()
	if err != nil || !ok {
		return err
	}
	m.seq++
	heap.Push(&m.h, refSeqSample{s: s, t: s.SourceTime.UnixNano(), seq: m.seq, src: i})
	return nil
}

func (m *refMerger) next() (ingest.Sample, bool, error) {
	if !m.init {
		m.init = true
		for i := range m.srcs {
			if err := m.pull(i); err != nil {
				return ingest.Sample{}, false, err
			}
		}
	}
	if len(m.h) == 0 {
		return ingest.Sample{}, false, nil
	}
	x := heap.Pop(&m.h).(refSeqSample)
	if err := m.pull(x.src); err != nil {
		return ingest.Sample{}, false, err
	}
	return x.s, true, nil
}

// listSource yields fixed samples, then optionally an error.
type listSource struct {
	s   []ingest.Sample
	i   int
	err error
}

func (l *listSource) next() (ingest.Sample, bool, error) {
	if l.i < len(l.s) {
		l.i++
		return l.s[l.i-1], true, nil
	}
	if l.err != nil {
		return ingest.Sample{}, false, l.err
	}
	return ingest.Sample{}, false, nil
}

// disordered makes n samples of one file: times mostly increasing by step,
// with ties, some samples moved back by up to back steps (local disorder)
// and a few far back (more than the reorder depth can sort out). Value
// numbers the samples so that the output order can be compared exactly.
func disordered(rng *rand.Rand, file, n, back int, tie, late float64) []ingest.Sample {
	base := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	out := make([]ingest.Sample, n)
	k := 0
	for i := range out {
		if rng.Float64() >= tie {
			k++
		}
		at := k
		switch r := rng.Float64(); {
		case r < late:
			at -= rng.IntN(10*reorderDepth + 1)
		case r < 0.2 && back > 0:
			at -= rng.IntN(back + 1)
		}
		t := base.Add(time.Duration(at) * time.Second)
		out[i] = ingest.Sample{Tag: "f" + strconv.Itoa(file), SourceTime: t, ReceiveTime: t, Value: float64(file*1_000_000 + i)}
	}
	return out
}

func drain(t *testing.T, src rowSource) ([]ingest.Sample, error) {
	t.Helper()
	var out []ingest.Sample
	for {
		s, ok, err := src.next()
		if err != nil {
			return out, err
		}
		if !ok {
			return out, nil
		}
		out = append(out, s)
	}
}

func sameSamples(a, b []ingest.Sample) (int, bool) {
	if len(a) != len(b) {
		return min(len(a), len(b)), false
	}
	for i := range a {
		if a[i] != b[i] {
			return i, false
		}
	}
	return 0, true
}

// The reorder buffer and the merge give the same samples in the same order
// as the earlier container/heap versions, for sorted input, local
// disorder, ties, samples older than the buffer can sort, several files,
// and a file that fails.
func TestReorderAndMergeMatchReference(t *testing.T) {
	for _, tc := range []struct {
		name      string
		files, n  int
		back      int
		tie, late float64
		fail      bool
	}{
		{"sorted one file", 1, 20000, 0, 0, 0, false},
		{"sorted with ties", 1, 20000, 0, 0.5, 0, false},
		{"local disorder", 1, 30000, 50, 0.1, 0, false},
		{"disorder deeper than the buffer", 1, 30000, 3 * reorderDepth, 0.05, 0.001, false},
		{"many files", 17, 3000, 20, 0.3, 0.0005, false},
		{"per-tag files, sorted", 40, 500, 0, 0, 0, false},
		{"a file fails", 3, 6000, 10, 0.1, 0, true},
		{"empty files", 4, 0, 0, 0, 0, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(uint64(tc.files), uint64(tc.n)))
			data := make([][]ingest.Sample, tc.files)
			for f := range data {
				data[f] = disordered(rng, f, tc.n, tc.back, tc.tie, tc.late)
			}
			build := func(ref bool) rowSource {
				var srcs []rowSource
				for f, d := range data {
					var l rowSource = &listSource{s: d}
					if tc.fail && f == 1 {
						l = &listSource{s: d, err: ErrHeader}
					}
					if ref {
						srcs = append(srcs, &refReorder{src: l})
					} else {
						srcs = append(srcs, &reorder{src: l})
					}
				}
				if ref {
					return &refMerger{srcs: srcs}
				}
				return &merger{srcs: srcs}
			}
			want, werr := drain(t, build(true))
			got, err := drain(t, build(false))
			if !errors.Is(err, werr) || (err == nil) != (werr == nil) {
				t.Fatalf("error %v, reference %v", err, werr)
			}
			if i, ok := sameSamples(got, want); !ok {
				t.Fatalf("%d samples, reference %d; first difference at %d", len(got), len(want), i)
			}
			if tc.fail && werr == nil {
				t.Fatal("the failing file did not fail")
			}
		})
	}
}

// Reassigning machines to workers while a replay runs changes nothing in
// what is written: the committed history replayed on one worker and on two
// workers reassigned up to every other tick gives the same records (times,
// qualities, reasons, every figure bit for bit).
func TestReplayRebalanceKeepsRecords(t *testing.T) {
	run := func(opt replayOptions) (replayResult, map[string][]compute.Record) {
		dir := t.TempDir()
		cfg, err := config.Load(replayConfig(t, dir, 1, time.Second, 2*time.Second))
		if err != nil {
			t.Fatal(err)
		}
		p, err := buildPipeline(cfg, pipelineOptions{})
		if err != nil {
			t.Fatal(err)
		}
		var rej rejects
		in, err := openInputs([]string{replayCSV}, "auto", time.Nanosecond, &rej)
		if err != nil {
			t.Fatal(err)
		}
		defer in.Close()
		res, err := replay(context.Background(), p, in, opt)
		if err != nil {
			t.Fatal(err)
		}
		if err := p.close(); err != nil {
			t.Fatal(err)
		}
		return res, rpReadStore(t, filepath.Join(dir, "history.db"))
	}
	_, one := run(replayOptions{workers: 1})
	res, two := run(replayOptions{workers: 2, rebalanceAfter: 3, rebalanceEvery: 2, rebalanceGain: 10})
	// A check right after a reassignment may find no evaluation done since
	// (no cost, nothing to gain): not every check reassigns.
	if res.Rebalances < 20 {
		t.Fatalf("%d reassignments in %d ticks, want at least 20 (a check every other tick)", res.Rebalances, res.Ticks)
	}
	if len(one) != 6 || len(two) != len(one) {
		t.Fatalf("%d and %d machines in the stores, want 6", len(one), len(two))
	}
	n := 0
	for id, want := range one {
		got := two[id]
		if len(got) != len(want) {
			t.Fatalf("%s: %d records, %d on one worker", id, len(got), len(want))
		}
		for i := range want {
			a, b := want[i], got[i]
			same := a.Time.Equal(b.Time) && a.Quality == b.Quality && slices.Equal(a.Reasons, b.Reasons) && len(a.Figures) == len(b.Figures)
			for k := 0; same && k < len(a.Figures); k++ {
				fa, fb := a.Figures[k], b.Figures[k]
				same = fa.Name == fb.Name && fa.Quality == fb.Quality && math.Float64bits(fa.Value) == math.Float64bits(fb.Value) &&
					math.Float64bits(fa.U95) == math.Float64bits(fb.U95) && fa.HasU95 == fb.HasU95 && slices.Equal(fa.Reasons, fb.Reasons)
			}
			if !same {
				t.Fatalf("%s record %d differs:\n one worker %+v\n rebalanced %+v", id, i, a, b)
			}
			n++
		}
	}
	if n != 720 {
		t.Fatalf("%d records compared, want 720", n)
	}
}

// progressSource is a listSource with the replay source's progress.
type progressSource struct{ listSource }

func (p *progressSource) progress() float64 {
	if len(p.s) == 0 {
		return 1
	}
	return float64(p.i) / float64(len(p.s))
}

// endless yields samples for ever.
type endless struct{ n int }

func (e *endless) next() (ingest.Sample, bool, error) {
	e.n++
	return ingest.Sample{Tag: "x", Value: float64(e.n)}, true, nil
}
func (e *endless) progress() float64 { return 0 }

// The reading goroutine hands over the source's samples in order, then the
// source's error or its end, for batch-sized and odd lengths; closing it
// early stops it even when nobody reads.
func TestPrefetchKeepsTheStream(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	for _, n := range []int{0, 1, prefetchSize - 1, prefetchSize, prefetchSize + 1, 3*prefetchSize + 17} {
		for _, fail := range []bool{false, true} {
			src := &progressSource{listSource{s: disordered(rng, 0, n, 0, 0, 0)}}
			if fail {
				src.err = ErrHeader
			}
			want := append([]ingest.Sample(nil), src.s...)
			p := newPrefetch(src)
			got, err := drain(t, p)
			if fail != errors.Is(err, ErrHeader) || !fail && err != nil {
				t.Fatalf("n=%d fail=%v: error %v", n, fail, err)
			}
			if i, ok := sameSamples(got, want); !ok {
				t.Fatalf("n=%d fail=%v: %d samples, want %d; first difference at %d", n, fail, len(got), len(want), i)
			}
			if n > 0 && p.progress() != 1 {
				t.Errorf("n=%d: progress %v at the end, want 1", n, p.progress())
			}
			p.close()
		}
	}
	p := newPrefetch(&endless{})
	for i := 0; i < 10; i++ {
		if s, ok, err := p.next(); !ok || err != nil || s.Value != float64(i+1) {
			t.Fatalf("sample %d: %v %v %v", i, s.Value, ok, err)
		}
	}
	stopped := make(chan struct{})
	go func() { p.close(); close(stopped) }()
	select {
	case <-stopped:
	case <-time.After(10 * time.Second):
		t.Fatal("the reading goroutine did not stop")
	}
}
