//go:build unix

package influx

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"syscall"
)

// ErrSpoolInUse is returned when another sink (in this or another process)
// holds the spool directory.
var ErrSpoolInUse = errors.New("influx spool: directory in use by another sink")

// lockDir takes an exclusive advisory lock on dir/lock. The lock is held by
// the returned file and released when it is closed (or the process ends).
func lockDir(dir string) (*os.File, error) {
	f, err := os.OpenFile(filepath.Join(dir, "lock"), os.O_CREATE|os.O_RDWR, 0o640)
	if err != nil {
		return nil, fmt.Errorf("influx spool: lock file: %w", err)
	}
	if err := syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB); err != nil {
		_ = f.Close()
		if errors.Is(err, syscall.EWOULDBLOCK) {
			return nil, fmt.Errorf("%w: %s", ErrSpoolInUse, dir)
		}
		return nil, fmt.Errorf("influx spool: lock %s: %w", dir, err)
	}
	return f, nil
}
