//go:build !unix

package natsrc

import "time"

// processCPU is not measured here; the cores metrics then read 0.
func processCPU() time.Duration { return 0 }
