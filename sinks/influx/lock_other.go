//go:build !unix

package influx

import (
	"errors"
	"os"
)

// ErrSpoolInUse is returned when another sink holds the spool directory
// (detected on unix only).
var ErrSpoolInUse = errors.New("influx spool: directory in use by another sink")

func lockDir(dir string) (*os.File, error) { return nil, nil }
