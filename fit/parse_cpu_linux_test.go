//go:build linux

package fit

import (
	"syscall"
	"testing"
	"time"
)

// processCPU is the CPU time (user + system) used by this process so far.
// Benchmarks report it per operation beside wall time: on a machine shared
// with other jobs, CPU time does not count the waits for a core.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// reportCPU adds the metric cpu-ns/op, the process CPU time since start
// divided by b.N.
func reportCPU(b *testing.B, start time.Duration) {
	b.ReportMetric(float64(processCPU()-start)/float64(b.N), "cpu-ns/op")
}
