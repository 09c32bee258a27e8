package ingest

import (
	"log/slog"
	"sync"
	"time"
)

// LogLimiter logs at most once per key per period (decode errors: once per
// tag per minute). Suppressed messages are counted and reported with the
// next logged one.
type LogLimiter struct {
	Log    *slog.Logger
	Period time.Duration
	mu     sync.Mutex
	last   map[string]time.Time
	supp   map[string]int
}

// NewLogLimiter returns a limiter logging to log at most once per period
// per key.
func NewLogLimiter(log *slog.Logger, period time.Duration) *LogLimiter {
	if log == nil {
		log = slog.Default()
	}
	return &LogLimiter{Log: log, Period: period, last: map[string]time.Time{}, supp: map[string]int{}}
}

// Warn logs msg for key unless it was logged less than Period before now.
// It reports whether the message was logged.
func (l *LogLimiter) Warn(now time.Time, key, msg string, args ...any) bool {
	l.mu.Lock()
	t, seen := l.last[key]
	if seen && now.Sub(t) < l.Period {
		l.supp[key]++
		l.mu.Unlock()
		return false
	}
	n := l.supp[key]
	l.last[key] = now
	delete(l.supp, key)
	if len(l.last) > 100000 { // bound memory under a flood of distinct keys
		for k, v := range l.last {
			if now.Sub(v) >= l.Period {
				delete(l.last, k)
			}
		}
	}
	l.mu.Unlock()
	l.Log.Warn(msg, append(args, "key", key, "suppressed_since_last", n)...)
	return true
}
