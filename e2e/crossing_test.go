//go:build e2e && !js

package e2e

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"
	"time"
)

// TestGridCrossing runs the binary search on the simulated planetary-caustic
// crossing of testdata/events, whose data cover the caustic entry and exit:
// the grid must report the crossing it read from the residuals (entry and
// exit within 0.3 d of where the truth's trajectory crosses the caustic,
// +15.78 and +17.31 d after t0, as in fit's TestGridChunksMergeWithCrossing)
// and say so on the page; with the switch off the grid runs without it and
// says that instead, and the notebook keeps the setting.
func TestGridCrossing(t *testing.T) {
	dir := filepath.Join(root, "testdata", "events", "planetary-caustic-crossing")
	tr := readTruthIn(t, dir)
	p := newPage(t)
	p.open("")
	uploadFiles(t, p, eventFiles(tr, dir))
	p.runStep("single", 2*time.Minute)
	for sel, v := range map[string]any{
		"#step-grid input[name=logSMin]": 0.1, "#step-grid input[name=logSMax]": 0.16, "#step-grid input[name=ns]": 2,
		"#step-grid input[name=logQMin]": -3.2, "#step-grid input[name=logQMax]": -3, "#step-grid input[name=nq]": 2,
		"#step-grid input[name=alphas]": 2,
	} {
		p.setInput(sel, v)
	}
	if on := p.eval(`document.querySelector("#step-grid input[name=useCrossing]").checked`); on != true {
		t.Fatalf("the crossing switch should start on, is %v", on)
	}
	p.runStep("grid", 5*time.Minute)
	var cr struct {
		TIn, TOut float64
		Masked    [][2]float64
	}
	p.evalInto(`lensbook.steps().grid.result.grid.crossing || {}`, &cr)
	t0 := tr.Params["t0"]
	t.Logf("crossing read at t0 %+.3f and %+.3f d, %d windows left out of the grid", cr.TIn-t0, cr.TOut-t0, len(cr.Masked))
	if math.Abs(cr.TIn-t0-15.78) > 0.3 || math.Abs(cr.TOut-t0-17.31) > 0.3 {
		t.Errorf("crossing at t0 %+.3f, %+.3f d; the truth's trajectory crosses at +15.78, +17.31 d", cr.TIn-t0, cr.TOut-t0)
	}
	text, _ := p.eval(`(document.querySelector("#grid-crossing") || {}).textContent || ""`).(string)
	t.Logf("page: %q", text)
	if text == "" {
		t.Error("the grid's results do not mention the crossing it used")
	}
	p.screenshot(filepath.Join(t.TempDir(), "crossing.png"))
	if path := os.Getenv("LENSBOOK_CROSSING_SCREENSHOT"); path != "" {
		p.eval(`document.querySelector("#step-grid").scrollIntoView(), true`)
		time.Sleep(300 * time.Millisecond)
		p.screenshot(path)
	}

	// switched off: no crossing, and the page says the seeds were off
	p.click("#step-grid input[name=useCrossing]")
	p.waitJS(`lensbook.steps().grid.settings.noCrossing === true`, 10*time.Second)
	p.runStep("grid", 5*time.Minute)
	if has := p.eval(`!!lensbook.steps().grid.result.grid.crossing`); has != false {
		t.Error("the grid used a crossing with the switch off")
	}
	if has := p.eval(`!!document.querySelector("#grid-crossing-off") && !document.querySelector("#grid-crossing")`); has != true {
		t.Error("the page does not say that the crossing seeds were off")
	}
	// the notebook file keeps the switch with the step
	p.click(`[data-export="notebook"]`)
	var nb struct {
		Steps []struct {
			Kind     string         `json:"kind"`
			Settings map[string]any `json:"settings"`
		} `json:"steps"`
	}
	if err := json.Unmarshal(p.download(".lensbook.json", 20*time.Second), &nb); err != nil {
		t.Fatal(err)
	}
	kept := false
	for _, st := range nb.Steps {
		if st.Kind == "binary-search" {
			kept = st.Settings["noCrossing"] == true
		}
	}
	if !kept {
		t.Error("the saved notebook does not keep noCrossing with the binary-search step")
	}
	if errs := p.consoleErrors(); len(errs) > 0 {
		t.Errorf("console errors: %v", errs)
	}
}
