package influx

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync/atomic"
)

// Spool file format.
//
// The spool is a directory of append-only segment files named
// "<20-digit sequence>.lp", each holding complete lines of line protocol
// (one point per line, '\n'-terminated, exactly the bytes that would have
// been sent). New batches are appended to the newest segment until it reaches
// the segment size, then a new segment starts. The read position of the
// oldest segment is kept in the file "position" ("<sequence> <byte offset>\n",
// replaced atomically by rename) after every acknowledged chunk, so a restart
// resumes where delivery stopped. A segment is deleted once fully delivered.
// Delivery is exactly once except for a crash between the server's
// acknowledgement and the position save: then at most that one chunk is sent
// again on the next start (InfluxDB overwrites identical points;
// VictoriaMetrics would keep a duplicate sample).
//
// The file "lock" holds an exclusive advisory lock (flock) while a sink uses
// the directory, so two sinks never share a spool.
//
// A crash can leave the newest segment with a torn last line (no trailing
// newline); it is cut off on open and counted in torn. A line that does not
// parse is skipped on replay and counted in corrupt, never sent. When the
// byte cap is reached the oldest segment is deleted and its undelivered
// points are counted in dropped.
//
// The spool is used by one goroutine (the sink's writer); only the counters
// are read concurrently.
type spool struct {
	dir      string
	maxBytes int64
	segBytes int64
	fsync    bool

	lock    *os.File  // exclusive lock on the directory
	segs    []segment // oldest first
	active  *os.File  // append handle of segs[len-1], nil when none open
	readOff int64     // byte offset of the next undelivered line in segs[0]
	readLns int64     // lines of segs[0] before readOff

	bytes   atomic.Int64  // sum of segment sizes on disk
	points  atomic.Int64  // undelivered lines on disk
	dropped atomic.Uint64 // lines deleted by the byte cap or lost on a write error
	torn    atomic.Uint64 // torn last lines cut off
	corrupt atomic.Uint64 // unparsable lines skipped
}

type segment struct {
	seq   uint64
	size  int64 // bytes
	lines int64 // complete lines
}

const posFile = "position"

func segName(seq uint64) string { return fmt.Sprintf("%020d.lp", seq) }

// openSpool reads an existing spool directory (creating it when missing),
// cuts torn tails and restores the read position.
func openSpool(dir string, maxBytes, segBytes int64, fsync bool) (*spool, error) {
	if err := os.MkdirAll(dir, 0o750); err != nil {
		return nil, fmt.Errorf("influx spool: create %s: %w", dir, err)
	}
	lock, err := lockDir(dir)
	if err != nil {
		return nil, err
	}
	s := &spool{dir: dir, maxBytes: maxBytes, segBytes: segBytes, fsync: fsync, lock: lock}
	ok := false
	defer func() {
		if !ok {
			s.close()
		}
	}()
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, fmt.Errorf("influx spool: read %s: %w", dir, err)
	}
	for _, e := range ents {
		name := e.Name()
		if !e.Type().IsRegular() || !strings.HasSuffix(name, ".lp") {
			continue
		}
		seq, err := strconv.ParseUint(strings.TrimSuffix(name, ".lp"), 10, 64)
		if err != nil {
			continue // not ours
		}
		s.segs = append(s.segs, segment{seq: seq})
	}
	sort.Slice(s.segs, func(i, j int) bool { return s.segs[i].seq < s.segs[j].seq })
	for i := range s.segs {
		if err := s.scan(&s.segs[i]); err != nil {
			return nil, err
		}
	}
	// restore the read position
	if b, err := os.ReadFile(filepath.Join(dir, posFile)); err == nil && len(s.segs) > 0 {
		var seq uint64
		var off int64
		if _, err := fmt.Sscanf(string(b), "%d %d", &seq, &off); err == nil {
			// segments older than the position were delivered but not yet
			// deleted when the process stopped
			for len(s.segs) > 0 && s.segs[0].seq < seq {
				if err := os.Remove(filepath.Join(dir, segName(s.segs[0].seq))); err != nil && !errors.Is(err, os.ErrNotExist) {
					return nil, fmt.Errorf("influx spool: remove delivered segment: %w", err)
				}
				s.segs = s.segs[1:]
			}
			if len(s.segs) > 0 && s.segs[0].seq == seq && off > 0 && off <= s.segs[0].size {
				if err := s.seekLines(off); err != nil {
					return nil, err
				}
			}
		}
	}
	var total, pts int64
	for i, g := range s.segs {
		total += g.size
		pts += g.lines
		if i == 0 {
			pts -= s.readLns
		}
	}
	s.bytes.Store(total)
	s.points.Store(pts)
	ok = true
	return s, nil
}

// scan counts the complete lines of a segment and cuts a torn tail.
func (s *spool) scan(g *segment) error {
	path := filepath.Join(s.dir, segName(g.seq))
	b, err := os.ReadFile(path)
	if err != nil {
		return fmt.Errorf("influx spool: read segment: %w", err)
	}
	end := bytes.LastIndexByte(b, '\n') + 1
	if end < len(b) {
		s.torn.Add(1)
		if err := os.Truncate(path, int64(end)); err != nil {
			return fmt.Errorf("influx spool: cut torn line of %s: %w", path, err)
		}
	}
	g.size = int64(end)
	g.lines = int64(bytes.Count(b[:end], []byte{'\n'}))
	return nil
}

// seekLines sets the read position of segs[0] to off, which must be a line
// start; it counts the lines before it.
func (s *spool) seekLines(off int64) error {
	b, err := os.ReadFile(filepath.Join(s.dir, segName(s.segs[0].seq)))
	if err != nil {
		return fmt.Errorf("influx spool: read segment: %w", err)
	}
	if off > int64(len(b)) || (off > 0 && b[off-1] != '\n') {
		return nil // not a line start: replay the whole segment (at least once)
	}
	s.readOff = off
	s.readLns = int64(bytes.Count(b[:off], []byte{'\n'}))
	return nil
}

// empty reports whether nothing waits for delivery.
func (s *spool) empty() bool { return s.points.Load() == 0 }

// appendBatch appends complete lines (data must end with '\n', lines is their
// count). When the byte cap would be exceeded the oldest segments are deleted
// first and their undelivered lines counted as dropped.
func (s *spool) appendBatch(data []byte, lines int64) error {
	if len(data) == 0 {
		return nil
	}
	if data[len(data)-1] != '\n' {
		return fmt.Errorf("influx spool: batch does not end with a newline")
	}
	n := int64(len(data))
	if n > s.maxBytes {
		s.dropped.Add(uint64(lines))
		return fmt.Errorf("influx spool: batch of %d bytes exceeds the spool cap of %d bytes: %d points dropped", n, s.maxBytes, lines)
	}
	for s.bytes.Load()+n > s.maxBytes && len(s.segs) > 0 {
		if len(s.segs) == 1 && s.active != nil {
			s.closeActive() // rotate so that the oldest can go
		}
		if err := s.dropOldest(); err != nil {
			return err
		}
	}
	if s.active == nil || s.segs[len(s.segs)-1].size+n > s.segBytes {
		if err := s.rotate(); err != nil {
			s.dropped.Add(uint64(lines))
			return err
		}
	}
	last := &s.segs[len(s.segs)-1]
	w, err := s.active.Write(data)
	if err == nil && s.fsync {
		err = s.active.Sync()
	}
	if err != nil {
		// keep the file consistent: cut what was partly written
		_ = s.active.Truncate(last.size)
		s.dropped.Add(uint64(lines))
		return fmt.Errorf("influx spool: append %d points: %w", lines, err)
	}
	last.size += int64(w)
	last.lines += lines
	s.bytes.Add(int64(w))
	s.points.Add(lines)
	return nil
}

func (s *spool) closeActive() {
	if s.active != nil {
		_ = s.active.Close()
		s.active = nil
	}
}

func (s *spool) rotate() error {
	s.closeActive()
	var seq uint64 = 1
	if len(s.segs) > 0 {
		seq = s.segs[len(s.segs)-1].seq + 1
	}
	f, err := os.OpenFile(filepath.Join(s.dir, segName(seq)), os.O_CREATE|os.O_WRONLY|os.O_APPEND|os.O_EXCL, 0o640)
	if err != nil {
		return fmt.Errorf("influx spool: new segment: %w", err)
	}
	s.active = f
	s.segs = append(s.segs, segment{seq: seq})
	return nil
}

// dropOldest deletes segs[0] and counts its undelivered lines as dropped.
func (s *spool) dropOldest() error {
	g := s.segs[0]
	lost := g.lines - s.readLns
	if err := s.removeFirst(); err != nil {
		return err
	}
	s.dropped.Add(uint64(lost))
	s.points.Add(-lost)
	return nil
}

// removeFirst deletes segs[0] and resets the read position.
func (s *spool) removeFirst() error {
	if len(s.segs) == 1 {
		s.closeActive()
	}
	g := s.segs[0]
	if err := os.Remove(filepath.Join(s.dir, segName(g.seq))); err != nil && !errors.Is(err, os.ErrNotExist) {
		return fmt.Errorf("influx spool: remove segment: %w", err)
	}
	s.segs = s.segs[1:]
	s.bytes.Add(-g.size)
	s.readOff, s.readLns = 0, 0
	return s.savePos()
}

// chunk is a piece of the oldest segment ready to send.
type chunk struct {
	body   []byte // valid lines to send, '\n'-separated
	points int64  // valid lines in body
	lines  int64  // lines consumed from the segment (valid + corrupt)
	end    int64  // read offset after the chunk
}

// peek returns up to maxLines lines from the read position without
// consuming them. A chunk with lines == 0 means nothing is waiting. Lines
// that do not parse are left out of body (counted when committed).
func (s *spool) peek(maxLines int) (chunk, error) {
	for len(s.segs) > 0 {
		g := s.segs[0]
		if s.readOff >= g.size {
			if len(s.segs) == 1 {
				return chunk{}, nil // everything delivered; the active segment stays
			}
			if err := s.removeFirst(); err != nil {
				return chunk{}, err
			}
			continue
		}
		f, err := os.Open(filepath.Join(s.dir, segName(g.seq)))
		if err != nil {
			return chunk{}, fmt.Errorf("influx spool: open segment: %w", err)
		}
		data := make([]byte, g.size-s.readOff)
		_, err = f.ReadAt(data, s.readOff)
		_ = f.Close()
		if err != nil && !errors.Is(err, io.EOF) {
			return chunk{}, fmt.Errorf("influx spool: read segment: %w", err)
		}
		c := chunk{end: s.readOff}
		for c.lines < int64(maxLines) && len(data) > 0 {
			i := bytes.IndexByte(data, '\n')
			if i < 0 { // torn tail inside a segment (should not happen after scan)
				s.torn.Add(1)
				c.end += int64(len(data))
				break
			}
			line := data[:i]
			data = data[i+1:]
			c.end += int64(i + 1)
			c.lines++
			if _, err := parseLine(line); err != nil {
				s.corrupt.Add(1)
				continue
			}
			c.body = append(c.body, line...)
			c.body = append(c.body, '\n')
			c.points++
		}
		return c, nil
	}
	return chunk{}, nil
}

// commit consumes a chunk returned by peek after it was delivered (or
// rejected for good).
func (s *spool) commit(c chunk) error {
	if len(s.segs) == 0 {
		return nil
	}
	s.readOff = c.end
	s.readLns += c.lines
	s.points.Add(-c.lines)
	g := s.segs[0]
	if s.readOff >= g.size {
		// fully delivered: delete it, even when it is the active one
		return s.removeFirst()
	}
	return s.savePos()
}

func (s *spool) savePos() error {
	path := filepath.Join(s.dir, posFile)
	if len(s.segs) == 0 {
		if err := os.Remove(path); err != nil && !errors.Is(err, os.ErrNotExist) {
			return fmt.Errorf("influx spool: remove position: %w", err)
		}
		return nil
	}
	tmp := path + ".tmp"
	b := fmt.Appendf(nil, "%d %d\n", s.segs[0].seq, s.readOff)
	f, err := os.OpenFile(tmp, os.O_CREATE|os.O_WRONLY|os.O_TRUNC, 0o640)
	if err != nil {
		return fmt.Errorf("influx spool: save position: %w", err)
	}
	_, err = f.Write(b)
	if err == nil && s.fsync {
		err = f.Sync()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(tmp, path)
	}
	if err != nil {
		return fmt.Errorf("influx spool: save position: %w", err)
	}
	return nil
}

func (s *spool) close() {
	s.closeActive()
	if s.lock != nil {
		_ = s.lock.Close()
		s.lock = nil
	}
}
