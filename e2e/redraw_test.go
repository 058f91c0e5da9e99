//go:build e2e && !js

package e2e

import (
	"os"
	"testing"
	"time"
)

// TestRedrawWhileComputing measures the page thread while results are redrawn
// during a computation: after single lens, a small grid and refine, a
// posterior runs in the workers while the user clicks through the refined
// solutions (each click redraws the light curve, residuals and the refine
// step's figures). Every long task of the page's own code in that window
// counts against the 50 ms budget (enforced with LENSBOOK_E2E_TIMING=1,
// logged otherwise).
func TestRedrawWhileComputing(t *testing.T) {
	if testing.Short() {
		t.Skip("several minutes of fitting")
	}
	p := newPage(t)
	p.open("")
	refineDemo(t, p)
	n := int(p.eval(`document.querySelectorAll("#refine-table tr[data-solution]").length`).(float64))
	if n < 2 {
		t.Fatalf("need two refined solutions to switch between, have %d", n)
	}
	// the refined solutions' curves reach the plot after the step is done:
	// wait for them (that one rebuild of the plot adds series; it is not what
	// this test measures)
	p.waitJS(`document.querySelectorAll("#lc .u-legend .u-series").length >= lensbook.current().datasets.length + 2`, time.Minute)
	time.Sleep(500 * time.Millisecond)
	p.setInput("#step-posterior input[name=steps]", 4000)
	longTasks(p)
	// long animation frames name the scripts behind a slow frame (for the log)
	{
		p.eval(`(() => { window.__loaf = []; new PerformanceObserver((l) => { for (const e of l.getEntries()) window.__loaf.push({t: Math.round(e.startTime), d: Math.round(e.duration), block: Math.round(e.blockingDuration), scripts: e.scripts.map(s => [s.invoker, s.sourceFunctionName, Math.round(s.duration), Math.round(s.forcedStyleAndLayoutDuration), Math.round(s.startTime)])}); }).observe({type: "long-animation-frame"}); return true; })()`)
	}
	p.click("#run-posterior")
	p.waitJS(`lensbook.steps().posterior.status === "running"`, 10*time.Second)
	start := p.eval(`performance.now()`).(float64)
	clicks := 0
	for i := 0; i < 16; i++ {
		sel := `#refine-table tr[data-solution="` + itoa((i+1)%n) + `"]`
		p.click(sel)
		p.waitJS(`document.querySelector(`+jsString(sel)+`).classList.contains("selected")`, 10*time.Second)
		time.Sleep(700 * time.Millisecond) // curves come back from the light worker, then the plots redraw
		clicks++
		if p.eval(`lensbook.steps().posterior.status`) != "running" {
			break
		}
	}
	end := p.eval(`performance.now()`).(float64)
	var d []longTask
	p.evalInto(`window.__long`, &d)
	worst, sum, cnt := 0.0, 0.0, 0
	for _, x := range d {
		if x.Name == "self" && x.T >= start && x.T < end {
			cnt++
			sum += x.D
			worst = max(worst, x.D)
		}
	}
	t.Logf("long animation frames (start, duration, blocking ms; scripts [invoker, function, ms, forced layout ms, start]): %v", p.eval(`JSON.stringify(window.__loaf.filter(f => f.d > 50).map(f => [f.t, f.d, f.block, f.scripts.filter(s => s[2] > 5)]))`))
	t.Logf("%d solution switches in %.1f s while the posterior computed: %d long tasks of the page's own code, longest %.0f ms, %.0f ms in all; all: %v",
		clicks, (end-start)/1000, cnt, worst, sum, p.eval(`JSON.stringify(window.__long.map(x => [Math.round(x.t), Math.round(x.d), x.name]))`))
	if os.Getenv("LENSBOOK_E2E_SHOT") != "" {
		p.screenshot(os.Getenv("LENSBOOK_E2E_SHOT"))
	}
	if p.eval(`lensbook.steps().posterior.status`) == "running" {
		p.click("#cancel-posterior")
	}
	// On a loaded shared machine a redraw can cross the budget now and then,
	// so the budget is enforced in measurement runs (as for TestDemoTiming):
	//
	//	LENSBOOK_E2E_TIMING=1 go test -tags e2e -run TestRedrawWhileComputing -v ./e2e/
	if os.Getenv("LENSBOOK_E2E_TIMING") == "1" && worst > maxLongTaskMS {
		t.Errorf("page thread blocked %.0f ms while redrawing during a computation (budget %.0f ms)", worst, maxLongTaskMS)
	}
}
