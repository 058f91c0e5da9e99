package protocol

import (
	"context"
	"encoding/json"
	"math"
	"testing"

	"lensbook/fit"
	"lensbook/lens"
)

// TestCurvesParallax: the plotted model curve of a solution with parallax is
// the event's parallax curve about the solution's t0,par (fit.Event.DatasetCurve),
// and differs from the static one; the event position comes back from the
// saved notebook.
func TestCurvesParallax(t *testing.T) {
	d := &fit.Dataset{Name: "a", ZeroPoint: 25}
	for i := range 120 {
		d.T = append(d.T, 2460600+4*float64(i))
		d.Flux = append(d.Flux, 1000+float64(i%5))
		d.Err = append(d.Err, 5)
		d.Line = append(d.Line, i+1)
	}
	ev := fit.NewEvent("par", d)
	ev.Coords = &fit.Coords{RA: 269.5, Dec: -29}
	doc, err := fit.EncodeNotebook(&fit.Notebook{Event: ev})
	if err != nil {
		t.Fatal(err)
	}
	sol := &fit.Solution{Label: "par", Params: lens.Params{T0: 2460800, U0: 0.1, TE: 120, PiEN: 0.3, PiEE: -0.1},
		TRef: 2460790, Fits: []fit.DatasetFit{{Name: "a", Fs: 900, Fb: 100}}}
	raw, _ := json.Marshal(curvesIn{Notebook: doc, Solutions: []*fit.Solution{sol}, Selected: 0, N: 50})
	out, err := stepCurves(context.Background(), raw, nil)
	if err != nil {
		t.Fatal(err)
	}
	mc := out.(*Curves).Models[0]
	want := make([]float64, len(mc.T))
	if err := ev.DatasetCurve(0, want, sol.Params, mc.T, sol.TRef); err != nil {
		t.Fatal(err)
	}
	static := sol.Params
	static.PiEN, static.PiEE = 0, 0
	flat := make([]float64, len(mc.T))
	if err := lens.LightCurve(flat, &lens.Model{Params: static, Ref: ev.Ref}, mc.T, nil); err != nil {
		t.Fatal(err)
	}
	maxDiff := 0.0
	for i := range mc.T {
		y := 25 - 2.5*math.Log10(900*want[i]+100)
		if math.Abs(float64(mc.Y[i])-y) > 1e-12 {
			t.Fatalf("model magnitude at %v = %v, want %v (parallax curve)", mc.T[i], mc.Y[i], y)
		}
		maxDiff = math.Max(maxDiff, math.Abs(float64(mc.Y[i])-(25-2.5*math.Log10(900*flat[i]+100))))
	}
	if maxDiff < 1e-3 {
		t.Errorf("parallax curve within %.2g mag of the static one: parallax not applied", maxDiff)
	}
}
