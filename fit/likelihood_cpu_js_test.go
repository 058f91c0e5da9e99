//go:build js

package fit_test

import "time"

// cpuTime is not available under js/wasm; benchmarks then report 0.
func cpuTime() time.Duration { return 0 }
