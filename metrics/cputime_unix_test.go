//go:build unix

package metrics

import (
	"syscall"
	"time"
)

// processCPU returns the process's user + system CPU time: on a machine
// shared with other jobs it measures the work done, where wall time
// measures the queue.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
