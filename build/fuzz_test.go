package main

import "testing"

// The count budget for a retried fuzz run comes from the last progress line
// of go test -fuzz (format of Go 1.26's internal/fuzz coordinator).
func TestLastExecs(t *testing.T) {
	out := `fuzz: elapsed: 0s, gathering baseline coverage: 0/215 completed
fuzz: elapsed: 3s, execs: 18157 (6052/sec), new interesting: 7 (total: 222)
fuzz: elapsed: 6s, execs: 44421 (8752/sec), new interesting: 15 (total: 230)
--- FAIL: FuzzReadECSV (6.11s)
    context deadline exceeded
`
	if got := lastExecs(out); got != 44421 {
		t.Errorf("lastExecs = %d, want 44421", got)
	}
	if got := lastExecs("no progress lines"); got != 0 {
		t.Errorf("lastExecs without progress = %d, want 0", got)
	}
}
