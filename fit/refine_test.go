package fit_test

import (
	"context"
	"encoding/json"
	"math"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/mat"

	"lensbook/fit"
	"lensbook/fit/problems"
)

// The Gauss–Newton covariance (JᵀJ)⁻¹ agrees with the inverse of half the χ²
// Hessian from gonum's finite differences (diff/fd.Hessian) at the optimum of
// a well-fitted event (small residuals: the dropped curvature term averages
// out), to 10% per standard deviation.
func TestRefineCovarianceMatchesFDHessian(t *testing.T) {
	s := problems.SingleLens()
	ev := simulate(t, s, 41)
	l := mustLikelihood(t, ev)
	specs := fit.FreeSpecs(fit.T0, fit.U0, fit.TE)
	sol, err := fit.Refine(context.Background(), l, s.Truth.Params, fit.RefineSettings{Specs: specs})
	if err != nil {
		t.Fatal(err)
	}
	if sol.Cov == nil {
		t.Fatalf("no covariance: %s", sol.Note)
	}
	sp, _ := fit.NewSpace(sol.Params, specs)
	x0 := sp.Vector(nil, sol.Params)
	f := func(x []float64) float64 {
		p := sp.Params(x)
		c, _ := l.Chi2(&p)
		return c
	}
	var h mat.SymDense
	// steps ~1% of each parameter's σ scale: t0 (days), u0, tE (days)
	fd.Hessian(&h, f, x0, &fd.Settings{Step: 1e-4})
	h.ScaleSym(0.5, &h)
	var chol mat.Cholesky
	if !chol.Factorize(&h) {
		t.Fatal("fd Hessian not positive definite")
	}
	var cov mat.SymDense
	chol.InverseTo(&cov)
	for i := range sol.Free {
		want := math.Sqrt(cov.At(i, i))
		got := math.Sqrt(sol.Cov[i][i])
		if math.Abs(got/want-1) > 0.1 {
			t.Errorf("σ(%v): Gauss–Newton %v, fd Hessian %v", sol.Free[i], got, want)
		}
	}
	// the Solution travels as JSON
	js, err := json.Marshal(sol)
	if err != nil {
		t.Fatal(err)
	}
	var back fit.Solution
	if err := json.Unmarshal(js, &back); err != nil || back.Chi2 != sol.Chi2 || back.Status != sol.Status || back.Free[1] != fit.U0 {
		t.Fatalf("JSON round trip: %v\n%s", err, js)
	}
}

// Refine's default specs free the binary parameters; starting near the truth
// of the planetary event it returns to χ² ≤ χ²(truth).
func TestRefineBinaryFromPerturbedTruth(t *testing.T) {
	s := problems.PlanetCentral()
	ev := simulate(t, s, 42)
	truth, _ := problems.TruthChi2(s, ev)
	l := mustLikelihood(t, ev)
	st := s.Truth.Params
	st.S *= 1.02
	st.Q *= 1.3
	st.Alpha += 0.03
	st.U0 *= 0.95
	sol, err := fit.Refine(context.Background(), l, st, fit.RefineSettings{})
	if err != nil {
		t.Fatal(err)
	}
	if len(sol.Free) != 6 || sol.Chi2 > truth {
		t.Errorf("free %v, χ² %v vs χ²(truth) %v", sol.Free, sol.Chi2, truth)
	}
	if sol.Dof != l.N()-6-2*len(ev.Datasets) {
		t.Errorf("dof %d", sol.Dof)
	}
	for i, p := range sol.Free {
		if !within(fit.Get(&sol.Params, p), fit.Get(&s.Truth.Params, p), sol.Sigma[i], 5) {
			t.Errorf("%v = %v ± %v, truth %v", p, fit.Get(&sol.Params, p), sol.Sigma[i], fit.Get(&s.Truth.Params, p))
		}
	}
}

// A fit that cannot start still returns a JSON-encodable Solution.
func TestFailedSolutionEncodes(t *testing.T) {
	s := problems.SingleLens()
	ev := simulate(t, s, 43)
	l := mustLikelihood(t, ev)
	bad := s.Truth.Params
	bad.TE = 1e6 // above the default tE bound
	sol, err := fit.Optimize(context.Background(), l, bad, fit.FreeSpecs(fit.T0, fit.TE), fit.OptSettings{})
	if err == nil || sol == nil || sol.Status != fit.Failed {
		t.Fatalf("got %+v, %v; want a failed solution and an error", sol, err)
	}
	if _, err := json.Marshal(sol); err != nil {
		t.Fatalf("failed solution does not encode: %v", err)
	}
}
