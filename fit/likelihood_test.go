package fit_test

import (
	"encoding/json"
	"math"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/floats/scalar"

	"lensbook/fit"
	"lensbook/fit/problems"
	"lensbook/lens"
)

func simulate(t testing.TB, s *problems.Spec, seed uint64) *fit.Event {
	t.Helper()
	ev, err := s.Simulate(seed)
	if err != nil {
		t.Fatal(err)
	}
	return ev
}

// The likelihood's total is the sum over datasets of the closed-form flux fits
// of each dataset's own magnifications (invariant: datasets are independent).
func TestLikelihoodSumsDatasets(t *testing.T) {
	s := problems.PlanetCentral()
	ev := simulate(t, s, 1)
	l, err := fit.NewLikelihood(ev)
	if err != nil {
		t.Fatal(err)
	}
	p := s.Truth.Params
	total, err := l.Chi2(&p)
	if err != nil {
		t.Fatal(err)
	}
	sum := 0.0
	for k, d := range ev.Datasets {
		a := make([]float64, d.Len())
		m := s.Truth
		m.LD = d.LD
		if err := lens.LightCurve(a, &m, d.T, nil); err != nil {
			t.Fatal(err)
		}
		w := make([]float64, d.Len())
		for i := range w {
			w[i] = 1 / (d.Err[i] * d.Err[i])
		}
		fs, fb, c, _ := fit.SolveFlux(a, d.Flux, w, fit.Blend{})
		got := l.Fits()[k]
		if !scalar.EqualWithinRel(got.Chi2, c, 1e-9) || !scalar.EqualWithinRel(got.Fs, fs, 1e-9) || !scalar.EqualWithinAbsOrRel(got.Fb, fb, 1e-6, 1e-9) {
			t.Errorf("dataset %d: got %+v, want chi2=%v fs=%v fb=%v", k, got, c, fs, fb)
		}
		sum += c
	}
	if !scalar.EqualWithinRel(total, sum, 1e-12) {
		t.Errorf("total %v != sum %v", total, sum)
	}
	// at the truth the simulated noise gives χ² ≈ N within a few √(2N)
	n := float64(l.N())
	if math.Abs(total-n) > 5*math.Sqrt(2*n) {
		t.Errorf("χ²(truth) = %v for N = %v: noise model inconsistent", total, n)
	}
	// residuals square-sum to χ²
	r := make([]float64, l.N())
	c, _ := l.Residuals(r, &p)
	ss := 0.0
	for _, x := range r {
		ss += x * x
	}
	if !scalar.EqualWithinRel(ss, c, 1e-12) {
		t.Errorf("Σr² = %v, χ² = %v", ss, c)
	}
}

func TestLikelihoodNoAllocs(t *testing.T) {
	s := problems.PlanetCentral()
	ev := simulate(t, s, 1)
	l, _ := fit.NewLikelihood(ev)
	p := s.Truth.Params
	l.Chi2(&p)
	// binary lens: only the per-dataset solver (a cold start, see magnify)
	max := float64(len(ev.Datasets))
	if n := testing.AllocsPerRun(10, func() { l.Chi2(&p) }); n > max {
		t.Errorf("Chi2 allocates %v times per call, want ≤ %v", n, max)
	}
	r := make([]float64, l.N())
	if n := testing.AllocsPerRun(10, func() { l.Residuals(r, &p) }); n > max {
		t.Errorf("Residuals allocates %v times per call, want ≤ %v", n, max)
	}
	// single lens: none
	p.S, p.Q, p.Alpha = 0, 0, 0
	if n := testing.AllocsPerRun(10, func() { l.Chi2(&p) }); n != 0 {
		t.Errorf("single-lens Chi2 allocates %v times per call", n)
	}
}

func TestLikelihoodBadModel(t *testing.T) {
	ev := simulate(t, problems.PlanetCentral(), 1)
	l, _ := fit.NewLikelihood(ev)
	p := lens.Params{T0: 0, U0: 0.1, TE: -1}
	if c, err := l.Chi2(&p); err == nil || !math.IsInf(c, 1) {
		t.Fatalf("tE < 0: got %v, %v; want +Inf and an error", c, err)
	}
}

func TestMask(t *testing.T) {
	ev := simulate(t, problems.PlanetCentral(), 1)
	n0 := ev.NumUsed()
	d := ev.Datasets[0]
	t1, t2 := d.T[10], d.T[19]
	n, err := ev.Mask(fit.Mask{Dataset: 0, Points: []int{0, 1, 2}, Ranges: [][2]float64{{t1, t2}}, Reason: "test"})
	if err != nil {
		t.Fatal(err)
	}
	if n != 13 || ev.NumUsed() != n0-13 {
		t.Fatalf("masked %d points (used %d → %d), want 13", n, n0, ev.NumUsed())
	}
	l, _ := fit.NewLikelihood(ev)
	if l.N() != n0-13 {
		t.Fatalf("likelihood uses %d points, want %d", l.N(), n0-13)
	}
	if len(ev.Masks) != 1 || ev.Masks[0].Reason != "test" {
		t.Fatalf("mask not recorded: %+v", ev.Masks)
	}
	for _, bad := range []fit.Mask{{Dataset: 5}, {Dataset: 0, Points: []int{-1}}, {Dataset: 0, Ranges: [][2]float64{{2, 1}}}} {
		if _, err := ev.Mask(bad); err == nil {
			t.Errorf("mask %+v accepted", bad)
		}
	}
	ev.Unmask(-1)
	if ev.NumUsed() != n0 || len(ev.Masks) != 0 {
		t.Fatalf("unmask: used %d masks %d", ev.NumUsed(), len(ev.Masks))
	}
}

// The Levenberg–Marquardt Jacobian of the residuals gives the χ² gradient
// 2Jᵀr; check it against gonum's central differences (diff/fd) of χ² itself.
func TestChi2GradientMatchesFD(t *testing.T) {
	s := problems.PlanetCentral()
	ev := simulate(t, s, 2)
	l, _ := fit.NewLikelihood(ev)
	specs := fit.FreeSpecs(fit.T0, fit.U0, fit.TE, fit.S, fit.Q, fit.Alpha)
	start := s.Truth.Params
	start.Alpha += 0.01
	start.U0 *= 1.02
	sp, err := fit.NewSpace(start, specs)
	if err != nil {
		t.Fatal(err)
	}
	x0 := sp.Vector(nil, start)
	f := func(x []float64) float64 {
		p := sp.Params(x)
		c, _ := l.Chi2(&p)
		return c
	}
	want := fd.Gradient(nil, f, x0, &fd.Settings{Formula: fd.Central, Step: 1e-7})
	got := fit.Chi2Gradient(l, sp, start)
	for i := range want {
		if !scalar.EqualWithinAbsOrRel(got[i], want[i], 1e-3*math.Abs(want[i])+1e-2, 2e-3) {
			t.Errorf("d χ²/d %v: Jacobian %v, fd %v", sp.Free[i], got[i], want[i])
		}
	}
}

func TestParamsRoundTrip(t *testing.T) {
	p := lens.Params{T0: 2460000.5, U0: -0.02, TE: 33, Rho: 0.002, S: 1.3, Q: 3e-4, Alpha: 5.5}
	specs := fit.FreeSpecs(fit.T0, fit.U0, fit.TE, fit.Rho, fit.S, fit.Q, fit.Alpha)
	sp, err := fit.NewSpace(p, specs)
	if err != nil {
		t.Fatal(err)
	}
	x := sp.Vector(nil, p)
	if x[3] != math.Log10(0.002) || x[5] != math.Log10(3e-4) || x[0] != p.T0 {
		t.Fatalf("coordinates %v: rho, q must be log10, t0 linear", x)
	}
	q := sp.Params(x)
	for _, k := range []fit.Param{fit.T0, fit.U0, fit.TE, fit.Rho, fit.S, fit.Q, fit.Alpha} {
		if !scalar.EqualWithinRel(fit.Get(&q, k), fit.Get(&p, k), 1e-14) {
			t.Errorf("%v: %v → %v", k, fit.Get(&p, k), fit.Get(&q, k))
		}
	}
	// flat in log q: density ratio between q and 10q is 10 (∝ 1/q)
	a, b := p, p
	b.Q = 10 * p.Q
	if d := specs.LogPrior(&a) - specs.LogPrior(&b); !scalar.EqualWithinAbs(d, math.Log(10), 1e-12) {
		t.Errorf("log prior difference %v, want ln 10", d)
	}
	b.Q = 2 // above the default bound q ≤ 1
	if !math.IsInf(specs.LogPrior(&b), -1) {
		t.Error("q = 2 inside the default bounds")
	}
	// JSON round trip of the settings types
	specs.S.Prior = fit.PriorFlat
	specs.TE.Min, specs.TE.Max = 1, 100
	js, err := json.Marshal(specs)
	if err != nil {
		t.Fatal(err)
	}
	var back fit.Specs
	if err := json.Unmarshal(js, &back); err != nil || back != specs {
		t.Fatalf("JSON round trip: %s → %+v (%v)", js, back, err)
	}
	for _, name := range []string{"t0", "u0", "tE", "rho", "s", "q", "alpha", "piEN", "piEE", "dsdt", "dalphadt"} {
		pp, err := fit.ParseParam(name)
		if err != nil || pp.String() != name {
			t.Errorf("ParseParam(%q) = %v, %v", name, pp, err)
		}
	}
	if _, err := fit.ParseParam("x"); err == nil {
		t.Error("unknown parameter accepted")
	}
}
