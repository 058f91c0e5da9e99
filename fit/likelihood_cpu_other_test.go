//go:build !js

package fit_test

import (
	"syscall"
	"time"
)

// cpuTime is the process's user+system CPU time. Benchmarks report it beside
// wall time because the shared 2-core machine runs many jobs at once: CPU time
// per operation is what one dedicated core would take (up to cache effects).
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
