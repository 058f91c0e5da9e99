//go:build e2e && !js

package e2e

import (
	"bytes"
	"context"
	"fmt"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/chromedp/cdproto/input"
	"github.com/chromedp/chromedp"
)

// TestMapViewOnNotebook opens the magnification map on the notebook page with
// the demo event, in both drawing modes (?map=canvas forces the 2-D canvas
// fallback even where WebGL2 works; the separate e2e/mapview package also runs
// it with 3-D APIs disabled), drags the trajectory, checks that the dragged
// model is drawn over the light curve and that "Use as starting point" starts
// the Refine step.
func TestMapViewOnNotebook(t *testing.T) {
	for _, mode := range []string{"webgl", "canvas"} {
		t.Run(mode, func(t *testing.T) {
			p := newPage(t)
			p.open("?map=" + mode)
			p.click("#demo")
			p.waitJS(`window.lensbook.current().datasets.length > 0`, 60*time.Second)
			p.click("#open-map")
			p.waitJS(`!!window.lensMapPanel && document.querySelector("#map-panel").dataset.ready === "1" && window.lensMapPanel.latest?.chi2 > 0`, 60*time.Second)
			if got := p.eval(`window.lensMapPanel.mode`); got != mode {
				t.Fatalf("map mode %v, want %v", got, mode)
			}
			p.waitJS(`window.lensMapPanel.frame.contentWindow.lensMapView.stats().mapDone`, 60*time.Second)
			// the open map fits beside the light curve in a 1280 px window
			// (in a 2/5 column it overflowed the page by ~110 px)
			var fit struct{ Page, View, PanelRight, MainRight float64 }
			p.evalInto(`({Page: document.documentElement.scrollWidth, View: document.documentElement.clientWidth, PanelRight: Math.max(...Array.from(document.querySelectorAll("#map-panel > *, #map-panel .mv-legend, #map-panel .mv-frame")).map(e => e.getBoundingClientRect().right)), MainRight: document.querySelector("main").getBoundingClientRect().right})`, &fit)
			if fit.Page > fit.View || fit.PanelRight > fit.MainRight {
				t.Errorf("the open map overflows: page %.0f px wide in a %.0f px view, the map's content ends at %.0f px, the notebook at %.0f px", fit.Page, fit.View, fit.PanelRight, fit.MainRight)
			}
			chi0 := p.eval(`window.lensMapPanel.latest.chi2`).(float64)
			u00 := p.eval(`window.lensMapPanel.latest.model.u0`).(float64)

			// Drag the trajectory across itself.
			var g struct {
				Line    [2]float64
				Visible bool
				DPR     float64
				Alpha   float64
			}
			p.evalInto(`window.lensMapPanel.frame.contentWindow.lensMapView.stats().grips`, &g)
			if !g.Visible {
				t.Fatalf("trajectory not on the map: %+v", g)
			}
			var off [2]float64
			p.evalInto(`(() => { const f = window.lensMapPanel.frame; f.scrollIntoView({block: "center"}); const r = f.getBoundingClientRect(); const s = getComputedStyle(f);
				return [r.left + parseFloat(s.borderLeftWidth), r.top + parseFloat(s.borderTopWidth)] })()`, &off)
			x, y := off[0]+g.Line[0]/g.DPR, off[1]+g.Line[1]/g.DPR
			nx, ny := -math.Sin(g.Alpha), -math.Cos(g.Alpha)
			mouse := func(typ input.DispatchMouseEventType, x, y float64, opts ...chromedp.MouseOption) {
				if err := chromedp.Do(p.ctx, chromedp.MouseEvent(typ, x, y, opts...)); err != nil {
					t.Fatal(err)
				}
			}
			mouse(input.DispatchMouseEventTypeMouseMoved, x, y)
			mouse(input.DispatchMouseEventTypeMousePressed, x, y, chromedp.ButtonLeft, chromedp.ClickCount(1))
			time.Sleep(150 * time.Millisecond)
			for i := 1; i <= 8; i++ {
				mouse(input.DispatchMouseEventTypeMouseMoved, x+float64(i)*5*nx, y+float64(i)*5*ny, chromedp.ButtonLeft)
			}
			time.Sleep(150 * time.Millisecond)
			mouse(input.DispatchMouseEventTypeMouseReleased, x+40*nx, y+40*ny, chromedp.ButtonLeft, chromedp.ClickCount(1))
			if p.eval(fmt.Sprintf(`Math.abs(window.lensMapPanel.latest.model.u0 - %v) > 1e-6`, u00)) != true {
				time.Sleep(2 * time.Second)
			}
			if p.eval(fmt.Sprintf(`Math.abs(window.lensMapPanel.latest.model.u0 - %v) > 1e-6`, u00)) != true {
				t.Fatalf("u0 unchanged after dragging from (%.0f, %.0f): grips %+v, frame at %v, stats %v", x, y, g, off,
					p.eval(`JSON.stringify(window.lensMapPanel.frame.contentWindow.lensMapView.stats().grips)`))
			}
			chi1 := p.eval(`window.lensMapPanel.latest.chi2`).(float64)
			if chi1 == chi0 {
				t.Errorf("χ² unchanged by the drag: %v", chi1)
			}

			// The dragged model is drawn over the light curve (colour #c2185b).
			ctx, cancel := context.WithTimeout(p.ctx, 30*time.Second)
			defer cancel()
			shot, err := chromedp.Run(ctx, chromedp.Screenshot(chromedp.CSS("#lc")))
			if err != nil {
				t.Fatal(err)
			}
			img, err := png.Decode(bytes.NewReader(shot))
			if err != nil {
				t.Fatal(err)
			}
			n := 0
			b := img.Bounds()
			for yy := b.Min.Y; yy < b.Max.Y; yy++ {
				for xx := b.Min.X; xx < b.Max.X; xx++ {
					r, g, bl, _ := img.At(xx, yy).RGBA()
					if math.Abs(float64(r>>8)-0xc2) < 30 && math.Abs(float64(g>>8)-0x18) < 30 && math.Abs(float64(bl>>8)-0x5b) < 30 {
						n++
					}
				}
			}
			t.Logf("%s: χ² %.1f → %.1f after the drag; %d pixels of the map model in the light-curve plot", mode, chi0, chi1, n)
			if n < 100 {
				t.Errorf("map model not drawn over the light curve (%d pixels)", n)
			}

			if dir := os.Getenv("MAPVIEW_SHOTS"); dir != "" {
				p.screenshot(filepath.Join(dir, "notebook-"+mode+".png"))
			}
			// "Use as starting point" starts Refine from the dragged model.
			p.click("button.mv-use")
			p.waitJS(`["running", "done"].includes(window.lensbook.steps().refine.status)`, 30*time.Second)
			if errs := p.consoleErrors(); len(errs) > 0 {
				t.Errorf("console errors: %v", errs)
			}
		})
	}
}
