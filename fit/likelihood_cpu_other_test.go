//go:build !linux

package fit_test

import "time"

// gridCPUTime and threadCPUTime need Linux's getrusage; elsewhere (js/wasm
// included) benchmarks report 0.
func gridCPUTime() time.Duration       { return 0 }
func gridThreadCPUTime() time.Duration { return 0 }
