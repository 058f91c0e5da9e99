package fit_test

import (
	"context"
	"math"
	"testing"

	"lensbook/fit"
	"lensbook/fit/problems"
	"lensbook/lens"
)

// within reports |got − want| ≤ k·sigma.
func within(got, want, sigma, k float64) bool { return math.Abs(got-want) <= k*sigma }

func TestFitSingleRecoversSingleLens(t *testing.T) {
	s := problems.SingleLens()
	ev := simulate(t, s, 21)
	truth, _ := problems.TruthChi2(s, ev)
	r, err := fit.FitSingle(context.Background(), ev, fit.SingleSettings{})
	if err != nil {
		t.Fatal(err)
	}
	pt := r.Point
	if pt.Status != fit.Converged {
		t.Errorf("status %v", pt.Status)
	}
	if pt.Chi2 > truth+1e-6 {
		t.Errorf("χ² %v above χ²(truth) %v: not the minimum", pt.Chi2, truth)
	}
	// the fit is within 4σ (its own covariance) of the truth
	sol, err := fit.Refine(context.Background(), mustLikelihood(t, ev), pt.Params, fit.RefineSettings{Specs: fit.FreeSpecs(fit.T0, fit.U0, fit.TE)})
	if err != nil {
		t.Fatal(err)
	}
	for i, p := range sol.Free {
		if !within(fit.Get(&sol.Params, p), fit.Get(&s.Truth.Params, p), sol.Sigma[i], 4) {
			t.Errorf("%v = %v ± %v, truth %v", p, fit.Get(&sol.Params, p), sol.Sigma[i], fit.Get(&s.Truth.Params, p))
		}
	}
	if r.PreferFinite {
		t.Errorf("finite source preferred for a point source: Δχ² = %v", r.Point.Chi2-r.Finite.Chi2)
	}
	if r.Anomaly.Found {
		t.Errorf("anomaly reported in a single-lens event: %+v", r.Anomaly)
	}
	if len(r.Residuals) != ev.NumUsed() {
		t.Errorf("%d residuals for %d points", len(r.Residuals), ev.NumUsed())
	}
}

func TestFitSingleRecoversFiniteSourceSingleLens(t *testing.T) {
	s := problems.FiniteSourceSingle()
	ev := simulate(t, s, 22)
	truth, _ := problems.TruthChi2(s, ev)
	r, err := fit.FitSingle(context.Background(), ev, fit.SingleSettings{})
	if err != nil {
		t.Fatal(err)
	}
	if !r.PreferFinite || r.Finite == nil {
		t.Fatalf("finite source not preferred: point %v, finite %+v", r.Point.Chi2, r.Finite)
	}
	if r.Finite.Chi2 > truth+1 {
		t.Errorf("χ² %v > χ²(truth) + 1 = %v", r.Finite.Chi2, truth+1)
	}
	if got := r.Finite.Params.Rho; math.Abs(got/s.Truth.Rho-1) > 0.05 {
		t.Errorf("ρ = %v, truth %v", got, s.Truth.Rho)
	}
}

// LM and Nelder–Mead reach the same minimum on the single-lens problem; LM
// needs fewer evaluations (the measurement behind MethodDefault).
func TestOptimizersAgree(t *testing.T) {
	s := problems.SingleLens()
	ev := simulate(t, s, 23)
	l := mustLikelihood(t, ev)
	start, err := fit.GuessSingle(ev)
	if err != nil {
		t.Fatal(err)
	}
	specs := fit.FreeSpecs(fit.T0, fit.U0, fit.TE)
	var chi [3]float64
	var evals [3]int
	for i, m := range []fit.Method{fit.LevenbergMarquardt, fit.NelderMead, fit.BFGS} {
		sol, err := fit.Optimize(context.Background(), l, start, specs, fit.OptSettings{Method: m})
		if err != nil {
			t.Fatal(err)
		}
		chi[i], evals[i] = sol.Chi2, sol.Evals
	}
	t.Logf("χ²: LM %.4f (%d evals), NM %.4f (%d), BFGS %.4f (%d)", chi[0], evals[0], chi[1], evals[1], chi[2], evals[2])
	if math.Abs(chi[0]-chi[1]) > 0.01 || math.Abs(chi[0]-chi[2]) > 0.05 {
		t.Errorf("optimisers disagree: %v", chi)
	}
	if evals[0] >= evals[1] {
		t.Errorf("LM used %d evaluations, Nelder–Mead %d: default choice not justified", evals[0], evals[1])
	}
}

func TestOptimizeCancelled(t *testing.T) {
	s := problems.SingleLens()
	ev := simulate(t, s, 24)
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	start, _ := fit.GuessSingle(ev)
	sol, err := fit.Optimize(ctx, mustLikelihood(t, ev), start, fit.FreeSpecs(fit.T0, fit.U0, fit.TE), fit.OptSettings{})
	if err != nil {
		t.Fatal(err)
	}
	if sol.Status != fit.Cancelled {
		t.Errorf("status %v, want cancelled", sol.Status)
	}
}

func TestGuessSingle(t *testing.T) {
	s := problems.SingleLens()
	ev := simulate(t, s, 25)
	g, err := fit.GuessSingle(ev)
	if err != nil {
		t.Fatal(err)
	}
	tr := s.Truth.Params
	if math.Abs(g.T0-tr.T0) > 0.2*tr.TE || g.TE < tr.TE/3 || g.TE > 3*tr.TE || g.U0 <= 0 || g.U0 > 1 {
		t.Errorf("guess %+v far from truth %+v", g, tr)
	}
}

func TestRenormaliseErrors(t *testing.T) {
	s := problems.SingleLens()
	ev := simulate(t, s, 26)
	// pretend the uncertainties were underestimated by 2 in the first dataset
	for i := range ev.Datasets[0].Err {
		ev.Datasets[0].Err[i] /= 2
	}
	rec, err := fit.RenormaliseErrors(ev, s.Truth.Params, fit.RenormSettings{})
	if err != nil {
		t.Fatal(err)
	}
	n := float64(rec[0].N)
	// k² = χ²/(N−2) scatters by √(2/N) (χ² distribution); k by half that
	if !within(rec[0].K, 2, 2*math.Sqrt(2/n)/2, 4) || !within(rec[1].K, 1, math.Sqrt(2/float64(rec[1].N))/2, 4) {
		t.Errorf("scale factors %v, %v; want 2 and 1", rec[0].K, rec[1].K)
	}
	if ev.Datasets[0].ErrScale != rec[0].K {
		t.Error("scale not recorded in the dataset")
	}
	l := mustLikelihood(t, ev)
	p := s.Truth.Params
	l.Chi2(&p)
	for k, f := range l.Fits() {
		if dof := float64(f.N - 2); math.Abs(f.Chi2/dof-1) > 1e-6 {
			t.Errorf("dataset %d: χ²/dof = %v after renormalisation", k, f.Chi2/dof)
		}
	}
	// a floor: add 2% scatter beyond the errors at high magnification only, then AutoFloor finds a floor > 0
	ev2 := simulate(t, s, 27)
	d := ev2.Datasets[0]
	for i := range d.T {
		tau := (d.T[i] - s.Truth.T0) / s.Truth.TE
		if math.Abs(tau) < 0.3 {
			d.Flux[i] += 0.02 * d.Flux[i] * math.Sin(float64(i)*1.7) // deterministic extra scatter
		}
	}
	rec2, err := fit.RenormaliseErrors(ev2, s.Truth.Params, fit.RenormSettings{AutoFloor: true})
	if err != nil {
		t.Fatal(err)
	}
	if !(rec2[0].Floor > 0.003) {
		t.Errorf("auto floor %v mag, want > 0.003", rec2[0].Floor)
	}
	if _, err := fit.RenormaliseErrors(ev2, s.Truth.Params, fit.RenormSettings{Floor: -1}); err == nil {
		t.Error("negative floor accepted")
	}
}

func TestFindAnomaly(t *testing.T) {
	var res []fit.Residual
	for i := 0; i < 1000; i++ {
		r := math.Sin(float64(i) * 12.9898) // |r| ≤ 1, mean square 0.5
		if i >= 500 && i < 520 {
			r = 5
		}
		res = append(res, fit.Residual{T: float64(i) * 0.1, Norm: r})
	}
	a := fit.FindAnomaly(res, 30, 0)
	// the window widths are tE·{0.003, …, 0.3}: the 0.1·tE = 3 d window holds the
	// 2-d anomaly
	if !a.Found || a.T1 > 50 || a.T2 < 51.9 || a.T2-a.T1 > 3.05 {
		t.Errorf("anomaly %+v, want found, covering [50, 51.9], at most 3 d long", a)
	}
	for i := 500; i < 520; i++ {
		res[i].Norm = 0.5
	}
	if a := fit.FindAnomaly(res, 30, 0); a.Found {
		t.Errorf("anomaly reported in residuals without one: %+v", a)
	}
}

func mustLikelihood(t *testing.T, ev *fit.Event) *fit.Likelihood {
	t.Helper()
	l, err := fit.NewLikelihood(ev)
	if err != nil {
		t.Fatal(err)
	}
	return l
}

var _ = lens.Params{}
