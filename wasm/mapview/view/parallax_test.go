package view

import (
	"math"
	"math/cmplx"
	"testing"
	"time"

	"lensbook/fit"
	"lensbook/lens"
)

// TestParallaxPath: with πE ≠ 0 and the event's position the plotted curve
// and the drawn trajectory follow the parallax model (fit.Event offsets at the
// plot times, lens.LightCurve with them), the path leaves the straight line,
// and without a position or without πE the trajectory stays straight.
func TestParallaxPath(t *testing.T) {
	c := &fit.Coords{RA: 269.5, Dec: -29}
	m := lens.Model{Params: lens.Params{T0: 2460800, U0: 0.1, TE: 120, S: 1.2, Q: 0.01, Alpha: 0.7, PiEN: 0.3, PiEE: -0.1}}
	v := New(m, 200, 150, 1)
	v.Coords = c
	v.TMin, v.TMax = m.T0-240, m.T0+240 // fixed plot range, as with data loaded
	v.SetModel(m)
	if v.Model.TRef != m.T0 {
		t.Fatalf("SetModel left t0,par at %v, want t0 = %v", v.Model.TRef, m.T0)
	}
	v.Step(time.Second)
	if v.Err != nil {
		t.Fatal(v.Err)
	}
	ev := fit.Event{Coords: c}
	off, err := ev.ParallaxOffsets(v.TGrid, m.T0)
	if err != nil {
		t.Fatal(err)
	}
	mm := m
	mm.TRef = m.T0
	want := make([]float64, len(v.TGrid))
	if err := lens.LightCurve(want, &mm, v.TGrid, off); err != nil {
		t.Fatal(err)
	}
	if len(v.Path) != len(v.TGrid) {
		t.Fatalf("path has %d points for %d times", len(v.Path), len(v.TGrid))
	}
	k := TrackOf(&v.Model)
	maxDev := 0.0
	for i, tt := range v.TGrid {
		if v.AGrid[i] != want[i] {
			t.Fatalf("A(%v) = %v, want %v (parallax curve)", tt, v.AGrid[i], want[i])
		}
		if z := mm.At(tt, off[i]).Zeta; cmplx.Abs(v.Path[i]-z) > 0 {
			t.Fatalf("path at %v = %v, want %v", tt, v.Path[i], z)
		}
		maxDev = math.Max(maxDev, math.Abs(dot(v.Path[i]-k.C, k.N)-k.U0))
	}
	// Over t0 ± 240 d the Earth's motion moves the source sideways by
	// a good fraction of πE (0.32 here): the path is visibly bent.
	if maxDev < 0.02 {
		t.Errorf("path leaves the straight line by at most %.3g θE; parallax should bend it", maxDev)
	}
	// The scene draws the bent path (one polyline point per plot time) in
	// the trajectory colour.
	v.Fit()
	drawn := false
	for _, p := range v.Scene() {
		drawn = drawn || p.Kind == Polyline && p.Col == TrackColour && len(p.Pts) == len(v.Path)
	}
	if !drawn {
		t.Error("scene has no trajectory polyline through the path")
	}
	// Moving t0 keeps t0,par (and the plot range), so the cached offsets
	// are reused.
	first := v.off
	m2 := v.Model
	m2.T0 += 3
	v.SetModel(m2)
	v.Step(time.Second)
	if v.Model.TRef != m.T0 || &v.off[0] != &first[0] {
		t.Errorf("t0,par moved with t0 (%v) or offsets recomputed", v.Model.TRef)
	}
	// No position: no parallax, a straight trajectory.
	v.Coords = nil
	v.SetModel(m2)
	v.Step(time.Second)
	if v.Path != nil || v.Err != nil {
		t.Errorf("without coordinates: path %d points, err %v", len(v.Path), v.Err)
	}
	// πE = 0 with a position: straight as well.
	v.Coords = c
	m3 := m2
	m3.PiEN, m3.PiEE = 0, 0
	v.SetModel(m3)
	v.Step(time.Second)
	if v.Path != nil {
		t.Errorf("πE = 0: path of %d points, want the straight line", len(v.Path))
	}
}

// TestDataChi2Parallax: the map view's χ² uses the event position and the
// model's t0,par, so it equals fit's likelihood on the same event.
func TestDataChi2Parallax(t *testing.T) {
	c := &fit.Coords{RA: 269.5, Dec: -29}
	m := lens.Model{Params: lens.Params{T0: 2460800, U0: 0.1, TE: 120, PiEN: 0.3, PiEE: -0.1}, TRef: 2460790}
	s := Series{Name: "a", ZeroPoint: 25}
	for i := range 200 {
		s.T = append(s.T, 2460600+2*float64(i))
		s.Flux = append(s.Flux, 1000+float64(i%7))
		s.Err = append(s.Err, 5)
	}
	var d Data
	if err := d.Set([]Series{s}); err != nil {
		t.Fatal(err)
	}
	d.Coords = c
	got, err := d.Chi2(&m)
	if err != nil {
		t.Fatal(err)
	}
	line := make([]int, len(s.T))
	ev := &fit.Event{Ref: m.Ref, Coords: c, TRef: m.TRef, Datasets: []*fit.Dataset{{Name: "a", T: s.T, Flux: s.Flux, Err: s.Err, Line: line}}}
	lik, err := fit.NewLikelihood(ev)
	if err != nil {
		t.Fatal(err)
	}
	want, err := lik.Chi2(&m.Params)
	if err != nil {
		t.Fatal(err)
	}
	if got != want {
		t.Errorf("χ² = %v, want fit's %v", got, want)
	}
	// Without the position the parallax model cannot be evaluated.
	d.Coords = nil
	if _, err := d.Chi2(&m); err == nil {
		t.Error("χ² of a parallax model without coordinates: no error")
	}
}
