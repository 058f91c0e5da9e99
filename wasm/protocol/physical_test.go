package protocol

import (
	"context"
	"encoding/json"
	"math"
	"strings"
	"testing"

	"lensbook/fit"
	"lensbook/lens"
)

// smallEvent is a notebook with one flat dataset (the physical step needs an
// event only for the export header; the forecast solves fluxes against it).
func smallEvent(t *testing.T) (json.RawMessage, *fit.Event) {
	t.Helper()
	d := &fit.Dataset{Name: "a", ZeroPoint: 25}
	for i := range 200 {
		d.T = append(d.T, 2460300+float64(i))
		d.Flux = append(d.Flux, 1000+float64(i%7))
		d.Err = append(d.Err, 5)
		d.Line = append(d.Line, i+1)
	}
	ev := fit.NewEvent("small", d)
	doc, err := fit.EncodeNotebook(&fit.Notebook{Event: ev})
	if err != nil {
		t.Fatal(err)
	}
	return doc, ev
}

func repeatNum(v float64, n int) []Num {
	out := make([]Num, n)
	for i := range out {
		out[i] = Num(v)
	}
	return out
}

// TestStepPhysical: the worked example of references.md §10 (θ* = 6 µas,
// ρ = 0.005, tE = 30 d, πE = 0.1, D_S = 8 kpc: θE = 1.2 mas, M = 1.47350 M☉,
// D_L = 4.08163 kpc) through the page's request; a mode without ρ says why
// beside the other; bad inputs are refused with a clear message.
func TestStepPhysical(t *testing.T) {
	doc, _ := smallEvent(t)
	n := 4
	base := lens.Params{T0: 2460400, U0: 0.1, TE: 30, Rho: 0.005, S: 1.1, Q: 0.001, PiEN: 0.06, PiEE: 0.08}
	good := DrawsIn{Label: "finite", Names: []string{"tE", "rho"}, Samples: [][]Num{repeatNum(30, n), repeatNum(0.005, n)}, Base: &base}
	pointBase := base
	pointBase.Rho = 0
	point := DrawsIn{Label: "point", Names: []string{"tE"}, Samples: [][]Num{repeatNum(30, n)}, Base: &pointBase}
	set := PhysicalSettings{ThetaSource: "theta", ThetaStar: 6, DS: 8}
	raw, _ := json.Marshal(physicalIn{Notebook: doc, Modes: []DrawsIn{good, point}, Settings: set})
	res, err := stepPhysical(context.Background(), raw, nil)
	if err != nil {
		t.Fatal(err)
	}
	out := res.(*PhysicalOut)
	if len(out.Modes) != 2 {
		t.Fatalf("%d modes", len(out.Modes))
	}
	got := map[string]float64{}
	for _, q := range out.Modes[0].Quantities {
		got[q.Name] = float64(q.Median)
		if q.Lower != q.Median || q.Upper != q.Median {
			t.Errorf("%s: exact inputs give the interval [%v, %v] around %v", q.Name, q.Lower, q.Upper, q.Median)
		}
	}
	for name, want := range map[string]float64{"thetaE": 1.2, "M": 1.47350, "DL": 4.08163, "aPerp": 1.1 * 1.2 * 4.08163} {
		if math.Abs(got[name]/want-1) > 3.4e-6 {
			t.Errorf("%s = %v, want %v (references.md §10)", name, got[name], want)
		}
	}
	if !strings.Contains(strings.Join(out.Modes[0].Assumptions, " "), "D_S = 8") {
		t.Errorf("assumptions do not state the source distance: %q", out.Modes[0].Assumptions)
	}
	if e := out.Modes[1].Error; !strings.Contains(e, "finite-source") || len(out.Modes[1].Quantities) != 0 {
		t.Errorf("point-source mode: error %q, %d quantities", e, len(out.Modes[1].Quantities))
	}
	csv := out.Exports["physical-csv-0"].Text
	if !strings.Contains(csv, "# assumption_1: ") || !strings.Contains(csv, "research estimates") || !strings.Contains(csv, "\nM,Msun,") {
		t.Errorf("physical CSV export:\n%s", csv)
	}
	if _, ok := out.Exports["physical-csv-1"]; ok {
		t.Error("an export for the mode without quantities")
	}

	for _, c := range []struct {
		set  PhysicalSettings
		want string
	}{
		{PhysicalSettings{ThetaSource: "theta"}, "angular source radius"},
		{PhysicalSettings{ThetaSource: "colour", VK0: 1.5, K0: 14, Class: "supergiant"}, "luminosity class"},
		{PhysicalSettings{ThetaSource: "mystery", ThetaStar: 1}, "θ* source"},
		{PhysicalSettings{ThetaSource: "theta", ThetaStar: 6, DS: -1}, "D_S"},
	} {
		raw, _ := json.Marshal(physicalIn{Notebook: doc, Modes: []DrawsIn{good}, Settings: c.set})
		if _, err := stepPhysical(context.Background(), raw, nil); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%+v: error %v, want %q", c.set, err, c.want)
		}
	}
	old := good
	old.Base = nil
	raw, _ = json.Marshal(physicalIn{Notebook: doc, Modes: []DrawsIn{old}, Settings: set})
	if _, err := stepPhysical(context.Background(), raw, nil); err == nil || !strings.Contains(err.Error(), "run the posterior again") {
		t.Errorf("draws without fixed parameters: %v", err)
	}
	// the colour–surface-brightness path names its relation
	raw, _ = json.Marshal(physicalIn{Notebook: doc, Modes: []DrawsIn{good}, Settings: PhysicalSettings{ThetaSource: "colour", VK0: 1.6, K0: 14.5, Class: "dwarf"}})
	res, err = stepPhysical(context.Background(), raw, nil)
	if err != nil {
		t.Fatal(err)
	}
	if a := strings.Join(res.(*PhysicalOut).Modes[0].Assumptions, " "); !strings.Contains(a, "Kervella") {
		t.Errorf("colour path assumptions: %q", a)
	}
}

// TestStepForecast: a single lens whose draws all peak at t0 inside the
// window gives the next peak at t0 (Paczyński curve, symmetric about t0) with
// every draw counted; the default window starts at the last data point; the
// forecast exports carry the distribution.
func TestStepForecast(t *testing.T) {
	doc, ev := smallEvent(t)
	base := lens.Params{T0: 2460510.25, U0: 0.2, TE: 15}
	n := 50
	t0s := make([]Num, n)
	for i := range t0s {
		t0s[i] = Num(2460510 + 0.01*float64(i))
	}
	draws := DrawsIn{Label: "single", Names: []string{"t0", "u0", "tE"}, Samples: [][]Num{t0s, repeatNum(0.2, n), repeatNum(15, n)}, Base: &base}
	raw, _ := json.Marshal(forecastIn{Notebook: doc, Modes: []DrawsIn{draws}, Settings: ForecastSettings{Draws: 40, Points: 2001, Seed: 3}})
	var reports []Progress
	res, err := stepForecast(context.Background(), raw, func(p Progress) { reports = append(reports, p) })
	if err != nil {
		t.Fatal(err)
	}
	out := res.(*ForecastOut)
	_, last := ev.TimeRange()
	if out.Settings.From != last || out.Settings.Days != ForecastDays {
		t.Errorf("default window from %v for %v d, want the last data point %v and %d d", out.Settings.From, out.Settings.Days, last, ForecastDays)
	}
	m := out.Modes[0]
	if m.Draws != 40 || len(m.NextPeak) != 40 || m.Crossings || m.NextCrossing != nil {
		t.Fatalf("%d draws, %d peaks, crossings %v", m.Draws, len(m.NextPeak), m.Crossings)
	}
	// each peak within 1e-3 d of some drawn t0 (grid step 0.015 d, parabola refined)
	for _, p := range m.NextPeak {
		k := math.Round((float64(p) - 2460510) / 0.01)
		if k < 0 || k >= float64(n) || math.Abs(float64(p)-(2460510+0.01*k)) > 1e-3 {
			t.Errorf("peak at %v is not one of the drawn t0", p)
		}
	}
	if m.Peak.Fraction != 1 || math.Abs(float64(m.Peak.Median)-2460510.245) > 0.03 {
		t.Errorf("peak distribution %+v", m.Peak)
	}
	if len(reports) != 40 || reports[39].Done != 40 || reports[39].Total != 40 {
		t.Errorf("%d progress reports, last %+v", len(reports), reports[len(reports)-1])
	}
	if h := out.Exports["forecast-times-csv-0"].Text; !strings.Contains(h, "# next_peak: median ") || !strings.Contains(h, "# next_caustic_crossing: not searched") {
		t.Errorf("times export header:\n%.600s", h)
	}
	if h := out.Exports["forecast-csv-0"].Text; !strings.Contains(h, "mag_a_lower [mag]") {
		t.Errorf("band export:\n%.600s", h)
	}
	for _, bad := range []ForecastSettings{{Days: -1}, {Draws: 6000}, {Points: 2}, {From: -3}} {
		raw, _ := json.Marshal(forecastIn{Notebook: doc, Modes: []DrawsIn{draws}, Settings: bad})
		if _, err := stepForecast(context.Background(), raw, func(Progress) {}); err == nil {
			t.Errorf("settings %+v accepted", bad)
		}
	}
}
