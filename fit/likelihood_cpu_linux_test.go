//go:build linux

package fit_test

import (
	"syscall"
	"time"
)

// gridCPUTime is the process's user+system CPU time. Benchmarks report it beside
// wall time because the shared 2-core machine runs many jobs at once: CPU time
// per operation is what one dedicated core would take (up to cache effects).
func gridCPUTime() time.Duration { return gridRusage(syscall.RUSAGE_SELF) }

// gridThreadCPUTime is the calling OS thread's CPU time (lock the goroutine to its
// thread first).
func gridThreadCPUTime() time.Duration { return gridRusage(1) } // RUSAGE_THREAD

func gridRusage(who int) time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(who, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
