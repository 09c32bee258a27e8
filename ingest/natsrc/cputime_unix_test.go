//go:build unix

package natsrc

import (
	"syscall"
	"time"
)

// processCPU returns the CPU time (user + system) this process has used,
// so that a benchmark can report the cores it kept busy over a timed span.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
