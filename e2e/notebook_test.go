//go:build e2e && !js

package e2e

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"time"
)

// Page budgets of the notebook issue (measured here, reported in the README).
const (
	maxReadyMS     = 3000            // first load to interactive
	maxTransfer    = 6 << 20         // compressed bytes of the first load
	maxLongTaskMS  = 50.0            // page-thread task while workers compute
	maxDemoRunTime = 3 * time.Minute // single lens → default grid → refine
)

func TestPageLoads(t *testing.T) {
	p := newPage(t)
	ready := p.open("")
	total, n := p.transferred()
	t.Logf("first load: ready after %.0f ms; %d responses, %.2f MB compressed", ready, n, total/1e6)
	if ready > maxReadyMS {
		t.Errorf("ready after %.0f ms, budget %d ms", ready, maxReadyMS)
	}
	if total > maxTransfer {
		t.Errorf("first load transferred %.2f MB, budget %.2f MB", total/1e6, float64(maxTransfer)/1e6)
	}
	// the shell: six steps, the map panel mount point, the caution
	var ids []string
	p.evalInto(`Array.from(document.querySelectorAll("#steps > li")).map(e => e.id)`, &ids)
	want := []string{"step-data", "step-single", "step-grid", "step-refine", "step-posterior", "step-report"}
	if strings.Join(ids, ",") != strings.Join(want, ",") {
		t.Errorf("steps %v, want %v", ids, want)
	}
	if p.eval(`!!document.querySelector("section#map-panel")`) != true {
		t.Error("no <section id=map-panel> mount point")
	}
	if s, _ := p.eval(`document.body.innerText`).(string); !strings.Contains(s, "research estimates") {
		t.Error("page does not say results are research estimates")
	}
	if errs := p.consoleErrors(); len(errs) > 0 {
		t.Errorf("console errors: %v", errs)
	}
	if bad := p.offOrigin(); len(bad) > 0 {
		t.Errorf("requests outside the origin: %v", bad)
	}
}

// demoTruth is the part of testdata/demo/truth.json the tests use.
type demoTruth struct {
	Params map[string]float64 `json:"params"`
	Sites  []struct {
		File string `json:"file"`
	} `json:"sites"`
}

func readTruth(t *testing.T) demoTruth {
	b, err := os.ReadFile(filepath.Join(demoDir, "truth.json"))
	if err != nil {
		t.Fatalf("demo event missing: %v", err)
	}
	var tr demoTruth
	if err := json.Unmarshal(b, &tr); err != nil {
		t.Fatal(err)
	}
	return tr
}

// uploadDemo puts the demo files into the Data step through its file input.
func uploadDemo(t *testing.T, p *page) {
	tr := readTruth(t)
	var files []string
	for _, s := range tr.Sites {
		files = append(files, filepath.Join(demoDir, s.File))
	}
	if err := chromedpUpload(p, "#file-input", files); err != nil {
		t.Fatal(err)
	}
	p.waitJS(`!!document.querySelector("#accept-files")`, 30*time.Second)
	p.click("#accept-files")
	p.waitJS(`lensbook.current().notebook && lensbook.current().notebook.datasets.length === `+itoa(len(files)), 30*time.Second)
	p.waitJS(`lensbook.steps().data.status === "done"`, 10*time.Second)
}

func itoa(n int) string {
	b, _ := json.Marshal(n)
	return string(b)
}

// longTasks installs a PerformanceObserver for long tasks on the page thread.
func longTasks(p *page) {
	p.eval(`(() => { window.__long = []; new PerformanceObserver((l) => { for (const e of l.getEntries()) window.__long.push(e.duration); }).observe({ type: "longtask", buffered: false }); return true; })()`)
}

func maxLongTask(p *page) (float64, int) {
	var d []float64
	p.evalInto(`window.__long`, &d)
	sort.Float64s(d)
	if len(d) == 0 {
		return 0, 0
	}
	return d[len(d)-1], len(d)
}

func relClose(a, b, tol float64) bool {
	return math.Abs(a-b) <= tol*math.Max(math.Abs(a), math.Abs(b))
}
