//go:build !linux

package fit

import (
	"testing"
	"time"
)

// processCPU needs getrusage; elsewhere (js/wasm included) no CPU metric is
// reported.
func processCPU() time.Duration { return 0 }

func reportCPU(b *testing.B, start time.Duration) {}
