package fit_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/floats/scalar"
	"gonum.org/v1/gonum/mat"

	"lensbook/fit"
)

// qrFlux is the general-purpose reference: weighted least squares by gonum's QR
// on the weighted design matrix (rows √w·[a, 1], right side √w·f). With
// fixedFb it fits the one column √w·a to √w·(f − fb).
func qrFlux(a, f, w []float64, fixedFb *float64) (fs, fb float64) {
	n := len(a)
	cols := 2
	if fixedFb != nil {
		cols = 1
	}
	X := mat.NewDense(n, cols, nil)
	y := mat.NewDense(n, 1, nil)
	for i := range a {
		sw := math.Sqrt(w[i])
		X.Set(i, 0, sw*a[i])
		if fixedFb == nil {
			X.Set(i, 1, sw)
			y.Set(i, 0, sw*f[i])
		} else {
			y.Set(i, 0, sw*(f[i]-*fixedFb))
		}
	}
	var qr mat.QR
	qr.Factorize(X)
	var b mat.Dense
	if err := qr.SolveTo(&b, false, y); err != nil {
		panic(err)
	}
	if fixedFb != nil {
		return b.At(0, 0), *fixedFb
	}
	return b.At(0, 0), b.At(1, 0)
}

func chi2Of(a, f, w []float64, fs, fb float64) float64 {
	c := 0.0
	for i := range a {
		r := f[i] - fs*a[i] - fb
		c += w[i] * r * r
	}
	return c
}

func randomLightCurve(r *rand.Rand, n int, fs, fb float64) (a, f, w []float64) {
	a, f, w = make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range a {
		a[i] = 1 + 20*math.Pow(r.Float64(), 4) // magnifications 1…21, mostly low
		sig := 0.5 + r.Float64()
		w[i] = 1 / (sig * sig)
		f[i] = fs*a[i] + fb + sig*r.NormFloat64()
	}
	return
}

func TestSolveFluxMatchesGonumQR(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	for trial := 0; trial < 50; trial++ {
		n := 3 + r.IntN(500)
		a, f, w := randomLightCurve(r, n, 100*r.Float64(), 200*(r.Float64()-0.5))
		fs, fb, chi2, ok := fit.SolveFlux(a, f, w, fit.Blend{})
		wfs, wfb := qrFlux(a, f, w, nil)
		if !ok || !scalar.EqualWithinAbsOrRel(fs, wfs, 1e-9, 1e-9) || !scalar.EqualWithinAbsOrRel(fb, wfb, 1e-9, 1e-9) {
			t.Fatalf("trial %d: got fs=%v fb=%v, gonum QR fs=%v fb=%v", trial, fs, fb, wfs, wfb)
		}
		if want := chi2Of(a, f, w, wfs, wfb); !scalar.EqualWithinRel(chi2, want, 1e-10) {
			t.Fatalf("trial %d: chi2 %v, want %v", trial, chi2, want)
		}
		// fixed blend
		fix := 10 * r.NormFloat64()
		fs, fb, _, _ = fit.SolveFlux(a, f, w, fit.Blend{Mode: fit.BlendFixed, Fb: fix})
		wfs, _ = qrFlux(a, f, w, &fix)
		if fb != fix || !scalar.EqualWithinAbsOrRel(fs, wfs, 1e-9, 1e-9) {
			t.Fatalf("trial %d fixed: got fs=%v fb=%v, want fs=%v fb=%v", trial, fs, fb, wfs, fix)
		}
	}
}

// The non-negative blend: when the free solution has fb < 0, the constrained
// optimum must have fb = 0 and χ² no larger than at any feasible (fs, fb) on a
// brute-force grid around it.
func TestSolveFluxNonNegativeBlend(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	a, f, w := randomLightCurve(r, 200, 50, -30) // negative true blend
	_, fbFree, _, _ := fit.SolveFlux(a, f, w, fit.Blend{})
	if fbFree >= 0 {
		t.Fatalf("setup: free blend %v should be negative", fbFree)
	}
	fs, fb, chi2, ok := fit.SolveFlux(a, f, w, fit.Blend{Mode: fit.BlendNonNegative})
	if !ok || fb != 0 {
		t.Fatalf("fb = %v, want 0", fb)
	}
	for dfs := -2.0; dfs <= 2; dfs += 0.05 {
		for fbt := 0.0; fbt <= 5; fbt += 0.05 {
			if c := chi2Of(a, f, w, fs+dfs, fbt); c < chi2-1e-9*chi2 {
				t.Fatalf("feasible (fs=%v, fb=%v) has χ²=%v < %v", fs+dfs, fbt, c, chi2)
			}
		}
	}
	// a positive free blend is left alone
	a, f, w = randomLightCurve(r, 200, 50, 30)
	fs1, fb1, _, _ := fit.SolveFlux(a, f, w, fit.Blend{})
	fs2, fb2, _, _ := fit.SolveFlux(a, f, w, fit.Blend{Mode: fit.BlendNonNegative})
	if fs1 != fs2 || fb1 != fb2 {
		t.Fatalf("non-negative mode changed a positive blend: (%v,%v) vs (%v,%v)", fs1, fb1, fs2, fb2)
	}
}

func TestSolveFluxDegenerate(t *testing.T) {
	a := []float64{1, 1, 1, 1}
	f := []float64{10, 11, 9, 10}
	w := []float64{1, 1, 1, 1}
	fs, fb, chi2, ok := fit.SolveFlux(a, f, w, fit.Blend{})
	if ok || fs != 0 || fb != 10 || chi2 != 2 {
		t.Fatalf("flat model: got fs=%v fb=%v chi2=%v ok=%v, want 0, 10, 2, false", fs, fb, chi2, ok)
	}
}

func TestSolveFluxPanicsOnLengthMismatch(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Fatal("no panic")
		}
	}()
	fit.SolveFlux([]float64{1}, []float64{1, 2}, []float64{1}, fit.Blend{})
}
