//go:build e2e && !js

package e2e

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"lensbook/fit"
)

// TestEventCoords: the Data step's position field sends the coords step; a
// bad position comes back with fit.ParsePosition's own message, shown as
// plain text beside the field; a good one reaches the notebook (RA, Dec and
// t0,par), is shown normalised, survives a second Apply of the prefilled
// text, and makes the finished single-lens step stale.
func TestEventCoords(t *testing.T) {
	p := newPage(t)
	p.open("")
	uploadDemo(t, p)
	p.runStep("single", 2*time.Minute)

	// bad: an hour angle out of range; markup, which must stay text
	for _, bad := range []string{"25:00:00 -30:00:00", "<b>17:59:02</b> -29:03:11"} {
		_, perr := fit.ParsePosition(bad)
		if perr == nil {
			t.Fatalf("fit.ParsePosition(%q) accepted it", bad)
		}
		p.setInput("#event-position", bad)
		p.click("#apply-coords")
		want := jsString(perr.Error())
		p.waitJS(`document.querySelector("#coords-note").classList.contains("error") && document.querySelector("#coords-note").textContent === `+want, 10*time.Second)
		if p.eval(`document.querySelector("#coords-note").children.length`) != 0.0 {
			t.Error("the error text was parsed as markup")
		}
	}
	p.eval(`document.querySelector("#coords").scrollIntoView({block: "center"}), true`)
	p.screenshotSmall(filepath.Join(os.TempDir(), "lensbook-coords-error.png"), 4<<20)
	if p.eval(`!!lensbook.current().notebook.event.coords`) != false {
		t.Error("a rejected position reached the notebook")
	}
	if p.eval(`lensbook.steps().single.stale`) != false {
		t.Error("a rejected position made the single-lens step stale")
	}

	// good: 18h = 270°, −30°30′ = −30.5° (sexagesimal arithmetic); t0,par as HJD′
	p.setInput("#event-position", "18:00:00 −30:30:00")
	p.setInput("#event-tref", "10800.5")
	p.click("#apply-coords")
	p.waitJS(`!!lensbook.current().notebook.event.coords`, 10*time.Second)
	var ev struct {
		Coords struct {
			RA  float64 `json:"ra_deg"`
			Dec float64 `json:"dec_deg"`
		} `json:"coords"`
		TRef float64 `json:"tref"`
	}
	p.evalInto(`lensbook.current().notebook.event`, &ev)
	if !relClose(ev.Coords.RA, 270, 1e-12) || !relClose(ev.Coords.Dec, -30.5, 1e-12) || ev.TRef != 2460800.5 {
		t.Errorf("notebook event %+v, want RA 270°, Dec −30.5°, t0,par 2460800.5", ev)
	}
	note, _ := p.eval(`document.querySelector("#coords-note").textContent`).(string)
	if p.eval(`document.querySelector("#coords-note").classList.contains("error")`) != false || !strings.Contains(note, "18:00:00.000 −30:30:00.00") {
		t.Errorf("after a good position the note says %q", note)
	}
	if p.eval(`lensbook.steps().single.stale`) != true {
		t.Error("a new position did not make the single-lens step stale")
	}
	if v := p.eval(`document.querySelector("#event-position").value`); v != "18:00:00.000 −30:30:00.00" {
		t.Errorf("field holds %q after Apply, want the normalised position", v)
	}
	// the prefilled (normalised) text is accepted as it stands
	p.click("#apply-coords")
	p.waitJS(`document.querySelector("#coords-note").textContent.startsWith("Event position: 18:00:00.000")`, 10*time.Second)
	p.evalInto(`lensbook.current().notebook.event`, &ev)
	if !relClose(ev.Coords.RA, 270, 1e-12) || !relClose(ev.Coords.Dec, -30.5, 1e-12) || ev.TRef != 2460800.5 {
		t.Errorf("after re-applying the prefilled fields: %+v", ev)
	}
	// the map frame gets the position and t0,par with the model (bridge fields
	// "coords" and model "tref"); its state echoes the model it took
	p.click("#open-map")
	p.waitJS(`!!window.lensMapPanel && window.lensMapPanel.latest?.chi2 > 0`, 60*time.Second)
	if e := p.eval(`window.lensMapPanel.latest.error || ""`); e != "" {
		t.Errorf("map frame error with coordinates set: %v", e)
	}
	if tr := p.eval(`window.lensMapPanel.latest.model.tref`); tr != 2460800.5 {
		t.Errorf("map frame model t0,par %v, want 2460800.5", tr)
	}
	if errs := p.consoleErrors(); len(errs) > 0 {
		t.Errorf("console errors: %v", errs)
	}
	shot := filepath.Join(os.TempDir(), "lensbook-coords.png")
	p.eval(`document.querySelector("#coords").scrollIntoView({block: "center"}), true`)
	p.screenshotSmall(shot, 4<<20)
	t.Logf("screenshot %s", shot)
}
