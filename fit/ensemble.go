package fit

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"sync"
	"time"

	"gonum.org/v1/gonum/mat"
)

// LogDensity is an unnormalised log probability density: ln π(x) up to an
// additive constant, −Inf outside the support. It must not keep or modify x.
type LogDensity func(x []float64) float64

// Target is what the ensemble sampler explores. Exactly one of LogDensity and
// Posterior is used: Posterior when it is non-nil.
type Target struct {
	// LogDensity is ln π(x) up to a constant.
	LogDensity LogDensity
	// Posterior, when non-nil, returns ln π(x) and the χ² of x; the χ² is stored
	// with every sample so that the best-χ² sample and the evidence proxies of
	// Summary need no second evaluation. Return chi2 = NaN when it is unknown.
	Posterior func(x []float64) (logp, chi2 float64)
	// Fork, when non-nil, returns an independent copy of the target for another
	// goroutine (scratch buffers of a likelihood are not safe for concurrent use).
	// EnsembleSettings.Concurrent > 1 requires it; return the receiver itself
	// when the functions are already safe for concurrent use.
	Fork func() Target
}

func (t Target) eval(x []float64) (float64, float64) {
	if t.Posterior != nil {
		return t.Posterior(x)
	}
	return t.LogDensity(x), math.NaN()
}

// EnsembleSettings configure RunEnsemble. Zero values mean the documented defaults,
// so the settings round-trip through JSON with the notebook.
type EnsembleSettings struct {
	// Walkers is the ensemble size, even and at least 2·dim+2 so that each half
	// spans the parameter space; 0 means max(2·dim+2, 24) rounded up to even.
	Walkers int
	// Steps is the maximum number of ensemble steps (each moves every walker once);
	// 0 means 5000.
	Steps int
	// Scale is the stretch-move parameter a > 1 (Goodman & Weare 2010 recommend 2);
	// 0 means 2.
	Scale float64
	// Thin keeps every Thin-th step; 0 means 1 (keep all).
	Thin int
	// Seed fixes every random draw: walker k of mode m draws from a PCG stream
	// derived from (Seed, m, k) only, so results do not depend on scheduling.
	Seed uint64
	// Concurrent is the number of goroutines that update the walkers of a half
	// ensemble in parallel; 0 or 1 means serial. Needs Target.Fork when > 1. In a
	// browser (one wasm thread) it gains nothing.
	Concurrent int
	// ProgressEvery is the number of steps between progress reports and early-stop
	// checks; 0 means 250.
	ProgressEvery int
	// TargetESS stops the run early (status ChainTargetReached) once every
	// parameter has at least this many effective samples after burn-in and the
	// kept chain is at least MinTauMultiple·τ long; 0 means run all Steps.
	TargetESS float64
	// MinTauMultiple is the chain length, in autocorrelation times after
	// burn-in, below which a chain is reported as not converged; 0 means 50
	// (common practice for ensemble samplers: τ estimates from shorter chains
	// are biased low).
	MinTauMultiple float64
	// BurnTaus is the burn-in in units of the largest autocorrelation time;
	// 0 means 3 (common practice: "a few τ").
	BurnTaus float64
	// MaxRHat is the split-R̂ above which a chain is not converged; 0 means 1.01
	// (Vehtari et al. 2021, Bayesian Analysis 16, 667).
	MaxRHat float64
}

func (s EnsembleSettings) withDefaults(dim int) EnsembleSettings {
	if s.Walkers == 0 {
		s.Walkers = max(2*dim+2, 24)
		s.Walkers += s.Walkers % 2
	}
	if s.Steps == 0 {
		s.Steps = 5000
	}
	if s.Scale == 0 {
		s.Scale = 2
	}
	if s.Thin == 0 {
		s.Thin = 1
	}
	if s.Concurrent == 0 {
		s.Concurrent = 1
	}
	if s.ProgressEvery == 0 {
		s.ProgressEvery = 250
	}
	if s.MinTauMultiple == 0 {
		s.MinTauMultiple = 50
	}
	if s.BurnTaus == 0 {
		s.BurnTaus = 3
	}
	if s.MaxRHat == 0 {
		s.MaxRHat = 1.01
	}
	return s
}

func (s EnsembleSettings) validate(dim int) error {
	bad := func(f string, a ...any) error { return fmt.Errorf("%w: %s", ErrEnsemble, fmt.Sprintf(f, a...)) }
	switch {
	case dim < 1:
		return bad("no free parameters")
	case s.Walkers%2 != 0 || s.Walkers < 2*dim+2:
		return bad("walkers = %d: need an even number ≥ 2·dim+2 = %d", s.Walkers, 2*dim+2)
	case s.Steps < 1:
		return bad("steps = %d: must be ≥ 1", s.Steps)
	case !(s.Scale > 1) || math.IsInf(s.Scale, 0):
		return bad("scale a = %v: must be finite and > 1", s.Scale)
	case s.Thin < 1:
		return bad("thin = %d: must be ≥ 1", s.Thin)
	case s.Concurrent < 1:
		return bad("concurrent = %d: must be ≥ 1", s.Concurrent)
	case s.ProgressEvery < 1:
		return bad("progress interval = %d: must be ≥ 1", s.ProgressEvery)
	case s.TargetESS < 0 || math.IsNaN(s.TargetESS):
		return bad("target ESS = %v: must be ≥ 0", s.TargetESS)
	case !(s.MinTauMultiple > 0) || !(s.BurnTaus >= 0) || !(s.MaxRHat > 1):
		return bad("convergence thresholds: τ multiple %v, burn %vτ, R̂ %v", s.MinTauMultiple, s.BurnTaus, s.MaxRHat)
	}
	return nil
}

// ErrEnsemble reports unusable sampler settings or starting points.
var ErrEnsemble = errors.New("fit: ensemble sampler")

// Start is one mode's starting solution: walkers are drawn from a Gaussian ball
// centred on X with per-parameter standard deviations Spread (same units as X).
// A draw where the density is not finite is redrawn (up to 1000 times).
type Start struct {
	Name   string    // label of the mode (e.g. "close, u0>0")
	Names  []string  // parameter names for the diagnostics' messages (optional: "parameter k" otherwise)
	X      []float64 // centre of the initial ball
	Spread []float64 // 1σ of the ball per parameter, > 0
	// Cov, when non-nil, shapes the ball instead: walkers are drawn from
	// N(X, Cov) (a dim×dim symmetric positive-definite matrix, e.g. scaled from
	// an optimiser's covariance), so a strongly correlated mode starts filled
	// along its ridge. Spread must still be given; it is used only for checks.
	Cov [][]float64
}

// ChainStatus is how a sampler run ended. It says nothing about convergence:
// see Diagnostics.Converged for that.
type ChainStatus int

const (
	// ChainComplete means all requested steps were taken.
	ChainComplete ChainStatus = iota
	// ChainTargetReached means the run stopped early because TargetESS was reached.
	ChainTargetReached
	// ChainCancelled means the context was cancelled; the steps taken so far are kept.
	ChainCancelled
)

func (s ChainStatus) String() string {
	switch s {
	case ChainComplete:
		return "complete"
	case ChainTargetReached:
		return "target ESS reached"
	case ChainCancelled:
		return "cancelled"
	}
	return fmt.Sprintf("ChainStatus(%d)", int(s))
}

// Early reports whether the run stopped before taking every requested step.
func (s ChainStatus) Early() bool { return s != ChainComplete }

// Progress is reported to the caller while a chain runs.
type Progress struct {
	Mode       int       // index of the mode being sampled
	Step       int       // ensemble steps done
	Steps      int       // maximum number of steps
	Acceptance float64   // acceptance fraction over all walkers so far
	Tau        []float64 // running integrated autocorrelation time per parameter (steps); NaN while too short
	ESS        []float64 // running effective sample size per parameter after burn-in
}

// Chain is the stored output of one ensemble run (one mode).
//
// Samples are kept as float64: the memory of 10⁶ stored samples of a binary-lens
// model with 11 parameters is 8·(11+2)·10⁶ B ≈ 104 MB (position, ln π, χ²), well
// under the 512 MB budget, so nothing is gained by the rounding of float32 and
// exports stay bit-exact.
type Chain struct {
	Mode     string           // Start.Name
	Names    []string         // Start.Names
	Dim      int              // number of parameters
	Walkers  int              // ensemble size
	Thin     int              // stored every Thin-th step
	Steps    int              // ensemble steps taken
	Stored   int              // stored steps (Steps/Thin)
	X        []float64        // positions, index [(step·Walkers + walker)·Dim + param]
	LogP     []float64        // ln π, index [step·Walkers + walker]
	Chi2     []float64        // χ² of each sample (nil unless Target.Posterior was used)
	Accepted []int            // accepted moves per walker over all steps
	Rejected []int            // proposals with a non-finite density per walker (counted as rejections)
	Evals    int              // density evaluations including initialisation
	Seed     uint64           // Settings.Seed, repeated for the record
	Settings EnsembleSettings // settings with defaults filled in
	Status   ChainStatus
	Runtime  time.Duration // wall-clock time (not part of the reproducible output)

	// Diagnostics are computed when the run ends (see Diagnose).
	Diagnostics Diagnostics
}

// At returns the stored position of walker w at stored step i (aliases Chain.X).
func (c *Chain) At(i, w int) []float64 {
	o := (i*c.Walkers + w) * c.Dim
	return c.X[o : o+c.Dim : o+c.Dim]
}

// Series fills dst (len Stored−from) with parameter p of walker w from stored step from on.
func (c *Chain) Series(dst []float64, p, w, from int) []float64 {
	n := c.Stored - from
	if dst == nil {
		dst = make([]float64, n)
	}
	if len(dst) != n {
		panic("fit: Series destination length differs from the stored steps")
	}
	for i := range n {
		dst[i] = c.X[((from+i)*c.Walkers+w)*c.Dim+p]
	}
	return dst
}

// Acceptance is the acceptance fraction over all walkers and steps.
func (c *Chain) Acceptance() float64 {
	if c.Steps == 0 {
		return math.NaN()
	}
	n := 0
	for _, a := range c.Accepted {
		n += a
	}
	return float64(n) / float64(c.Steps*c.Walkers)
}

// StretchZ draws the stretch factor z of Goodman & Weare (2010, eq. 9):
// density g(z) ∝ 1/√z on [1/a, a], by the inverse CDF z = (1+(a−1)U)²/a
// (references.md §11 [GW10]).
func StretchZ(r *rand.Rand, a float64) float64 {
	u := r.Float64()
	v := 1 + (a-1)*u
	return v * v / a
}

// ensembleMix is the SplitMix64 finaliser (Steele, Lea & Flood 2014, OOPSLA),
// used to derive well-separated PCG seeds from (seed, mode, walker).
func ensembleMix(x uint64) uint64 {
	x += 0x9e3779b97f4a7c15
	x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9
	x = (x ^ (x >> 27)) * 0x94d049bb133111eb
	return x ^ (x >> 31)
}

// walkerRand returns walker k's private random stream for mode m.
func walkerRand(seed uint64, mode, k int) *rand.Rand {
	return rand.New(rand.NewPCG(ensembleMix(seed^ensembleMix(uint64(mode)+1)), ensembleMix(uint64(k)+0x51ed)))
}

// RunEnsembles samples each mode with its own independent ensemble (modes are
// never mixed: walkers of one mode never see another's). Mode m uses the
// streams of (Settings.Seed, m). A cancelled context stops the current mode and
// skips the rest; chains finished or partly run are returned.
func RunEnsembles(ctx context.Context, set EnsembleSettings, t Target, starts []Start, progress func(Progress)) ([]*Chain, error) {
	var out []*Chain
	for m, st := range starts {
		if ctx.Err() != nil && m > 0 {
			break
		}
		c, err := runEnsemble(ctx, set, t, st, m, progress)
		if err != nil {
			return out, fmt.Errorf("mode %d (%q): %w", m, st.Name, err)
		}
		out = append(out, c)
	}
	return out, nil
}

// RunEnsemble runs the affine-invariant ensemble sampler with the stretch move
// (Goodman & Weare 2010, Comm. App. Math. Comp. Sci. 5, 65) in its parallel
// form: the ensemble is split into two halves and each walker of one half is
// moved along the line through a walker drawn uniformly from the other half,
// Y = X_j + z(X_k − X_j), z ~ g(z) ∝ 1/√z on [1/a, a], accepted with probability
// min(1, z^{d−1} π(Y)/π(X_k)). Walkers of one half are independent given the
// other half, which is why the update can run on several goroutines and still
// give bit-identical results for the same seed.
//
// Cancelling ctx stops the run after the current step; the chain so far is
// returned with status ChainCancelled and no error. progress, when non-nil, is
// called every ProgressEvery steps from the calling goroutine.
func RunEnsemble(ctx context.Context, set EnsembleSettings, t Target, st Start, progress func(Progress)) (*Chain, error) {
	return runEnsemble(ctx, set, t, st, 0, progress)
}

func runEnsemble(ctx context.Context, set EnsembleSettings, t Target, st Start, mode int, progress func(Progress)) (*Chain, error) {
	began := time.Now()
	dim := len(st.X)
	set = set.withDefaults(dim)
	if err := set.validate(dim); err != nil {
		return nil, err
	}
	if t.LogDensity == nil && t.Posterior == nil {
		return nil, fmt.Errorf("%w: target has no density", ErrEnsemble)
	}
	if set.Concurrent > 1 && t.Fork == nil {
		return nil, fmt.Errorf("%w: concurrent = %d needs Target.Fork", ErrEnsemble, set.Concurrent)
	}
	if len(st.Spread) != dim {
		return nil, fmt.Errorf("%w: start %q has %d spreads for %d parameters", ErrEnsemble, st.Name, len(st.Spread), dim)
	}
	for i := range dim {
		if math.IsNaN(st.X[i]) || math.IsInf(st.X[i], 0) {
			return nil, fmt.Errorf("%w: start %q parameter %d = %v is not finite", ErrEnsemble, st.Name, i, st.X[i])
		}
		if !(st.Spread[i] > 0) || math.IsInf(st.Spread[i], 0) {
			return nil, fmt.Errorf("%w: start %q spread %d = %v must be finite and > 0", ErrEnsemble, st.Name, i, st.Spread[i])
		}
	}
	var chol *mat.TriDense
	if st.Cov != nil {
		sym := mat.NewSymDense(dim, nil)
		if len(st.Cov) != dim {
			return nil, fmt.Errorf("%w: start %q covariance has %d rows for %d parameters", ErrEnsemble, st.Name, len(st.Cov), dim)
		}
		for i, row := range st.Cov {
			if len(row) != dim {
				return nil, fmt.Errorf("%w: start %q covariance row %d has %d entries", ErrEnsemble, st.Name, i, len(row))
			}
			for j := i; j < dim; j++ {
				sym.SetSym(i, j, row[j])
			}
		}
		var ch mat.Cholesky
		if !ch.Factorize(sym) {
			return nil, fmt.Errorf("%w: start %q covariance is not positive definite", ErrEnsemble, st.Name)
		}
		chol = mat.NewTriDense(dim, mat.Lower, nil)
		ch.LTo(chol)
	}
	W := set.Walkers
	half := W / 2
	capSteps := set.Steps / set.Thin
	c := &Chain{
		Mode: st.Name, Names: st.Names, Dim: dim, Walkers: W, Thin: set.Thin,
		X:        make([]float64, 0, capSteps*W*dim),
		LogP:     make([]float64, 0, capSteps*W),
		Accepted: make([]int, W),
		Rejected: make([]int, W),
		Seed:     set.Seed,
		Settings: set,
	}
	if t.Posterior != nil {
		c.Chi2 = make([]float64, 0, capSteps*W)
	}

	// Per-goroutine targets and scratch.
	nw := set.Concurrent
	targets := make([]Target, nw)
	targets[0] = t
	for g := 1; g < nw; g++ {
		targets[g] = t.Fork()
	}
	rngs := make([]*rand.Rand, W)
	for k := range W {
		rngs[k] = walkerRand(set.Seed, mode, k)
	}
	pos := make([]float64, W*dim)
	lp := make([]float64, W)
	chi := make([]float64, W)
	evals := make([]int, W)

	// Initial ball, walker by walker from its own stream.
	initErr := make([]error, W)
	forWalkers(nw, 0, W, func(g, k int) {
		x := pos[k*dim : (k+1)*dim]
		r := rngs[k]
		for try := 0; try < 1000; try++ {
			if chol == nil {
				for i := range dim {
					x[i] = st.X[i] + st.Spread[i]*r.NormFloat64()
				}
			} else {
				z := make([]float64, dim)
				for i := range z {
					z[i] = r.NormFloat64()
				}
				for i := range dim {
					v := st.X[i]
					for j := 0; j <= i; j++ {
						v += chol.At(i, j) * z[j]
					}
					x[i] = v
				}
			}
			evals[k]++
			l, ch := targets[g].eval(x)
			if !math.IsNaN(l) && !math.IsInf(l, 0) {
				lp[k], chi[k] = l, ch
				return
			}
		}
		initErr[k] = fmt.Errorf("%w: start %q: walker %d found no finite density in 1000 draws of the initial ball", ErrEnsemble, st.Name, k)
	})
	for _, e := range initErr {
		if e != nil {
			return nil, e
		}
	}

	a := set.Scale
	scratch := make([][]float64, nw)
	for g := range nw {
		scratch[g] = make([]float64, dim)
	}
	move := func(g, k int, other int) {
		r := rngs[k]
		j := other + r.IntN(half)
		z := StretchZ(r, a)
		xk := pos[k*dim : (k+1)*dim]
		xj := pos[j*dim : (j+1)*dim]
		y := scratch[g]
		for i := range dim {
			y[i] = xj[i] + z*(xk[i]-xj[i])
		}
		evals[k]++
		l, ch := targets[g].eval(y)
		u := r.Float64()
		if math.IsNaN(l) || math.IsInf(l, 1) {
			// NaN or +Inf is a defect of the density at y; never accept it.
			c.Rejected[k]++
			return
		}
		if math.IsInf(l, -1) {
			return
		}
		if math.Log(u) < float64(dim-1)*math.Log(z)+l-lp[k] {
			copy(xk, y)
			lp[k], chi[k] = l, ch
			c.Accepted[k]++
		}
	}

	store := func() {
		c.X = append(c.X, pos...)
		c.LogP = append(c.LogP, lp...)
		if c.Chi2 != nil {
			c.Chi2 = append(c.Chi2, chi...)
		}
		c.Stored++
	}

	c.Status = ChainComplete
	var d Diagnostics
	lastDiag := 0
	for step := 0; step < set.Steps; step++ {
		if ctx.Err() != nil {
			c.Status = ChainCancelled
			break
		}
		forWalkers(nw, 0, half, func(g, k int) { move(g, k, half) })
		forWalkers(nw, half, W, func(g, k int) { move(g, k, 0) })
		c.Steps++
		if c.Steps%set.Thin == 0 {
			store()
		}
		if c.Steps%set.ProgressEvery == 0 && c.Steps < set.Steps {
			// τ costs O(N log N) in the stored length; re-estimate only once the
			// chain has grown by a tenth, so the total cost stays about ten
			// times that of one final estimate (negligible beside a light-curve
			// likelihood). The schedule depends on the step count only, so
			// where a run stops is reproducible.
			if c.Stored >= lastDiag+lastDiag/10 {
				d = diagnose(c, false)
				lastDiag = c.Stored
				// Stop only when the full verdict (with R̂) agrees, so an
				// early stop never ends in "not converged".
				if set.TargetESS > 0 && d.reached(set.TargetESS) && Diagnose(c).Converged {
					c.Status = ChainTargetReached
				}
			}
			if progress != nil {
				progress(Progress{Mode: mode, Step: c.Steps, Steps: set.Steps, Acceptance: c.Acceptance(), Tau: d.stepTau(), ESS: d.ESS})
			}
			if c.Status == ChainTargetReached {
				break
			}
		}
	}
	for _, e := range evals {
		c.Evals += e
	}
	c.Diagnostics = Diagnose(c)
	c.Runtime = time.Since(began)
	if progress != nil {
		progress(Progress{Mode: mode, Step: c.Steps, Steps: set.Steps, Acceptance: c.Acceptance(), Tau: c.Diagnostics.stepTau(), ESS: c.Diagnostics.ESS})
	}
	return c, nil
}

// forWalkers calls f(g, k) for k in [lo, hi) on n goroutines; goroutine g takes
// the walkers with (k−lo) mod n == g, so which target copy moves which walker
// is fixed and results do not depend on scheduling.
func forWalkers(n, lo, hi int, f func(g, k int)) {
	if n <= 1 {
		for k := lo; k < hi; k++ {
			f(0, k)
		}
		return
	}
	var wg sync.WaitGroup
	for g := range n {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for k := lo + g; k < hi; k += n {
				f(g, k)
			}
		}()
	}
	wg.Wait()
}
