package fit_test

import (
	"context"
	"fmt"

	"lensbook/fit"
	"lensbook/fit/problems"
)

// ExampleFitSingle fits a point lens to a simulated single-lens event and
// compares with the truth (t0 = 2460410, u0 = 0.15, tE = 25 d).
func ExampleFitSingle() {
	s := problems.SingleLens()
	ev, err := s.Simulate(1)
	if err != nil {
		panic(err)
	}
	r, err := fit.FitSingle(context.Background(), ev, fit.SingleSettings{NoFinite: true})
	if err != nil {
		panic(err)
	}
	p := r.Point.Params
	fmt.Printf("t0 − 2460400 = %.3g d, u0 = %.2g, tE = %.3g d\n", p.T0-2460400, p.U0, p.TE)
	fmt.Printf("χ²/N = %.2f, anomaly: %v, status: %v\n", r.Point.Chi2/float64(ev.NumUsed()), r.Anomaly.Found, r.Point.Status)
	// Output:
	// t0 − 2460400 = 10 d, u0 = 0.16, tE = 24.3 d
	// χ²/N = 1.03, anomaly: false, status: converged
}

// ExampleSolveFlux solves source and blend flux for a noiseless light curve.
func ExampleSolveFlux() {
	a := []float64{1, 1.5, 3, 10, 3, 1.5, 1}
	f := make([]float64, len(a))
	w := make([]float64, len(a))
	for i := range a {
		f[i] = 200*a[i] + 50
		w[i] = 1
	}
	fs, fb, chi2, _ := fit.SolveFlux(a, f, w, fit.Blend{})
	fmt.Printf("fs = %.6g, fb = %.6g, χ² < 1e-12: %v\n", fs, fb, chi2 < 1e-12)
	// With fb forced to 0 the best slope is Σaf/Σa² = 200 + 50·21/124.5 (by hand).
	fs, _, _, _ = fit.SolveFlux(a, f, w, fit.Blend{Mode: fit.BlendFixed, Fb: 0})
	fmt.Printf("with fb fixed at 0: fs = %.4g\n", fs)
	// Output:
	// fs = 200, fb = 50, χ² < 1e-12: true
	// with fb fixed at 0: fs = 208.4
}
