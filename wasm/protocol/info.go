package protocol

import (
	"context"
	"encoding/json"
	"runtime"
)

// Info describes the engine build: the page shows it and the tests compare it.
type Info struct {
	Version   int      `json:"version"`
	GoVersion string   `json:"go_version"`
	GOOS      string   `json:"goos"`
	Steps     []string `json:"steps"`
}

func init() {
	register("info", func(ctx context.Context, _ json.RawMessage, _ func(Progress)) (any, error) {
		return Info{Version: Version, GoVersion: runtime.Version(), GOOS: runtime.GOOS, Steps: Steps()}, nil
	})
}
