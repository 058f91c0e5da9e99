package fit

import (
	"math"
	"math/rand/v2"
	"testing"
)

// ar1 returns chains of the AR(1) process x_t = φ x_{t−1} + √(1−φ²) ε_t started
// in its stationary N(0, 1) distribution.
func ar1(r *rand.Rand, phi float64, chains, n int) [][]float64 {
	out := make([][]float64, chains)
	sd := math.Sqrt(1 - phi*phi)
	for k := range out {
		x := make([]float64, n)
		x[0] = r.NormFloat64()
		for i := 1; i < n; i++ {
			x[i] = phi*x[i-1] + sd*r.NormFloat64()
		}
		out[k] = x
	}
	return out
}

func TestIntegratedTimeAR1(t *testing.T) {
	r := rand.New(rand.NewPCG(42, 1))
	phis, chains := []float64{0, 0.5, 0.9, 0.99}, 16
	if testing.Short() {
		phis, chains = []float64{0, 0.5, 0.9}, 8
	}
	for _, phi := range phis {
		// Exact τ_int of AR(1): ρ(t) = φ^|t|, so τ = 1 + 2φ/(1−φ) = (1+φ)/(1−φ)
		// (common practice; follows from the geometric series).
		want := (1 + phi) / (1 - phi)
		n := max(20000, int(2000*want))
		e := IntegratedTime(ar1(r, phi, chains, n), 0)
		// Tolerance: 4 of Sokal's standard errors plus the O(τ/n) bias of
		// subtracting each chain's own mean.
		tol := 4*e.RelErr*want + 2*want*want/float64(n)
		if !e.Settled || math.Abs(e.Tau-want) > tol {
			t.Errorf("φ = %v: τ = %.4g (window %d, settled %v), want %.4g ± %.2g", phi, e.Tau, e.Window, e.Settled, want, tol)
		}
	}
}

func TestIntegratedTimeEdges(t *testing.T) {
	if e := IntegratedTime([][]float64{{1, 1, 1, 1}}, 0); !math.IsNaN(e.Tau) {
		t.Errorf("constant chain: τ = %v, want NaN", e.Tau)
	}
	if e := IntegratedTime([][]float64{{1}}, 0); !math.IsNaN(e.Tau) {
		t.Errorf("one sample: τ = %v, want NaN", e.Tau)
	}
	// A short, strongly correlated chain underestimates τ (subtracting the chain
	// mean removes the slow drift), but never so much that the chain would pass
	// the 50τ length rule of Diagnose.
	r := rand.New(rand.NewPCG(1, 2))
	if e := IntegratedTime(ar1(r, 0.999, 2, 200), 0); e.Settled && 200 >= 50*e.Tau {
		t.Errorf("200 steps of a τ = 1999 process look long enough (τ = %v)", e.Tau)
	}
	defer func() {
		if recover() == nil {
			t.Error("chains of different lengths did not panic")
		}
	}()
	IntegratedTime([][]float64{{1, 2, 3}, {1, 2}}, 0)
}

func TestSplitRHat(t *testing.T) {
	r := rand.New(rand.NewPCG(9, 9))
	same := ar1(r, 0.5, 8, 2000)
	if rh := SplitRHat(same); !(rh < 1.01) {
		t.Errorf("chains of one stationary process: R̂ = %v, want < 1.01 (Vehtari et al. 2021 threshold)", rh)
	}
	// Shift half the chains: they disagree, R̂ must flag it.
	shifted := ar1(r, 0.5, 8, 2000)
	for k := 0; k < 4; k++ {
		for i := range shifted[k] {
			shifted[k][i] += 1
		}
	}
	if rh := SplitRHat(shifted); !(rh > 1.1) {
		t.Errorf("chains with different means: R̂ = %v, want > 1.1", rh)
	}
	// Same location, different scale: only the folded R̂ sees it.
	scaled := ar1(r, 0, 8, 2000)
	for k := 0; k < 4; k++ {
		for i := range scaled[k] {
			scaled[k][i] *= 3
		}
	}
	if rh := SplitRHat(scaled); !(rh > 1.05) {
		t.Errorf("chains with different scales: R̂ = %v, want > 1.05", rh)
	}
	// A trend within each chain is caught by the split.
	trend := ar1(r, 0, 4, 2000)
	for k := range trend {
		for i := range trend[k] {
			trend[k][i] += 3 * float64(i) / 2000
		}
	}
	if rh := SplitRHat(trend); !(rh > 1.1) {
		t.Errorf("trending chains: R̂ = %v, want > 1.1", rh)
	}
	if rh := SplitRHat([][]float64{{1, 2, 3}}); !math.IsNaN(rh) {
		t.Errorf("3 draws: R̂ = %v, want NaN", rh)
	}
}

// BenchmarkIntegratedTime compares IntegratedTime (direct sum for short
// windows, FFT for long ones) with the textbook direct sum over lags as
// baseline, for a short (τ = 19) and a long (τ = 399) autocorrelation.
func BenchmarkIntegratedTime(b *testing.B) {
	r := rand.New(rand.NewPCG(1, 1))
	for _, c := range []struct {
		name string
		phi  float64
	}{{"tau19", 0.9}, {"tau399", 0.995}} {
		ch := ar1(r, c.phi, 16, 20000)
		b.Run(c.name+"/ours", func(b *testing.B) {
			for b.Loop() {
				IntegratedTime(ch, 0)
			}
		})
		b.Run(c.name+"/textbook-direct", func(b *testing.B) {
			for b.Loop() {
				directTau(ch, SokalWindow)
			}
		})
	}
}

// directTau is the textbook estimator without FFT, a baseline for the benchmark
// and a cross-check of the FFT autocovariance.
func directTau(chains [][]float64, c float64) float64 {
	n := len(chains[0])
	means := make([]float64, len(chains))
	for k, x := range chains {
		for _, v := range x {
			means[k] += v
		}
		means[k] /= float64(n)
	}
	acov := func(t int) float64 {
		s := 0.0
		for k, x := range chains {
			for i := 0; i+t < n; i++ {
				s += (x[i] - means[k]) * (x[i+t] - means[k])
			}
		}
		return s
	}
	c0 := acov(0)
	tau := 1.0
	for m := 1; m < n; m++ {
		tau += 2 * acov(m) / c0
		if float64(m) >= c*tau {
			return tau
		}
	}
	return tau
}

func TestIntegratedTimeMatchesDirect(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 5))
	// φ = 0.8 settles within the direct-sum lags; φ = 0.995 (τ ≈ 400) needs
	// the FFT path.
	for _, phi := range []float64{0.8, 0.995} {
		ch := ar1(r, phi, 4, 30000)
		got, want := IntegratedTime(ch, 0).Tau, directTau(ch, SokalWindow)
		var w acfWork
		_, direct := w.directTime(ch, SokalWindow, 8*16)
		if math.Abs(got-want) > 1e-9*want {
			t.Errorf("φ = %v (direct path %v): τ = %.15g, textbook direct sum %.15g", phi, direct, got, want)
		}
		if direct != (phi == 0.8) {
			t.Errorf("φ = %v: direct path taken %v", phi, direct)
		}
	}
}
