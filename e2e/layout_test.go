//go:build e2e && !js

package e2e

import (
	"testing"
	"time"

	"github.com/chromedp/chromedp"
)

// TestFiguresKeepTheirSpace: the figure area above the steps keeps its
// height from the first load through data, a single-lens fit, a grid and a
// refinement, so that a Run button does not move under the pointer when a
// plot appears, a fit adds the residual panel (drawn a frame after the main
// plot) or the legend gains a line. Before the space was reserved the
// buttons jumped by 343 px when the light curve first drew (~160 ms after
// the data step said done), by 130 px when the residuals came, and by 22 px
// when the refined solutions wrapped the legend. The page is sampled every
// 20 ms in the browser.
func TestFiguresKeepTheirSpace(t *testing.T) {
	p := newPage(t)
	p.open("")
	p.eval(`(window.lbFig = [], window.lbFigTimer = setInterval(() => window.lbFig.push(Math.round(document.querySelector(".figures").getBoundingClientRect().height)), 20), true)`)
	refineDemo(t, p)
	time.Sleep(300 * time.Millisecond) // a residual panel drawn in the next frame
	var hs []float64
	p.evalInto(`(clearInterval(window.lbFigTimer), window.lbFig)`, &hs)
	lo, hi := hs[0], hs[0]
	for _, h := range hs {
		lo, hi = min(lo, h), max(hi, h)
	}
	t.Logf("figure area: %d samples, height %.0f–%.0f px", len(hs), lo, hi)
	if hi != lo {
		t.Errorf("the figure area changed height from %.0f to %.0f px during the flow: buttons below it moved", lo, hi)
	}
}

// TestNarrowWindowFits: in a 1024 px window, with the refined solutions'
// table and the magnification map open, the page does not scroll sideways:
// wide tables scroll inside their step and the map stacks under the light
// curve. Before, the data table's fields and the refine table widened the
// page to 1,085 px.
func TestNarrowWindowFits(t *testing.T) {
	p := newPage(t)
	if _, err := chromedp.Run(p.ctx, chromedp.EmulateViewport(1024, 900)); err != nil {
		t.Fatal(err)
	}
	p.open("?map=canvas")
	refineDemo(t, p)
	p.click("#open-map")
	p.waitJS(`!!window.lensMapPanel && document.querySelector("#map-panel").dataset.ready === "1"`, time.Minute)
	var w struct{ Page, View float64 }
	p.evalInto(`({Page: document.documentElement.scrollWidth, View: document.documentElement.clientWidth})`, &w)
	t.Logf("page %.0f px wide in a %.0f px view", w.Page, w.View)
	if w.Page > w.View {
		t.Errorf("the page scrolls sideways: %.0f px wide in a %.0f px view", w.Page, w.View)
	}
}
