package fit_test

import (
	"context"
	"fmt"

	"lensbook/fit"
)

// ExampleRunEnsemble samples a correlated 2-D Gaussian (mean (1, −2), σ = (1, 2),
// correlation 0.9: references.md §11) and prints the posterior medians and the
// convergence verdict.
func ExampleRunEnsemble() {
	logp := func(x []float64) float64 {
		// Precision matrix of [[1, 1.8], [1.8, 4]], det 0.76.
		a, b := x[0]-1, x[1]+2
		return -(4*a*a - 3.6*a*b + b*b) / (2 * 0.76)
	}
	c, err := fit.RunEnsemble(context.Background(), fit.EnsembleSettings{Steps: 4000, Seed: 1},
		fit.Target{LogDensity: logp}, fit.Start{X: []float64{0, 0}, Spread: []float64{0.1, 0.1}}, nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	s, _ := c.Samples([]string{"x", "y"}, nil)
	sum, _ := fit.Summarize(s)
	for _, p := range sum.Params {
		fmt.Printf("%s: median %.1f\n", p.Name, p.Median)
	}
	fmt.Println("converged:", sum.Converged)
	// Output:
	// x: median 1.0
	// y: median -2.0
	// converged: true
}

// ExampleFormatUncertain shows how tables print a median with asymmetric
// ±1σ-equivalent errors.
func ExampleFormatUncertain() {
	fmt.Println(fit.FormatUncertain(29.8765, 0.51, 0.49, 2))
	fmt.Println(fit.FormatUncertain(1.23e-4, 4.5e-6, 5.5e-6, 2))
	// Output:
	// 29.88^{+0.51}_{-0.49}
	// (1.230^{+0.045}_{-0.055})\times10^{-4}
}

// ExampleDeriveQuantities reproduces the worked example of references.md §10.
func ExampleDeriveQuantities() {
	p, err := fit.DeriveQuantities(fit.PhysicalInput{TE: []float64{30}, Rho: []float64{0.005},
		PiEN: []float64{0.1}, PiEE: []float64{0}}, fit.PhysicalSettings{ThetaStar: 6, DS: 8})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, name := range []string{"thetaE", "muRel", "M", "piRel", "DL"} {
		q := p.Get(name)
		fmt.Printf("%s = %.6g %s\n", q.Name, q.Median, q.Unit)
	}
	// Output:
	// thetaE = 1.2 mas
	// muRel = 14.61 mas/yr
	// M = 1.4735 Msun
	// piRel = 0.12 mas
	// DL = 4.08163 kpc
}
