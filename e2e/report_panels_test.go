//go:build e2e && !js

package e2e

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"lensbook/fit"
	"lensbook/lens"
)

// panelDoc is the part of the notebook document (lensbook.document()) the
// panel checks read: the posterior's kept draws and the two panels' steps.
type panelDoc struct {
	Steps []struct {
		ID       string          `json:"id"`
		Kind     string          `json:"kind"`
		Seed     string          `json:"seed"`
		Settings json.RawMessage `json:"settings"`
		Result   json.RawMessage `json:"result"`
	} `json:"steps"`
}

type docMode struct {
	Label  string `json:"label"`
	Corner struct {
		Names   []string    `json:"names"`
		Samples [][]float64 `json:"samples"`
	} `json:"corner"`
	Base *lens.Params `json:"base"`
	TRef float64      `json:"tref"`
}

// TestReportPanels runs the demo to a short posterior with a finite source
// and a parallax (the map view's "use as starting point" with ρ and πE), then
// uses the Report step's two panels as an astronomer would: θ* and the source
// distance typed in give θE, μrel, the lens mass and distance, the planet
// mass and the projected separation with the assumptions beside them; the
// forecast over a window around the peak draws its band in the light curve
// and gives the next peak (and caustic crossing) statistics. Every number on
// the page must equal the Go API's (fit.NewDrawsMode, fit.DeriveQuantities,
// ModeResult.Forecast) on the same draws; the panels' results and exports
// are saved with the notebook and reopen unchanged.
func TestReportPanels(t *testing.T) {
	p := newPage(t)
	p.open("")
	uploadDemo(t, p)
	const hostile = `<img src=x onerror=alert(1)>`
	p.setInput(`#datasets input[aria-label="name of dataset 2"]`, hostile)
	p.waitJS(`lensbook.current().datasets[1].name === `+jsString(hostile), 10*time.Second)
	// an invented bulge position, needed for the parallax
	p.setInput("#event-position", "17:59:02.3 -29:03:11")
	p.click("#apply-coords")
	p.waitJS(`!!lensbook.current().notebook.event.coords`, 10*time.Second)
	p.runStep("single", 2*time.Minute)
	smallGrid(p)
	p.runStep("grid", 5*time.Minute)
	p.setInput("#step-refine input[name=keep]", 1)
	p.eval(`(() => { const c = document.querySelector("#step-refine input[type=checkbox]"); if (c.checked) c.click(); return true; })()`)
	p.runStep("refine", 5*time.Minute)
	// the best solution with a finite source and a parallax, refined with both free
	p.eval(`void lensbook.useAsStart({rho: 0.001, piEN: 0.1, piEE: 0.05}), true`)
	p.waitJS(`lensbook.steps().refine.status !== "running"`, 10*time.Minute)
	if st := p.eval(`lensbook.steps().refine.status`); st != "done" {
		t.Fatalf("refine from the map model: %v %v", st, p.eval(`lensbook.steps().refine.message`))
	}
	p.setInput("#step-posterior input[name=walkers]", 20)
	p.setInput("#step-posterior input[name=steps]", 60)
	p.runStep("posterior", 10*time.Minute)
	var free []string
	p.evalInto(`lensbook.steps().posterior.result.modes[0].corner.names`, &free)
	t.Logf("posterior parameters: %v", free)
	for _, want := range []string{"rho", "piEN", "piEE"} {
		if !strings.Contains(strings.Join(free, " "), want) {
			t.Fatalf("posterior has no %s: %v", want, free)
		}
	}

	// ---- physical quantities ----
	p.eval(`document.querySelector("#physical-panel").scrollIntoView(), true`)
	p.setInput(`#physical-panel input[name=theta_star]`, 0.6)
	p.setInput(`#physical-panel input[name=theta_star_err]`, 0.05)
	p.setInput(`#physical-panel input[name=ds]`, 8)
	p.setInput(`#physical-panel input[name=ds_err]`, 1)
	p.press("#run-physical", `!!document.querySelector("#physical-panel .progress, #physical-panel p[role=status]")`)
	p.waitJS(`!!document.querySelector("#physical-panel .physical-table")`, 30*time.Second)
	type cell struct {
		Name, Median, Lower, Upper string
		Text                       []string
	}
	var cells []cell
	p.evalInto(`Array.from(document.querySelectorAll("#physical-panel .physical-table tr[data-quantity]")).map(r => ({Name: r.dataset.quantity, Median: r.querySelector("[data-key=median]").dataset.value, Lower: r.querySelector("[data-key=lower]").dataset.value, Upper: r.querySelector("[data-key=upper]").dataset.value, Text: Array.from(r.querySelectorAll("td")).map(td => td.textContent)}))`, &cells)
	var assumptions []string
	p.evalInto(`Array.from(document.querySelectorAll("#physical-panel .assumption-list li")).map(e => e.textContent)`, &assumptions)
	panel := p.eval(`document.querySelector("#physical-panel").innerText`).(string)
	if !strings.Contains(panel, "Research estimates") || !strings.Contains(panel, "Assumptions") {
		t.Errorf("physical panel lacks the research-estimate wording or the assumptions:\n%s", panel)
	}

	var d panelDoc
	p.evalInto(`lensbook.document()`, &d)
	docJSON, err := json.Marshal(p.eval(`lensbook.document()`))
	if err != nil {
		t.Fatal(err)
	}
	nb, err := fit.DecodeNotebook(docJSON)
	if err != nil {
		t.Fatalf("the page's notebook does not decode natively: %v", err)
	}
	step := func(id string) (json.RawMessage, json.RawMessage, uint64) {
		for _, s := range d.Steps {
			if s.ID == id {
				seed, _ := strconv.ParseUint(s.Seed, 10, 64)
				return s.Settings, s.Result, seed
			}
		}
		t.Fatalf("no step %q in the saved notebook", id)
		return nil, nil, 0
	}
	_, postRaw, _ := step("posterior")
	var post struct {
		Modes []docMode `json:"modes"`
	}
	if err := json.Unmarshal(postRaw, &post); err != nil {
		t.Fatal(err)
	}
	dm := post.Modes[0]
	mode, err := fit.NewDrawsMode(dm.Label, *dm.Base, dm.TRef, dm.Corner.Names, dm.Corner.Samples)
	if err != nil {
		t.Fatal(err)
	}
	physSet, physRes, seed := step("physical")
	if physRes == nil {
		t.Fatal("the physical quantities are not saved in the notebook")
	}
	var ps struct {
		ThetaStar    float64 `json:"theta_star"`
		ThetaStarErr float64 `json:"theta_star_err"`
		DS           float64 `json:"ds"`
		DSErr        float64 `json:"ds_err"`
	}
	json.Unmarshal(physSet, &ps)
	in, err := mode.PhysicalInput()
	if err != nil {
		t.Fatal(err)
	}
	want, err := fit.DeriveQuantities(in, fit.PhysicalSettings{ThetaStar: ps.ThetaStar, ThetaStarErr: ps.ThetaStarErr, DS: ps.DS, DSErr: ps.DSErr, Seed: seed})
	if err != nil {
		t.Fatal(err)
	}
	if len(cells) != len(want.Quantities) {
		t.Fatalf("page shows %d quantities, the Go API gives %d", len(cells), len(want.Quantities))
	}
	for _, name := range []string{"thetaE", "muRel", "M", "DL", "M2_jup", "aPerp"} {
		if want.Get(name) == nil {
			t.Errorf("Go API gives no %s", name)
		}
	}
	worst := 0.0
	for i, c := range cells {
		q := want.Quantities[i]
		if c.Name != q.Name {
			t.Fatalf("row %d is %s, Go API %s", i, c.Name, q.Name)
		}
		for k, v := range map[string][2]string{"median": {c.Median, c.Text[1]}, "16 %": {c.Lower, c.Text[2]}, "84 %": {c.Upper, c.Text[3]}} {
			goV := map[string]float64{"median": q.Median, "16 %": q.Lower, "84 %": q.Upper}[k]
			got, err := strconv.ParseFloat(v[0], 64)
			if err != nil {
				t.Errorf("%s %s: value %q", q.Name, k, v[0])
				continue
			}
			rel := math.Abs(got-goV) / math.Max(math.Abs(goV), 1e-300)
			worst = math.Max(worst, rel)
			if rel > 1e-9 {
				t.Errorf("%s %s: page %v, Go API %v", q.Name, k, got, goV)
			}
			// the text is the value to the 4 significant digits shown
			shown, err := strconv.ParseFloat(strings.ReplaceAll(v[1], "−", "-"), 64)
			if err != nil || math.Abs(shown-goV) > 5e-4*math.Abs(goV) {
				t.Errorf("%s %s: shown %q, Go API %.6g", q.Name, k, v[1], goV)
			}
		}
	}
	t.Logf("physical quantities: %d rows, page vs Go API largest relative difference %.2g; θE %.4g mas, M %.4g M☉, D_L %.4g kpc", len(cells), worst, want.Get("thetaE").Median, want.Get("M").Median, want.Get("DL").Median)
	if strings.Join(assumptions, "|") != strings.Join(want.Assumptions, "|") {
		t.Errorf("assumptions on the page:\n%q\nGo API:\n%q", assumptions, want.Assumptions)
	}

	// ---- forecast over a window around the peak ----
	const from, days, draws, points = 10472.0, 16.0, 60, 800
	p.setInput(`#forecast-panel input[name=from]`, from)
	p.setInput(`#forecast-panel input[name=days]`, days)
	p.setInput(`#forecast-panel input[name=draws]`, draws)
	p.setInput(`#forecast-panel input[name=points]`, points)
	p.press("#run-forecast", `!!document.querySelector("#forecast-panel .progress, #forecast-panel p[role=status]")`)
	p.waitJS(`!!document.querySelector("#forecast-panel .forecast-table")`, 5*time.Minute)
	if msg := p.eval(`document.querySelector("#forecast-panel p[role=status]").textContent`); !strings.HasPrefix(msg.(string), "Finished") {
		t.Errorf("forecast: %v", msg)
	}
	type stat struct{ Median, Lower, Upper, Fraction string }
	var stats map[string]stat
	p.evalInto(`Object.fromEntries(Array.from(document.querySelectorAll("#forecast-panel .forecast-table tr[data-event]")).map(r => { const v = k => (r.querySelector("[data-key=" + k + "]") || {dataset: {}}).dataset.value || ""; return [r.dataset.event, {Median: v("median"), Lower: v("lower"), Upper: v("upper"), Fraction: v("fraction")}]; }))`, &stats)
	d = panelDoc{}
	p.evalInto(`lensbook.document()`, &d)
	_, _, fseed := step("forecast")
	ev := nb.Event
	f, err := mode.Forecast(context.Background(), ev, draws, fseed, fit.ForecastSettings{T1: from + 2450000, T2: from + 2450000 + days, Points: points, Now: from + 2450000})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("forecast (Go API): next peak %+v; next crossing %+v", f.Peak, f.Crossing)
	if f.Peak.Fraction < 0.5 {
		t.Errorf("only %.2f of the draws peak in a window around the demo's peak", f.Peak.Fraction)
	}
	for key, dist := range map[string]fit.TimeDistribution{"peak": f.Peak, "crossing": f.Crossing} {
		s := stats[key]
		frac, _ := strconv.ParseFloat(s.Fraction, 64)
		if frac != dist.Fraction {
			t.Errorf("%s: page fraction %q, Go API %v", key, s.Fraction, dist.Fraction)
		}
		if dist.Fraction == 0 {
			continue
		}
		for name, pair := range map[string][2]any{"median": {s.Median, dist.Median}, "lower": {s.Lower, dist.Lower}, "upper": {s.Upper, dist.Upper}} {
			got, _ := strconv.ParseFloat(pair[0].(string), 64)
			if math.Abs(got-pair[1].(float64)) > 2e-6 {
				t.Errorf("%s %s: page %q, Go API %.10f", key, name, pair[0], pair[1])
			}
		}
	}
	// the band in the light curve: drawn by the plot (its forecast median series is in the legend)
	if n := p.eval(`Array.from(document.querySelectorAll("#lc .u-legend .u-label")).filter(e => e.textContent.startsWith("forecast median")).length`); n != 1.0 {
		t.Errorf("%v forecast median series in the light-curve legend, want 1", n)
	}
	var band struct{ Mag, Lo, Hi []float64 }
	p.evalInto(`(() => { const m = lensbook.document().steps.find(s => s.id === "forecast").result.modes[0]; return {Mag: m.mag, Lo: m.mag_lower, Hi: m.mag_upper}; })()`, &band)
	for _, i := range []int{0, points / 3, points - 1} {
		if math.Abs(band.Mag[i]-f.Mag[0][i]) > 1e-9 || math.Abs(band.Lo[i]-f.MagLower[0][i]) > 1e-9 || math.Abs(band.Hi[i]-f.MagUpper[0][i]) > 1e-9 {
			t.Errorf("band at %d: page (%v, %v, %v), Go API (%v, %v, %v)", i, band.Lo[i], band.Mag[i], band.Hi[i], f.MagLower[0][i], f.Mag[0][i], f.MagUpper[0][i])
		}
		if !(band.Lo[i] <= band.Mag[i] && band.Mag[i] <= band.Hi[i]) {
			t.Errorf("band at %d is not ordered: %v %v %v", i, band.Lo[i], band.Mag[i], band.Hi[i])
		}
	}
	if n := p.eval(`document.querySelectorAll("#forecast-panel figure svg").length`); n.(float64) < 2 {
		t.Errorf("%v forecast figures (band and histogram expected)", n)
	}

	// ---- exports ----
	for _, c := range []struct{ button, file, want string }{
		{`[data-export="physical-csv-0"]`, "physical-quantities-mode1.csv", "# assumption_1: "},
		{`[data-export="physical-ecsv-0"]`, "physical-quantities-mode1.ecsv", "%ECSV"},
		{`[data-export="forecast-csv-0"]`, "forecast-mode1.csv", "# next_peak: median "},
		{`[data-export="forecast-times-csv-0"]`, "forecast-times-mode1.csv", "next_caustic_crossing"},
	} {
		p.click(c.button)
		b := p.download(c.file, 20*time.Second)
		if !strings.Contains(string(b), c.want) {
			t.Errorf("%s does not contain %q: %.300s", c.file, c.want, b)
		}
	}

	// ---- look at it ----
	shot := filepath.Join(os.TempDir(), "lensbook-report-panels.png")
	if v := os.Getenv("LENSBOOK_PANELS_SHOT"); v != "" {
		shot = v
	}
	p.eval(`document.querySelector("#physical-panel").scrollIntoView(), true`)
	time.Sleep(300 * time.Millisecond)
	png, err := chromedp.Run(p.ctx, chromedp.Screenshot(chromedp.CSS(`#step-report`)))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(shot, png, 0o644); err != nil {
		t.Fatal(err)
	}
	// the default window: from the last data point for 30 days
	p.setInput(`#forecast-panel input[name=from]`, "")
	p.setInput(`#forecast-panel input[name=days]`, "")
	p.click("#run-forecast")
	p.waitJS(`(() => { const s = lensbook.document().steps.find(s => s.id === "forecast"); return !!s && s.result.settings.days === 30; })()`, 5*time.Minute)
	var win struct{ From, Days, Last float64 }
	p.evalInto(`(() => { const s = lensbook.document().steps.find(s => s.id === "forecast").result.settings; return {From: s.from, Days: s.days, Last: Math.max(...lensbook.current().datasets.flatMap(d => d.t))}; })()`, &win)
	if win.From != win.Last || win.Days != 30 {
		t.Errorf("default forecast window from %v for %v d, want the last data point %v for 30 d", win.From, win.Days, win.Last)
	}
	p.click("#forecast-show")
	p.eval(`window.scrollTo(0, 0), true`)
	time.Sleep(400 * time.Millisecond)
	lcShot := strings.TrimSuffix(shot, ".png") + "-lightcurve.png"
	png, err = chromedp.Run(p.ctx, chromedp.Screenshot(chromedp.CSS(`.lc-panel`)))
	if err != nil {
		t.Fatal(err)
	}
	os.WriteFile(lcShot, png, 0o644)
	t.Logf("screenshots: %s, %s", shot, lcShot)

	// ---- saved and reopened: the same numbers, without running anything ----
	var before []string
	p.evalInto(`Array.from(document.querySelectorAll("#physical-panel td, #forecast-panel td")).map(e => e.textContent)`, &before)
	p.click(`[data-export="notebook"]`)
	nbFile := p.download(".lensbook.json", 20*time.Second)
	q := newPage(t)
	q.open("")
	path := filepath.Join(t.TempDir(), "panels.lensbook.json")
	if err := os.WriteFile(path, nbFile, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := chromedpUpload(q, "#open-input", []string{path}); err != nil {
		t.Fatal(err)
	}
	q.waitJS(`!!document.querySelector("#forecast-panel .forecast-table") && !!document.querySelector("#physical-panel .physical-table")`, 30*time.Second)
	var after []string
	q.evalInto(`Array.from(document.querySelectorAll("#physical-panel td, #forecast-panel td")).map(e => e.textContent)`, &after)
	if strings.Join(before, "|") != strings.Join(after, "|") {
		t.Errorf("reopened panels differ:\nbefore %v\nafter  %v", before, after)
	}
	if n := q.eval(`document.querySelectorAll("#step-report .stale-note").length`); n != 0.0 {
		t.Errorf("reopened panels are marked stale")
	}

	for _, pg := range []*page{p, q} {
		if n := pg.eval(`document.querySelectorAll("img").length`); n != 0.0 {
			t.Errorf("a dataset name became markup: %v <img> elements", n)
		}
		if errs := pg.consoleErrors(); len(errs) > 0 {
			t.Errorf("console errors: %v", errs)
		}
		if bad := pg.offOrigin(); len(bad) > 0 {
			t.Errorf("requests outside the origin: %v", bad)
		}
	}
}
