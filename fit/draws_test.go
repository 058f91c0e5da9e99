package fit_test

import (
	"context"
	"math"
	"reflect"
	"strings"
	"testing"

	"lensbook/fit"
	"lensbook/fit/problems"
	"lensbook/lens"
)

// TestDrawsModeMatchesMode: a mode rebuilt from its kept samples by
// NewDrawsMode (what the page sends back) gives the same physical inputs,
// derived quantities and forecast as the sampler's own mode, bit for bit
// (invariant: both must read the same numbers the same way).
func TestDrawsModeMatchesMode(t *testing.T) {
	ev, sol := refined(t, problems.FiniteSourceSingle(), 1)
	res, err := fit.SamplePosterior(context.Background(), ev, []*fit.Solution{sol},
		fit.PosteriorSettings{Ensemble: fit.EnsembleSettings{Steps: 60, Seed: 4}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	m := res.Modes[0]
	cols := make([][]float64, len(m.Samples.Names))
	for j := range cols {
		cols[j] = m.Samples.Column(nil, j)
	}
	d, err := fit.NewDrawsMode(m.Label, m.Space.Base, m.TRef, m.Samples.Names, cols)
	if err != nil {
		t.Fatal(err)
	}
	a, err := m.PhysicalInput()
	if err != nil {
		t.Fatal(err)
	}
	b, err := d.PhysicalInput()
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(a, b) {
		t.Fatal("physical inputs differ between the mode and its rebuilt draws")
	}
	set := fit.PhysicalSettings{ThetaStar: 5, ThetaStarErr: 0.5, Seed: 9}
	pa, err := fit.DeriveQuantities(a, set)
	if err != nil {
		t.Fatal(err)
	}
	pb, _ := fit.DeriveQuantities(b, set)
	if !reflect.DeepEqual(pa, pb) {
		t.Error("derived quantities differ")
	}
	t1, t2 := ev.TimeRange()
	fs := fit.ForecastSettings{T1: t1, T2: t2, Points: 200}
	fa, err := m.Forecast(context.Background(), ev, 30, 7, fs)
	if err != nil {
		t.Fatal(err)
	}
	calls := 0
	fs.Progress = func(done, total int) {
		calls++
		if done != calls || total != 30 {
			t.Errorf("progress %d of %d at call %d", done, total, calls)
		}
	}
	fb, err := d.Forecast(context.Background(), ev, 30, 7, fs)
	if err != nil {
		t.Fatal(err)
	}
	if calls != 30 {
		t.Errorf("progress called %d times for 30 draws", calls)
	}
	for i := range fa.Times {
		if fa.Amp[i] != fb.Amp[i] || fa.AmpLower[i] != fb.AmpLower[i] || fa.MagUpper[0][i] != fb.MagUpper[0][i] {
			t.Fatalf("forecast band differs at %d", i)
		}
	}
	if !reflect.DeepEqual(fa.NextPeak, fb.NextPeak) {
		t.Error("next-peak times differ")
	}
}

func TestDrawsModeBadInput(t *testing.T) {
	base := lens.Params{T0: 2460400, U0: 0.1, TE: 20, Rho: 0.01}
	col := []float64{1, 2}
	for _, c := range []struct {
		names []string
		cols  [][]float64
		tref  float64
		want  string
	}{
		{nil, nil, 0, "0 parameter names"},
		{[]string{"tE", "u0"}, [][]float64{col, col}, 0, "out of order"},
		{[]string{"u0", "u0"}, [][]float64{col, col}, 0, "out of order"},
		{[]string{"mass"}, [][]float64{col}, 0, "unknown parameter"},
		{[]string{"u0", "tE"}, [][]float64{col, {1}}, 0, "has 1 draws"},
		{[]string{"u0"}, [][]float64{{}}, 0, "no draws"},
		{[]string{"u0"}, [][]float64{{1, math.NaN()}}, 0, "not finite"},
		{[]string{"u0"}, [][]float64{col}, -5, "not a Julian date"},
	} {
		_, err := fit.NewDrawsMode("m", base, c.tref, c.names, c.cols)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%v: error %v, want %q", c.names, err, c.want)
		}
	}
	// alpha comes in degrees and is used in radians; fixed parameters from base
	m, err := fit.NewDrawsMode("m", lens.Params{T0: 1, U0: 0.1, TE: 20, S: 1.2, Q: 1e-3}, 0, []string{"alpha"}, [][]float64{{90}})
	if err != nil {
		t.Fatal(err)
	}
	p := m.Draws(1, 1)[0]
	if math.Abs(p.Alpha-math.Pi/2) > 1e-15 || p.S != 1.2 || p.Q != 1e-3 {
		t.Errorf("draw %+v: want α = π/2 and s, q from the base", p)
	}
}
