//go:build unix

package ingest

import "syscall"

// processCPUSeconds is the user+system CPU time of this process, so that a
// benchmark on a shared machine can report throughput per CPU second.
func processCPUSeconds() float64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	tv := func(t syscall.Timeval) float64 { return float64(t.Sec) + float64(t.Usec)/1e6 }
	return tv(ru.Utime) + tv(ru.Stime)
}
