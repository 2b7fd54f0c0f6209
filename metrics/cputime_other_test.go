//go:build !unix

package metrics

import "time"

var cpuStart = time.Now()

// processCPU falls back to wall time where getrusage is not available.
func processCPU() time.Duration { return time.Since(cpuStart) }
