package influx

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// lineN is a valid line-protocol line whose timestamp is n.
func lineN(n int) string { return fmt.Sprintf("t,s=a v=%di %d\n", n, n) }

func batch(from, to int) ([]byte, int64) {
	var sb strings.Builder
	for i := from; i < to; i++ {
		sb.WriteString(lineN(i))
	}
	return []byte(sb.String()), int64(to - from)
}

// drain reads the whole spool in chunks of max lines and returns the
// timestamps delivered, committing each chunk.
func drain(t *testing.T, s *spool, max, limitChunks int) []int64 {
	t.Helper()
	var got []int64
	for i := 0; limitChunks < 0 || i < limitChunks; i++ {
		c, err := s.peek(max)
		if err != nil {
			t.Fatal(err)
		}
		if c.lines == 0 {
			break
		}
		for _, l := range strings.Split(strings.TrimSuffix(string(c.body), "\n"), "\n") {
			if l == "" {
				continue
			}
			p, err := parseLine([]byte(l))
			if err != nil {
				t.Fatal(err)
			}
			got = append(got, p.ms)
		}
		if err := s.commit(c); err != nil {
			t.Fatal(err)
		}
	}
	return got
}

func checkSeq(t *testing.T, got []int64, from, to int) {
	t.Helper()
	if len(got) != to-from {
		t.Fatalf("got %d points, want %d (%v...)", len(got), to-from, got[:min(5, len(got))])
	}
	for i, v := range got {
		if v != int64(from+i) {
			t.Fatalf("point %d = %d, want %d", i, v, from+i)
		}
	}
}

// Points come back in order, exactly once, across close/reopen in the middle
// of delivery and across segment boundaries.
func TestSpoolOrderAcrossRestart(t *testing.T) {
	dir := t.TempDir()
	s, err := openSpool(dir, 1<<20, 4096, true)
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < 1000; i += 100 {
		b, n := batch(i, i+100)
		if err := s.appendBatch(b, n); err != nil {
			t.Fatal(err)
		}
	}
	if s.points.Load() != 1000 || len(s.segs) < 3 {
		t.Fatalf("points %d segments %d, want 1000 points in several segments", s.points.Load(), len(s.segs))
	}
	got := drain(t, s, 77, 5) // chunks stop at segment ends: fewer than 5*77 points
	s.close()

	s, err = openSpool(dir, 1<<20, 4096, true)
	if err != nil {
		t.Fatal(err)
	}
	if s.points.Load() != int64(1000-len(got)) || len(got) == 0 {
		t.Fatalf("after reopen %d points, want %d", s.points.Load(), 1000-len(got))
	}
	b, n := batch(1000, 1100)
	if err := s.appendBatch(b, n); err != nil {
		t.Fatal(err)
	}
	got = append(got, drain(t, s, 77, -1)...)
	checkSeq(t, got, 0, 1100)
	s.close()
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 || ents[0].Name() != "lock" {
		t.Errorf("files left after full delivery: %v", ents)
	}
}

// When the byte cap is hit the oldest segments go, their points are counted,
// and what remains is the newest data in order.
func TestSpoolCapDropsOldest(t *testing.T) {
	s, err := openSpool(t.TempDir(), 3*4096, 4096, false)
	if err != nil {
		t.Fatal(err)
	}
	const total = 2000
	for i := 0; i < total; i += 50 {
		b, n := batch(i, i+50)
		if err := s.appendBatch(b, n); err != nil {
			t.Fatal(err)
		}
		if s.bytes.Load() > 3*4096 {
			t.Fatalf("spool %d bytes over the cap", s.bytes.Load())
		}
	}
	dropped, kept := int(s.dropped.Load()), int(s.points.Load())
	if dropped == 0 || dropped+kept != total {
		t.Fatalf("dropped %d + kept %d != %d", dropped, kept, total)
	}
	checkSeq(t, drain(t, s, 100, -1), dropped, total)
}

// A crash in the middle of an append leaves a torn last line: it is cut on
// open, counted, and never sent. An unparsable line is skipped and counted.
func TestSpoolTornAndCorrupt(t *testing.T) {
	dir := t.TempDir()
	content := lineN(1) + "garbage line\n" + lineN(2) + "t,s=a v=3i 3" // no final newline: torn
	if err := os.WriteFile(filepath.Join(dir, segName(7)), []byte(content), 0o600); err != nil {
		t.Fatal(err)
	}
	s, err := openSpool(dir, 1<<20, 4096, true)
	if err != nil {
		t.Fatal(err)
	}
	if s.torn.Load() != 1 || s.points.Load() != 3 {
		t.Fatalf("torn %d points %d, want 1 and 3", s.torn.Load(), s.points.Load())
	}
	b, n := batch(4, 6)
	if err := s.appendBatch(b, n); err != nil {
		t.Fatal(err)
	}
	got := drain(t, s, 10, -1)
	want := []int64{1, 2, 4, 5}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("delivered %v, want %v", got, want)
	}
	if s.corrupt.Load() != 1 {
		t.Errorf("corrupt %d, want 1", s.corrupt.Load())
	}
	if s.points.Load() != 0 {
		t.Errorf("points left %d", s.points.Load())
	}
}

// FuzzSpoolRead writes arbitrary bytes as a segment (as a crash or a disk
// error might leave it) plus an arbitrary position file: opening and
// draining never panics, every complete line is either delivered or counted
// corrupt, and nothing is delivered twice.
func FuzzSpoolRead(f *testing.F) {
	f.Add([]byte(lineN(1)+lineN(2)), []byte("1 0\n"))
	f.Add([]byte(lineN(1)+"t,s=a v=2"), []byte("1 17\n"))
	f.Add([]byte("\n\n\x00garbage\nt v=1 1\n"), []byte("1 3"))
	f.Add([]byte(""), []byte("x"))
	f.Add([]byte(lineN(1)+lineN(2)), []byte("1 999999\n"))
	f.Fuzz(func(t *testing.T, seg, pos []byte) {
		dir := t.TempDir()
		if err := os.WriteFile(filepath.Join(dir, segName(1)), seg, 0o600); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, posFile), pos, 0o600); err != nil {
			t.Fatal(err)
		}
		s, err := openSpool(dir, 1<<20, 4096, false)
		if err != nil {
			t.Fatal(err)
		}
		defer s.close()
		start := s.points.Load()
		var delivered int64
		for i := 0; ; i++ {
			c, err := s.peek(3)
			if err != nil {
				t.Fatal(err)
			}
			if c.lines == 0 {
				break
			}
			if i > len(seg)+2 {
				t.Fatal("drain does not end")
			}
			delivered += c.points
			if err := s.commit(c); err != nil {
				t.Fatal(err)
			}
		}
		if delivered+int64(s.corrupt.Load()) != start {
			t.Fatalf("delivered %d + corrupt %d != %d lines", delivered, s.corrupt.Load(), start)
		}
		if s.points.Load() != 0 {
			t.Fatalf("points left %d", s.points.Load())
		}
	})
}

func TestSpoolLock(t *testing.T) {
	dir := t.TempDir()
	a, err := openSpool(dir, 1<<20, 4096, false)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := openSpool(dir, 1<<20, 4096, false); !errors.Is(err, ErrSpoolInUse) {
		t.Errorf("second open: %v, want ErrSpoolInUse", err)
	}
	a.close()
	b, err := openSpool(dir, 1<<20, 4096, false)
	if err != nil {
		t.Fatalf("open after close: %v", err)
	}
	b.close()
}
