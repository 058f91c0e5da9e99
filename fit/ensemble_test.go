package fit

import (
	"context"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// mcEstimate is the chain average of f over the kept samples of every walker,
// with its Monte-Carlo standard error √(Var f · τ_f / N): τ_f is the integrated
// autocorrelation time of f itself (IntegratedTime over walkers) and N the
// number of kept samples. This is the error model of every moment check below.
func mcEstimate(c *Chain, f func(x []float64) float64) (mean, se float64) {
	burn := c.Diagnostics.Burn
	n := c.Stored - burn
	series := make([][]float64, c.Walkers)
	sum, sum2 := 0.0, 0.0
	for k := range c.Walkers {
		s := make([]float64, n)
		for i := range n {
			v := f(c.At(burn+i, k))
			s[i] = v
			sum += v
		}
		series[k] = s
	}
	N := float64(n * c.Walkers)
	mean = sum / N
	for _, s := range series {
		for _, v := range s {
			sum2 += (v - mean) * (v - mean)
		}
	}
	tau := IntegratedTime(series, 0).Tau
	return mean, math.Sqrt(sum2 / N * tau / N)
}

func expectMC(t *testing.T, name string, got, se, want, nsig float64) {
	t.Helper()
	if !(math.Abs(got-want) <= nsig*se) {
		t.Errorf("%s = %.6g ± %.2g (MC), want %.6g: off by %.1fσ", name, got, se, want, math.Abs(got-want)/se)
	}
}

// gauss10 is a correlated 10-D Gaussian: μ_i = i − 4.5, σ_i = 1 + i/3,
// correlation 0.6^|i−j| (an AR(1) correlation matrix, positive definite).
// Its moments are exact by construction.
func gauss10() (mu []float64, cov *mat.SymDense, logp LogDensity) {
	const d = 10
	mu = make([]float64, d)
	cov = mat.NewSymDense(d, nil)
	for i := range d {
		mu[i] = float64(i) - 4.5
		for j := i; j < d; j++ {
			si, sj := 1+float64(i)/3, 1+float64(j)/3
			cov.SetSym(i, j, si*sj*math.Pow(0.6, float64(j-i)))
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(cov) {
		panic("gauss10: covariance not positive definite")
	}
	var prec mat.SymDense
	if err := ch.InverseTo(&prec); err != nil {
		panic(err)
	}
	p := mat.DenseCopyOf(&prec).RawMatrix().Data
	logp = func(x []float64) float64 {
		var dx [d]float64
		for i := range d {
			dx[i] = x[i] - mu[i]
		}
		q := 0.0
		for i := range d {
			r := 0.0
			for j := range d {
				r += p[i*d+j] * dx[j]
			}
			q += dx[i] * r
		}
		return -q / 2
	}
	return mu, cov, logp
}

func TestEnsembleGaussian10D(t *testing.T) {
	mu, cov, logp := gauss10()
	steps, band := 20000, 9
	if testing.Short() {
		// Shorter chain; covariances checked on the first two off-diagonals only.
		steps, band = 3000, 2
	}
	if testing.Short() && runtime.GOOS == "js" {
		steps = 1500 // wasm runs several times slower; the native run is the long check
	}
	start := Start{X: make([]float64, 10), Spread: slices.Repeat([]float64{0.1}, 10)}
	c, err := RunEnsemble(context.Background(), EnsembleSettings{Walkers: 40, Steps: steps, Seed: 1}, Target{LogDensity: logp}, start, nil)
	if err != nil {
		t.Fatal(err)
	}
	if a := c.Acceptance(); a < 0.1 || a > 0.7 {
		t.Errorf("acceptance %.3f outside the usual 0.1–0.7 of the stretch move", a)
	}
	t.Logf("τ (steps) = %.3g, burn = %d, ESS = %.0f, R̂ = %.4f, converged %v %v", c.Diagnostics.stepTau(), c.Diagnostics.BurnSteps, c.Diagnostics.ESS, c.Diagnostics.RHat, c.Diagnostics.Converged, c.Diagnostics.Reasons)
	// Means and every covariance entry: exact by construction, 4.5σ MC bands
	// (up to 65 checks; a 4.5σ band fails by chance with probability ~7e-6 each).
	for i := range 10 {
		m, se := mcEstimate(c, func(x []float64) float64 { return x[i] })
		expectMC(t, "mean", m, se, mu[i], 4.5)
		for j := i; j < min(10, i+band+1); j++ {
			cij, se := mcEstimate(c, func(x []float64) float64 { return (x[i] - mu[i]) * (x[j] - mu[j]) })
			expectMC(t, "cov", cij, se, cov.At(i, j), 4.5)
		}
	}
	if !testing.Short() && !c.Diagnostics.Converged {
		t.Errorf("a %d-step run on a 10-D Gaussian should converge: %v", steps, c.Diagnostics.Reasons)
	}
}

// rosenbrock is the density of references.md §11 [GW10]:
// π ∝ exp(−[100(x₂ − x₁²)² + (1 − x₁)²]/20).
func rosenbrock(x []float64) float64 {
	a := x[1] - x[0]*x[0]
	b := 1 - x[0]
	return -(100*a*a + b*b) / 20
}

func TestEnsembleRosenbrock(t *testing.T) {
	steps, thin := 500000, 25
	if testing.Short() {
		steps, thin = 30000, 5
	}
	if testing.Short() && runtime.GOOS == "js" {
		// τ ≈ 5000 steps here: a chain short enough for wasm is far too short
		// for its MC error model (τ estimates from < 10τ are biased low).
		t.Skip("Rosenbrock needs ≥ 30,000 steps (τ ≈ 5000); run natively")
	}
	start := Start{X: []float64{1, 1}, Spread: []float64{0.1, 0.1}}
	c, err := RunEnsemble(context.Background(), EnsembleSettings{Walkers: 64, Steps: steps, Thin: thin, Seed: 7}, Target{LogDensity: rosenbrock}, start, nil)
	if err != nil {
		t.Fatal(err)
	}
	d := c.Diagnostics
	t.Logf("τ (steps) = %.4g, ESS = %.0f, R̂ = %.4f, acceptance %.3f", d.stepTau(), d.ESS, d.RHat, d.Acceptance)
	// Exact moments, references.md §11: x₁ ~ N(1, 10), x₂|x₁ ~ N(x₁², 0.1).
	m1, se := mcEstimate(c, func(x []float64) float64 { return x[0] })
	expectMC(t, "E[x1]", m1, se, 1, 4)
	m2, se := mcEstimate(c, func(x []float64) float64 { return x[1] })
	expectMC(t, "E[x2]", m2, se, 11, 4)
	v1, se := mcEstimate(c, func(x []float64) float64 { return (x[0] - 1) * (x[0] - 1) })
	expectMC(t, "Var x1", v1, se, 10, 4)
	v2, se := mcEstimate(c, func(x []float64) float64 { return (x[1] - 11) * (x[1] - 11) })
	expectMC(t, "Var x2", v2, se, 240.1, 4)
	cv, se := mcEstimate(c, func(x []float64) float64 { return (x[0] - 1) * (x[1] - 11) })
	expectMC(t, "Cov", cv, se, 20, 4)
}

func TestStretchZMoments(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	const n = 1000000
	z := make([]float64, n)
	s, sl := 0.0, 0.0
	for i := range z {
		z[i] = StretchZ(r, 2)
		if z[i] < 0.5 || z[i] > 2 {
			t.Fatalf("z = %v outside [1/a, a]", z[i])
		}
		s += z[i]
		sl += math.Log(z[i])
	}
	mean, meanLog := s/n, sl/n
	v, vl := 0.0, 0.0
	for _, x := range z {
		v += (x - mean) * (x - mean)
		vl += (math.Log(x) - meanLog) * (math.Log(x) - meanLog)
	}
	// references.md §11 [GW10] check values for a = 2: E[z] = 7/6,
	// E[ln z] = 3 ln 2 − 2, median 9/8. 5σ bands from the sample variance.
	expectMC(t, "E[z]", mean, math.Sqrt(v/n/n), 7.0/6, 5)
	expectMC(t, "E[ln z]", meanLog, math.Sqrt(vl/n/n), 3*math.Ln2-2, 5)
	slices.Sort(z)
	// The sample median's standard error is 1/(2 g(m) √n) with the density
	// g(m) = 1/(C√m), C = 2(√a − 1/√a) = √2 at a = 2.
	med := z[n/2]
	expectMC(t, "median z", med, math.Sqrt2*math.Sqrt(1.125)/2/math.Sqrt(n), 1.125, 5)
}

func TestEnsembleDeterministic(t *testing.T) {
	_, _, logp := gauss10()
	forkable := Target{LogDensity: logp}
	forkable.Fork = func() Target { return forkable }
	start := Start{X: make([]float64, 10), Spread: slices.Repeat([]float64{0.5}, 10)}
	run := func(seed uint64, conc int) *Chain {
		c, err := RunEnsemble(context.Background(), EnsembleSettings{Walkers: 24, Steps: 300, Seed: seed, Concurrent: conc}, forkable, start, nil)
		if err != nil {
			t.Fatal(err)
		}
		return c
	}
	a, b, par := run(11, 1), run(11, 1), run(11, 3)
	same := func(x, y []float64) bool {
		if len(x) != len(y) {
			return false
		}
		for i := range x {
			if math.Float64bits(x[i]) != math.Float64bits(y[i]) {
				return false
			}
		}
		return true
	}
	if !same(a.X, b.X) || !same(a.LogP, b.LogP) {
		t.Error("same seed gave different chains")
	}
	if !same(a.X, par.X) || !same(a.LogP, par.LogP) || !slices.Equal(a.Accepted, par.Accepted) {
		t.Error("3 goroutines gave a different chain than 1: streams depend on scheduling")
	}
	if same(a.X, run(12, 1).X) {
		t.Error("different seeds gave identical chains")
	}
	// Modes draw from different streams.
	cs, err := RunEnsembles(context.Background(), EnsembleSettings{Walkers: 24, Steps: 50, Seed: 11}, forkable, []Start{start, start}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if same(cs[0].X, cs[1].X) {
		t.Error("two modes with the same start drew identical chains")
	}
}

// TestDiagnosticsNameParameters: an unconverged chain's reasons name each
// parameter as Start.Names gives it (the page showed "parameter 0", "parameter
// 1", … to astronomers), and fall back to "parameter k" without names.
func TestDiagnosticsNameParameters(t *testing.T) {
	for _, names := range [][]string{{"x", "y"}, nil} {
		c, err := RunEnsemble(context.Background(), EnsembleSettings{Steps: 60, Seed: 3}, Target{LogDensity: rosenbrock},
			Start{Names: names, X: []float64{1, 1}, Spread: []float64{0.1, 0.1}}, nil)
		if err != nil {
			t.Fatal(err)
		}
		why := strings.Join(c.Diagnostics.Reasons, "; ")
		if c.Diagnostics.Converged || why == "" {
			t.Fatalf("a 60-step chain converged: %q", why)
		}
		want, not := "x: ", "parameter 0"
		if names == nil {
			want, not = "parameter 0: ", "x: "
		}
		if !strings.Contains(why, want) || strings.Contains(why, not) {
			t.Errorf("names %q: reasons %q, want %q and no %q", names, why, want, not)
		}
	}
}

func TestEnsembleCancel(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var seen []Progress
	c, err := RunEnsemble(ctx, EnsembleSettings{Steps: 10000, ProgressEvery: 100, Seed: 2}, Target{LogDensity: rosenbrock},
		Start{X: []float64{1, 1}, Spread: []float64{0.1, 0.1}}, func(p Progress) {
			seen = append(seen, p)
			if p.Step == 500 {
				cancel()
			}
		})
	if err != nil {
		t.Fatal(err)
	}
	if c.Status != ChainCancelled || c.Steps != 500 || c.Stored != 500 {
		t.Fatalf("status %v after %d steps (%d stored), want cancelled after 500", c.Status, c.Steps, c.Stored)
	}
	if len(c.X) != 500*c.Walkers*2 || c.Diagnostics.Converged {
		t.Errorf("partial chain has %d values, converged %v", len(c.X), c.Diagnostics.Converged)
	}
	if !strings.Contains(strings.Join(c.Diagnostics.Reasons, ";"), "cancelled") {
		t.Errorf("reasons %q do not say the run was cancelled", c.Diagnostics.Reasons)
	}
	if len(seen) < 5 || seen[0].Step != 100 || !(seen[0].Acceptance > 0) {
		t.Errorf("progress reports %+v", seen)
	}
}

func TestEnsembleTargetESS(t *testing.T) {
	c, err := RunEnsemble(context.Background(), EnsembleSettings{Steps: 100000, TargetESS: 2000, Seed: 5, ProgressEvery: 100},
		Target{LogDensity: func(x []float64) float64 { return -(x[0]*x[0] + x[1]*x[1]) / 2 }},
		Start{X: []float64{0, 0}, Spread: []float64{1, 1}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if c.Status != ChainTargetReached || c.Steps >= 100000 {
		t.Fatalf("status %v after %d steps", c.Status, c.Steps)
	}
	for p, e := range c.Diagnostics.ESS {
		if e < 2000*0.9 { // the final estimate may differ slightly from the check that stopped the run
			t.Errorf("parameter %d: ESS %.0f", p, e)
		}
	}
}

func TestEnsembleBadInput(t *testing.T) {
	ok := Target{LogDensity: rosenbrock}
	st := Start{X: []float64{1, 1}, Spread: []float64{0.1, 0.1}}
	cases := []struct {
		name string
		set  EnsembleSettings
		t    Target
		st   Start
		want string
	}{
		{"odd walkers", EnsembleSettings{Walkers: 7}, ok, st, "walkers"},
		{"few walkers", EnsembleSettings{Walkers: 4}, ok, st, "walkers"},
		{"scale", EnsembleSettings{Scale: 0.5}, ok, st, "scale"},
		{"no density", EnsembleSettings{}, Target{}, st, "no density"},
		{"fork", EnsembleSettings{Concurrent: 2}, ok, st, "Fork"},
		{"spread", EnsembleSettings{}, ok, Start{X: []float64{1, 1}, Spread: []float64{0.1, 0}}, "spread"},
		{"nan start", EnsembleSettings{}, ok, Start{X: []float64{math.NaN(), 1}, Spread: []float64{0.1, 0.1}}, "not finite"},
		{"nowhere finite", EnsembleSettings{}, Target{LogDensity: func([]float64) float64 { return math.Inf(-1) }}, st, "no finite density"},
	}
	for _, c := range cases {
		_, err := RunEnsemble(context.Background(), c.set, c.t, c.st, nil)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want one mentioning %q", c.name, err, c.want)
		}
	}
}

// TestEnsembleMemory stores 10⁶ samples of an 11-parameter model (the size of a
// binary-lens model with parallax and orbital motion) and checks the heap: the
// peak of HeapAlloc sampled at every progress report and at the end (garbage
// included) must stay under the 512 MB budget, and the chain itself, measured
// as live heap after a collection, must be close to its 8·(11+2)·10⁶ B.
func TestEnsembleMemory(t *testing.T) {
	if testing.Short() {
		t.Skip("stores 10⁶ samples")
	}
	runtime.GC()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	base := ms.HeapAlloc
	peak := uint64(0)
	sample := func() {
		runtime.ReadMemStats(&ms)
		peak = max(peak, ms.HeapAlloc-base)
	}
	const dim, walkers = 11, 40
	c, err := RunEnsemble(context.Background(), EnsembleSettings{Walkers: walkers, Steps: 1000000 / walkers, Seed: 1, ProgressEvery: 500},
		Target{Posterior: func(x []float64) (float64, float64) {
			s := 0.0
			for _, v := range x {
				s += v * v
			}
			return -s / 2, s
		}}, Start{X: make([]float64, dim), Spread: slices.Repeat([]float64{1}, dim)}, func(Progress) { sample() })
	if err != nil {
		t.Fatal(err)
	}
	sample()
	runtime.GC()
	runtime.ReadMemStats(&ms)
	live := float64(ms.HeapAlloc-base) / (1 << 20)
	n := c.Stored * c.Walkers
	t.Logf("%d samples × %d parameters: peak heap %.0f MB, live after GC %.0f MB (chain data %.0f MB)", n, dim,
		float64(peak)/(1<<20), live, float64(8*(dim+2)*n)/(1<<20))
	if n != 1000000 {
		t.Fatalf("stored %d samples", n)
	}
	if float64(peak)/(1<<20) > 512 {
		t.Errorf("peak heap %.0f MB for 10⁶ samples, budget 512 MB", float64(peak)/(1<<20))
	}
	runtime.KeepAlive(c)
}

func TestEnsembleStartCov(t *testing.T) {
	// Walkers drawn from N(X, Cov): the initial ensemble's correlation follows
	// Cov (0.99 here), within the sampling error of 400 walkers (~0.001).
	cov := [][]float64{{1, 0.99}, {0.99, 1}}
	c, err := RunEnsemble(context.Background(), EnsembleSettings{Walkers: 400, Steps: 1, Seed: 3},
		Target{LogDensity: func([]float64) float64 { return 0 }}, Start{X: []float64{5, -5}, Spread: []float64{1, 1}, Cov: cov}, nil)
	if err != nil {
		t.Fatal(err)
	}
	// Step 1 moved some walkers; the stretch move keeps them on lines through
	// pairs, so the ensemble stays close to the initial correlation.
	var sxy, sxx, syy, mx, my float64
	for k := range 400 {
		x := c.At(0, k)
		mx += x[0] / 400
		my += x[1] / 400
	}
	for k := range 400 {
		x := c.At(0, k)
		sxy += (x[0] - mx) * (x[1] - my)
		sxx += (x[0] - mx) * (x[0] - mx)
		syy += (x[1] - my) * (x[1] - my)
	}
	if r := sxy / math.Sqrt(sxx*syy); r < 0.97 || math.Abs(mx-5) > 0.3 || math.Abs(my+5) > 0.3 {
		t.Errorf("initial ensemble correlation %v, centre (%v, %v)", r, mx, my)
	}
	_, err = RunEnsemble(context.Background(), EnsembleSettings{}, Target{LogDensity: rosenbrock},
		Start{X: []float64{1, 1}, Spread: []float64{1, 1}, Cov: [][]float64{{1, 2}, {2, 1}}}, nil)
	if err == nil || !strings.Contains(err.Error(), "positive definite") {
		t.Errorf("indefinite covariance: %v", err)
	}
}
