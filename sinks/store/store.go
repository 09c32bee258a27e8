// Package store is the embedded default sink of exergywatch: it keeps derived
// records and alert events on local disk with retention by age, answers the
// queries of the status API and the demo, and offers a small key-value API in
// which the alert and steady-state stages keep their state across restarts.
// It needs no server.
//
// File format: one bbolt file (go.etcd.io/bbolt: a single-file copy-on-write
// B+tree with ACID transactions, pure Go). bbolt was chosen over an
// append-only line-protocol file because the status API needs "latest record
// per machine" and "records of one machine in a time span" without scanning,
// and the state API needs in-place updates; both are ordered-key lookups in a
// B+tree. Layout (all keys big-endian so that byte order is time order):
//
//	bucket "meta"     key "format" = "exergywatch-store/1"
//	bucket "records"  one nested bucket per machine, named "<site>\x00<machine>";
//	                  key   = 8-byte Unix time of the record in nanoseconds
//	                  value = sinks.RecordJSON (wire JSON, a Bad figure has no value)
//	                  A second record of the same machine at the same nanosecond
//	                  replaces the first (replays are idempotent).
//	bucket "events"   key   = 8-byte Unix time in nanoseconds + 8-byte sequence
//	                  value = sinks.EventJSON
//	bucket "state"    one nested bucket per namespace; key = caller's key,
//	                  value = caller's bytes, stored as given
//
// Times before 1970 are refused. Writes are buffered in memory for at most
// FlushInterval (or BatchItems items) and committed in one transaction;
// queries commit the buffer first, so they always see every accepted write.
// State writes (PutState, DeleteState) are committed before they return.
package store

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	bolt "go.etcd.io/bbolt"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/sinks"
)

var (
	_ sinks.Sink     = (*Store)(nil)
	_ sinks.Reporter = (*Store)(nil)
)

// FormatVersion is written into new files and checked on open.
const FormatVersion = "exergywatch-store/1"

var (
	bMeta    = []byte("meta")
	bRecords = []byte("records")
	bEvents  = []byte("events")
	bState   = []byte("state")
)

// ErrFormat is returned by Open for a file written by another format version
// or not by this package.
var ErrFormat = errors.New("store: unknown file format")

// Config configures the embedded store.
type Config struct {
	Path string `yaml:"path"` // file path; the directory is created when missing
	// Retention: records and events older than this (by wall clock) are
	// deleted (a duration such as 720h); default 720 h (30 days).
	Retention time.Duration `yaml:"retention"`
	// PruneInterval is how often retention runs (a duration such as 10m);
	// default 10 min.
	PruneInterval time.Duration `yaml:"prune_interval"`
	// FlushInterval is the longest time a write waits in memory before
	// commit (a duration such as 200ms); default 200 ms.
	FlushInterval time.Duration `yaml:"flush_interval"`
	BatchItems    int           `yaml:"batch_items"` // commit at once when this many writes wait; default 1000
	NoSync        bool          `yaml:"no_sync"`     // skip fsync on commit (faster; a power loss may lose the last commits)
}

// Defaults fills zero fields with defaults.
func (c *Config) Defaults() {
	if c.Retention == 0 {
		c.Retention = 720 * time.Hour
	}
	if c.PruneInterval == 0 {
		c.PruneInterval = 10 * time.Minute
	}
	if c.FlushInterval == 0 {
		c.FlushInterval = 200 * time.Millisecond
	}
	if c.BatchItems == 0 {
		c.BatchItems = 1000
	}
}

// Validate checks the settings; every message says how to fix the value.
func (c Config) Validate() error {
	switch {
	case c.Path == "":
		return fmt.Errorf("store: path is empty: set the file for the embedded store, e.g. /var/lib/exergywatch/store.db")
	case c.Retention < time.Hour:
		return fmt.Errorf("store: retention %v: must be at least 1h", c.Retention)
	case c.PruneInterval < time.Second:
		return fmt.Errorf("store: prune_interval %v: must be at least 1s", c.PruneInterval)
	case c.FlushInterval < time.Millisecond:
		return fmt.Errorf("store: flush_interval %v: must be at least 1ms", c.FlushInterval)
	case c.BatchItems < 1:
		return fmt.Errorf("store: batch_items %d: must be at least 1", c.BatchItems)
	}
	return nil
}

type pendingItem struct {
	machine []byte // nested bucket name for records, nil for events
	t       time.Time
	value   []byte
}

// Store is the embedded store. Its methods are safe for concurrent use.
type Store struct {
	cfg  Config
	name string
	log  *slog.Logger
	db   *bolt.DB

	mu      sync.Mutex // guards pending and closed
	pending []pendingItem
	closed  bool

	commitMu sync.Mutex // one commit at a time, in order

	stop chan struct{}
	done chan struct{}

	written  atomic.Uint64
	dropped  atomic.Uint64
	rejected atomic.Uint64
	pruned   atomic.Uint64

	errMu     sync.Mutex
	lastErr   string
	lastErrAt time.Time

	closeOnce sync.Once
	closeErr  error
}

// Open opens (or creates) the store file and starts its background goroutine
// (periodic commit and retention), which Close stops. logger may be nil.
func Open(name string, cfg Config, logger *slog.Logger) (*Store, error) {
	cfg.Defaults()
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	if logger == nil {
		logger = slog.Default()
	}
	if err := os.MkdirAll(filepath.Dir(cfg.Path), 0o750); err != nil {
		return nil, fmt.Errorf("store: create directory: %w", err)
	}
	db, err := bolt.Open(cfg.Path, 0o640, &bolt.Options{Timeout: 2 * time.Second, NoSync: cfg.NoSync})
	if err != nil {
		return nil, fmt.Errorf("store: open %s: %w", cfg.Path, err)
	}
	err = db.Update(func(tx *bolt.Tx) error {
		meta, err := tx.CreateBucketIfNotExists(bMeta)
		if err != nil {
			return err
		}
		switch v := meta.Get([]byte("format")); {
		case v == nil:
			if tx.Bucket(bRecords) != nil {
				return fmt.Errorf("%w: %s has data but no format mark", ErrFormat, cfg.Path)
			}
			if err := meta.Put([]byte("format"), []byte(FormatVersion)); err != nil {
				return err
			}
		case string(v) != FormatVersion:
			return fmt.Errorf("%w: %s is %q, this build reads %q", ErrFormat, cfg.Path, v, FormatVersion)
		}
		for _, b := range [][]byte{bRecords, bEvents, bState} {
			if _, err := tx.CreateBucketIfNotExists(b); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		_ = db.Close()
		if errors.Is(err, ErrFormat) {
			return nil, err
		}
		return nil, fmt.Errorf("store: initialise %s: %w", cfg.Path, err)
	}
	s := &Store{cfg: cfg, name: name, log: logger.With("sink", name), db: db, stop: make(chan struct{}), done: make(chan struct{})}
	go s.run()
	return s, nil
}

func (s *Store) run() {
	defer close(s.done)
	flush := time.NewTicker(s.cfg.FlushInterval)
	defer flush.Stop()
	prune := time.NewTicker(s.cfg.PruneInterval)
	defer prune.Stop()
	for {
		select {
		case <-s.stop:
			return
		case <-flush.C:
			if err := s.commit(); err != nil {
				s.log.Error("store commit failed", "err", err)
			}
		case <-prune.C:
			if _, _, err := s.Prune(time.Now()); err != nil {
				s.setErr(err)
				s.log.Error("store retention failed", "err", err)
			}
		}
	}
}

func (s *Store) setErr(err error) {
	s.errMu.Lock()
	s.lastErr, s.lastErrAt = err.Error(), time.Now().UTC()
	s.errMu.Unlock()
}

func machineBucket(site, machine string) []byte { return []byte(site + "\x00" + machine) }

func splitMachineBucket(b []byte) (site, machine string) {
	site, machine, _ = strings.Cut(string(b), "\x00")
	return site, machine
}

func timeKey(t time.Time) ([]byte, error) {
	ns := t.UnixNano()
	if t.Before(time.Unix(0, 0)) || ns < 0 {
		return nil, fmt.Errorf("%w: time %s is before 1970", sinks.ErrInvalid, t.Format(time.RFC3339))
	}
	return binary.BigEndian.AppendUint64(nil, uint64(ns)), nil
}

func (s *Store) reject(err error) error {
	s.rejected.Add(1)
	s.setErr(err)
	s.log.Warn("item rejected", "err", err)
	return err
}

// WriteRecord validates and buffers the record; it is committed within
// FlushInterval. Errors wrap sinks.ErrInvalid (rejected, counted) or
// sinks.ErrClosed; a failed commit is counted in Dropped and returned.
func (s *Store) WriteRecord(ctx context.Context, r compute.Record) error {
	b, err := marshalRecord(r)
	if err != nil {
		return s.reject(fmt.Errorf("store: %w", err))
	}
	if _, err := timeKey(r.Time); err != nil {
		return s.reject(fmt.Errorf("store: record %s: %w", r.Machine, err))
	}
	if strings.Contains(r.Site, "\x00") || strings.Contains(r.Machine, "\x00") {
		return s.reject(fmt.Errorf("store: %w: NUL in site or machine id", sinks.ErrInvalid))
	}
	return s.add(pendingItem{machine: machineBucket(r.Site, r.Machine), t: r.Time, value: b})
}

// WriteEvent validates and buffers the event.
func (s *Store) WriteEvent(ctx context.Context, e compute.Event) error {
	b, err := sinks.MarshalEvent(e)
	if err != nil {
		return s.reject(fmt.Errorf("store: %w", err))
	}
	if _, err := timeKey(e.Time); err != nil {
		return s.reject(fmt.Errorf("store: event %s/%s: %w", e.Machine, e.Rule, err))
	}
	return s.add(pendingItem{t: e.Time, value: b})
}

func (s *Store) add(it pendingItem) error {
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return fmt.Errorf("store: %w", sinks.ErrClosed)
	}
	s.pending = append(s.pending, it)
	full := len(s.pending) >= s.cfg.BatchItems
	s.mu.Unlock()
	if full {
		return s.commit()
	}
	return nil
}

// commit writes the buffered items in one transaction.
func (s *Store) commit() error {
	s.commitMu.Lock()
	defer s.commitMu.Unlock()
	s.mu.Lock()
	items := s.pending
	s.pending = nil
	s.mu.Unlock()
	if len(items) == 0 {
		return nil
	}
	err := s.db.Update(func(tx *bolt.Tx) error {
		recs, evs := tx.Bucket(bRecords), tx.Bucket(bEvents)
		open := map[string]*bolt.Bucket{} // machine buckets of this transaction
		for _, it := range items {
			k, err := timeKey(it.t)
			if err != nil {
				return err
			}
			if it.machine != nil {
				mb := open[string(it.machine)]
				if mb == nil {
					if mb, err = recs.CreateBucketIfNotExists(it.machine); err != nil {
						return err
					}
					// Keys are times, written mostly in order: fill
					// pages before splitting them (fewer pages to write;
					// an insert in the middle still splits as usual).
					mb.FillPercent = 1
					open[string(it.machine)] = mb
				}
				if err := mb.Put(k, it.value); err != nil {
					return err
				}
				continue
			}
			seq, err := evs.NextSequence()
			if err != nil {
				return err
			}
			if err := evs.Put(binary.BigEndian.AppendUint64(k, seq), it.value); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		s.dropped.Add(uint64(len(items)))
		err = fmt.Errorf("store: commit of %d items failed, items dropped: %w", len(items), err)
		s.setErr(err)
		return err
	}
	s.written.Add(uint64(len(items)))
	return nil
}

// Flush commits buffered writes now.
func (s *Store) Flush(ctx context.Context) error { return s.commit() }

// Close commits what is buffered and closes the file. Idempotent.
func (s *Store) Close(ctx context.Context) error {
	s.closeOnce.Do(func() {
		s.mu.Lock()
		s.closed = true
		s.mu.Unlock()
		close(s.stop)
		<-s.done
		err := s.commit()
		s.closeErr = errors.Join(err, s.db.Close())
	})
	return s.closeErr
}

// Stats reports the health of the store; items are records and events.
func (s *Store) Stats() sinks.Stats {
	s.mu.Lock()
	q := len(s.pending)
	s.mu.Unlock()
	s.errMu.Lock()
	le, lt := s.lastErr, s.lastErrAt
	s.errMu.Unlock()
	return sinks.Stats{Name: s.name, Queued: int64(q), Written: s.written.Load(), Dropped: s.dropped.Load(),
		Rejected: s.rejected.Load(), LastError: le, LastErrorTime: lt}
}

// view commits the buffer and runs a read transaction.
func (s *Store) view(fn func(tx *bolt.Tx) error) error {
	if err := s.commit(); err != nil {
		return err
	}
	return s.db.View(fn)
}

// MachineID names a machine of a site.
type MachineID struct {
	Site    string
	Machine string
}

// Machines lists the machines that have records, sorted by site then machine.
func (s *Store) Machines() ([]MachineID, error) {
	var out []MachineID
	err := s.view(func(tx *bolt.Tx) error {
		return tx.Bucket(bRecords).ForEachBucket(func(k []byte) error {
			site, m := splitMachineBucket(k)
			out = append(out, MachineID{site, m})
			return nil
		})
	})
	return out, err
}

func decodeRecord(v []byte) (compute.Record, error) {
	r, err := sinks.UnmarshalRecord(v)
	if err != nil {
		return compute.Record{}, fmt.Errorf("store: stored record does not decode: %w", err)
	}
	return r, nil
}

// Latest returns the newest record of one machine; ok is false when the
// machine has none.
func (s *Store) Latest(site, machine string) (r compute.Record, ok bool, err error) {
	err = s.view(func(tx *bolt.Tx) error {
		mb := tx.Bucket(bRecords).Bucket(machineBucket(site, machine))
		if mb == nil {
			return nil
		}
		_, v := mb.Cursor().Last()
		if v == nil {
			return nil
		}
		r, err = decodeRecord(v)
		ok = err == nil
		return err
	})
	return r, ok, err
}

// LatestAll returns the newest record of every machine, sorted by site then
// machine.
func (s *Store) LatestAll() ([]compute.Record, error) {
	var out []compute.Record
	err := s.view(func(tx *bolt.Tx) error {
		recs := tx.Bucket(bRecords)
		return recs.ForEachBucket(func(name []byte) error {
			_, v := recs.Bucket(name).Cursor().Last()
			if v == nil {
				return nil
			}
			r, err := decodeRecord(v)
			if err != nil {
				return err
			}
			out = append(out, r)
			return nil
		})
	})
	return out, err
}

// Range returns the records of one machine with from <= Time < to, oldest
// first, at most limit of them (limit <= 0: no limit). A zero from means
// from the start, a zero to means no upper bound.
func (s *Store) Range(site, machine string, from, to time.Time, limit int) ([]compute.Record, error) {
	var out []compute.Record
	if from.Before(time.Unix(0, 0)) {
		from = time.Unix(0, 0)
	}
	end := int64(math.MaxInt64)
	if !to.IsZero() && to.Before(time.Unix(0, math.MaxInt64)) {
		end = to.UnixNano()
	}
	fk, err := timeKey(from)
	if err != nil {
		return nil, err
	}
	err = s.view(func(tx *bolt.Tx) error {
		mb := tx.Bucket(bRecords).Bucket(machineBucket(site, machine))
		if mb == nil {
			return nil
		}
		c := mb.Cursor()
		for k, v := c.Seek(fk); k != nil && (limit <= 0 || len(out) < limit); k, v = c.Next() {
			if int64(binary.BigEndian.Uint64(k)) >= end {
				break
			}
			r, err := decodeRecord(v)
			if err != nil {
				return err
			}
			out = append(out, r)
		}
		return nil
	})
	return out, err
}

// RecentEvents returns up to limit events, newest first; machine "" means
// every machine.
func (s *Store) RecentEvents(machine string, limit int) ([]compute.Event, error) {
	var out []compute.Event
	err := s.view(func(tx *bolt.Tx) error {
		c := tx.Bucket(bEvents).Cursor()
		for k, v := c.Last(); k != nil && (limit <= 0 || len(out) < limit); k, v = c.Prev() {
			e, err := sinks.UnmarshalEvent(v)
			if err != nil {
				return fmt.Errorf("store: stored event does not decode: %w", err)
			}
			if machine == "" || e.Machine == machine {
				out = append(out, e)
			}
		}
		return nil
	})
	return out, err
}

// Prune deletes records and events older than now minus Retention and
// returns how many it deleted. It runs every PruneInterval by itself.
func (s *Store) Prune(now time.Time) (records, events int, err error) {
	cutoff := now.Add(-s.cfg.Retention)
	if cutoff.Before(time.Unix(0, 1)) {
		return 0, 0, nil
	}
	ck, err := timeKey(cutoff)
	if err != nil {
		return 0, 0, err
	}
	if err := s.commit(); err != nil {
		return 0, 0, err
	}
	s.commitMu.Lock()
	defer s.commitMu.Unlock()
	err = s.db.Update(func(tx *bolt.Tx) error {
		del := func(b *bolt.Bucket) (int, error) {
			var keys [][]byte
			c := b.Cursor()
			for k, _ := c.First(); k != nil && bytes.Compare(k[:8], ck) < 0; k, _ = c.Next() {
				keys = append(keys, bytes.Clone(k))
			}
			for _, k := range keys {
				if err := b.Delete(k); err != nil {
					return 0, err
				}
			}
			return len(keys), nil
		}
		recs := tx.Bucket(bRecords)
		var names [][]byte
		if err := recs.ForEachBucket(func(k []byte) error { names = append(names, bytes.Clone(k)); return nil }); err != nil {
			return err
		}
		for _, name := range names {
			mb := recs.Bucket(name)
			n, err := del(mb)
			if err != nil {
				return err
			}
			records += n
			if k, _ := mb.Cursor().First(); k == nil {
				if err := recs.DeleteBucket(name); err != nil {
					return err
				}
			}
		}
		events, err = del(tx.Bucket(bEvents))
		return err
	})
	if err != nil {
		return 0, 0, fmt.Errorf("store: retention: %w", err)
	}
	s.pruned.Add(uint64(records + events))
	return records, events, nil
}

// Key-value state. Namespaces separate users (e.g. "alert", "steady",
// "baseline"); keys are free text; values are stored exactly as given.

func checkNS(ns, key string) error {
	if ns == "" || key == "" {
		return fmt.Errorf("store: state namespace and key must not be empty (ns %q, key %q)", ns, key)
	}
	if len(key) > bolt.MaxKeySize || len(ns) > bolt.MaxKeySize {
		return fmt.Errorf("store: state namespace or key too long")
	}
	return nil
}

// PutState stores value under ns/key, durably before it returns.
func (s *Store) PutState(ns, key string, value []byte) error {
	if err := checkNS(ns, key); err != nil {
		return err
	}
	err := s.db.Update(func(tx *bolt.Tx) error {
		b, err := tx.Bucket(bState).CreateBucketIfNotExists([]byte(ns))
		if err != nil {
			return err
		}
		return b.Put([]byte(key), bytes.Clone(value))
	})
	if err != nil {
		return fmt.Errorf("store: put state %s/%s: %w", ns, key, err)
	}
	return nil
}

// GetState returns a copy of the value under ns/key; ok is false when there
// is none.
func (s *Store) GetState(ns, key string) (value []byte, ok bool, err error) {
	if err := checkNS(ns, key); err != nil {
		return nil, false, err
	}
	err = s.db.View(func(tx *bolt.Tx) error {
		b := tx.Bucket(bState).Bucket([]byte(ns))
		if b == nil {
			return nil
		}
		if v := b.Get([]byte(key)); v != nil {
			value, ok = bytes.Clone(v), true
		}
		return nil
	})
	if err != nil {
		return nil, false, fmt.Errorf("store: get state %s/%s: %w", ns, key, err)
	}
	return value, ok, nil
}

// DeleteState removes ns/key; removing a missing key is not an error.
func (s *Store) DeleteState(ns, key string) error {
	if err := checkNS(ns, key); err != nil {
		return err
	}
	err := s.db.Update(func(tx *bolt.Tx) error {
		b := tx.Bucket(bState).Bucket([]byte(ns))
		if b == nil {
			return nil
		}
		return b.Delete([]byte(key))
	})
	if err != nil {
		return fmt.Errorf("store: delete state %s/%s: %w", ns, key, err)
	}
	return nil
}

// ListState returns copies of every key and value of a namespace.
func (s *Store) ListState(ns string) (map[string][]byte, error) {
	out := map[string][]byte{}
	err := s.db.View(func(tx *bolt.Tx) error {
		b := tx.Bucket(bState).Bucket([]byte(ns))
		if b == nil {
			return nil
		}
		return b.ForEach(func(k, v []byte) error {
			out[string(k)] = bytes.Clone(v)
			return nil
		})
	})
	if err != nil {
		return nil, fmt.Errorf("store: list state %s: %w", ns, err)
	}
	return out, nil
}

// StateNamespaces lists the namespaces that hold state, sorted.
func (s *Store) StateNamespaces() ([]string, error) {
	var out []string
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bState).ForEachBucket(func(k []byte) error { out = append(out, string(k)); return nil })
	})
	sort.Strings(out)
	return out, err
}
