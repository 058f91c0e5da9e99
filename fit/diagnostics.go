package fit

import (
	"fmt"
	"math"
	"slices"
	"sort"
)

// Diagnostics describe how well a chain represents its target. They are stored
// in Chain.Diagnostics when a run ends, and every table or export that shows
// posterior numbers shows Converged and Reasons beside them.
type Diagnostics struct {
	// Burn is the number of stored steps discarded as burn-in:
	// ⌈BurnTaus·τ_max⌉ with τ_max measured on the second half of the chain,
	// capped at half the chain. BurnSteps is the same in ensemble steps.
	Burn, BurnSteps int
	// Kept is the number of stored steps after burn-in.
	Kept int
	// Tau is the integrated autocorrelation time per parameter after burn-in,
	// in ensemble steps (measured on the stored steps, times Chain.Thin); see
	// IntegratedTime.
	Tau []float64
	// TauRelErr is the relative standard error of each Tau (Sokal's estimate).
	TauRelErr []float64
	// TauSettled reports, per parameter, whether Sokal's window criterion was met.
	TauSettled []bool
	// ESS is the effective sample size per parameter: Walkers·Kept/Tau.
	ESS []float64
	// RHat is the rank-normalised split-R̂ per parameter over the walkers
	// (Vehtari, Gelman, Simpson, Carpenter & Bürkner 2021, Bayesian Analysis 16,
	// 667); NaN when fewer than 4 steps are kept. Ensemble walkers are not
	// independent chains, so R̂ here is a consistency check that every walker
	// explores the same distribution, not a proof of convergence.
	RHat []float64
	// RHatLimit is the R̂ above which a parameter is flagged:
	// max(MaxRHat, √(1 + 2τ/n)) with n = Kept/2 the length of a split half.
	// For stationary chains the between-chain variance of half-chain means is
	// about τ/n times the within-chain variance, so R̂² ≈ 1 + (τ−1)/n (derived
	// here from the definition of R̂); Vehtari et al.'s 1.01 assumes chains of
	// hundreds of effective samples each, which ensemble walkers of a 50τ run are
	// not. The limit flags between-walker disagreement twice what
	// autocorrelation alone produces.
	RHatLimit []float64
	// Acceptance is the acceptance fraction over all walkers and steps.
	Acceptance float64
	// StuckWalkers counts walkers whose acceptance is below a fifth of the
	// median walker's (a walker left behind in a low-density region).
	StuckWalkers int
	// Converged is the verdict: true only when no reason below applies.
	Converged bool
	// Reasons says in words why the chain is not converged (empty when it is).
	Reasons []string

	lengthOK bool // every parameter's kept chain is ≥ MinTauMultiple·τ
}

// stepTau returns a copy of τ in ensemble steps.
func (d *Diagnostics) stepTau() []float64 { return slices.Clone(d.Tau) }

// reached reports whether every parameter has at least target effective
// samples and the early-stop conditions of Diagnose hold.
func (d *Diagnostics) reached(target float64) bool {
	if len(d.ESS) == 0 || !d.lengthOK {
		return false
	}
	for i, e := range d.ESS {
		if !(e >= target) || !d.TauSettled[i] {
			return false
		}
	}
	return true
}

// Diagnose computes the diagnostics of a chain with its settings' thresholds
// (MinTauMultiple, BurnTaus, MaxRHat, TargetESS).
func Diagnose(c *Chain) Diagnostics {
	return diagnose(c, true)
}

func diagnose(c *Chain, withRHat bool) Diagnostics {
	set := c.Settings.withDefaults(c.Dim)
	d := Diagnostics{Acceptance: c.Acceptance()}
	d.StuckWalkers = stuckWalkers(c.Accepted)
	var reasons []string
	if c.Status == ChainCancelled {
		reasons = append(reasons, fmt.Sprintf("run cancelled after %d of %d steps", c.Steps, set.Steps))
	}
	if c.Stored < 8 {
		reasons = append(reasons, fmt.Sprintf("only %d stored steps: too short to estimate autocorrelation", c.Stored))
		d.Kept = c.Stored
		d.Reasons = reasons
		return d
	}
	var w acfWork
	series := make([][]float64, c.Walkers)
	tauOn := func(p, from int) TauEstimate {
		for k := range series {
			if len(series[k]) != c.Stored-from {
				series[k] = nil
			}
			series[k] = c.Series(series[k], p, k, from)
		}
		return w.integratedTime(series, SokalWindow)
	}
	// Burn-in from τ on the second half, where the initial transient has faded.
	tmax := 0.0
	for p := range c.Dim {
		if t := tauOn(p, c.Stored/2).Tau; t > tmax {
			tmax = t
		}
	}
	d.Burn = min(int(math.Ceil(set.BurnTaus*tmax)), c.Stored/2)
	d.BurnSteps = d.Burn * c.Thin
	d.Kept = c.Stored - d.Burn
	d.Tau = make([]float64, c.Dim)
	d.TauRelErr = make([]float64, c.Dim)
	d.TauSettled = make([]bool, c.Dim)
	d.ESS = make([]float64, c.Dim)
	d.RHat = make([]float64, c.Dim)
	d.RHatLimit = make([]float64, c.Dim)
	d.lengthOK = true
	for p := range c.Dim {
		e := tauOn(p, d.Burn)
		d.Tau[p], d.TauRelErr[p], d.TauSettled[p] = e.Tau*float64(c.Thin), e.RelErr, e.Settled
		d.ESS[p] = float64(c.Walkers*d.Kept) / e.Tau
		if !e.Settled {
			reasons = append(reasons, fmt.Sprintf("%s: autocorrelation window never settled (Sokal's criterion unmet): τ ≥ %.3g steps is a lower bound", c.paramName(p), e.Tau*float64(c.Thin)))
		}
		if float64(d.Kept) < set.MinTauMultiple*e.Tau || math.IsNaN(e.Tau) {
			d.lengthOK = false
			reasons = append(reasons, fmt.Sprintf("%s: chain after burn-in is %d steps, shorter than %g τ = %.4g steps", c.paramName(p), d.Kept*c.Thin, set.MinTauMultiple, set.MinTauMultiple*e.Tau*float64(c.Thin)))
		}
		d.RHatLimit[p] = max(set.MaxRHat, math.Sqrt(1+2*e.Tau/float64(d.Kept/2)))
		if withRHat {
			d.RHat[p] = SplitRHat(series)
			if d.RHat[p] > d.RHatLimit[p] {
				reasons = append(reasons, fmt.Sprintf("%s: split-R̂ = %.4f exceeds %.4g", c.paramName(p), d.RHat[p], d.RHatLimit[p]))
			}
		} else {
			d.RHat[p] = math.NaN()
		}
		if set.TargetESS > 0 && d.ESS[p] < set.TargetESS {
			reasons = append(reasons, fmt.Sprintf("%s: %.0f effective samples, fewer than the %g asked", c.paramName(p), d.ESS[p], set.TargetESS))
		}
	}
	if d.StuckWalkers > 0 && c.Steps >= 200 {
		reasons = append(reasons, fmt.Sprintf("%d of %d walkers accept under a fifth of the median walker's moves (stuck)", d.StuckWalkers, c.Walkers))
	}
	d.Reasons = reasons
	d.Converged = len(reasons) == 0
	return d
}

// paramName names parameter p in the diagnostics' messages.
func (c *Chain) paramName(p int) string {
	if p < len(c.Names) && c.Names[p] != "" {
		return c.Names[p]
	}
	return fmt.Sprintf("parameter %d", p)
}

// stuckWalkers counts walkers with acceptance below a fifth of the median.
func stuckWalkers(acc []int) int {
	if len(acc) == 0 {
		return 0
	}
	s := slices.Clone(acc)
	slices.Sort(s)
	med := float64(s[len(s)/2])
	n := 0
	for _, a := range acc {
		if float64(a) < med/5 {
			n++
		}
	}
	return n
}

// SplitRHat is the rank-normalised split-R̂ of Vehtari et al. (2021, Bayesian
// Analysis 16, 667): each chain is split in halves, all draws are replaced by the
// normal scores of their pooled ranks, z = Φ⁻¹((r − 3/8)/(S + 1/4)), and the
// Gelman–Rubin potential scale reduction (Gelman & Rubin 1992, Statistical
// Science 7, 457) is computed; the same is done for the folded draws |x − median|
// and the larger value is returned. NaN when fewer than 2 chains of at least 4
// draws are given or all draws are equal.
//
// It panics if the chains differ in length.
func SplitRHat(chains [][]float64) float64 {
	if len(chains) < 1 {
		return math.NaN()
	}
	n := len(chains[0])
	if n < 4 || len(chains)*2 < 2 {
		return math.NaN()
	}
	h := n / 2
	m := 2 * len(chains)
	split := make([][]float64, 0, m)
	for _, c := range chains {
		if len(c) != n {
			panic("fit: SplitRHat chains differ in length")
		}
		split = append(split, c[:h], c[n-h:])
	}
	all := make([]float64, 0, m*h)
	for _, c := range split {
		all = append(all, c...)
	}
	bulk := rhatOfScores(rankScores(all), m, h)
	med := sortedQuantile(slices.Sorted(slices.Values(all)), 0.5)
	for i, v := range all {
		all[i] = math.Abs(v - med)
	}
	fold := rhatOfScores(rankScores(all), m, h)
	if math.IsNaN(bulk) || math.IsNaN(fold) {
		return math.NaN()
	}
	return max(bulk, fold)
}

// rankScores replaces x (in place) by the normal scores of its ranks, average
// ranks for ties, with Blom's offset 3/8 as in Vehtari et al. (2021).
func rankScores(x []float64) []float64 {
	S := len(x)
	idx := make([]int, S)
	for i := range idx {
		idx[i] = i
	}
	sort.Slice(idx, func(a, b int) bool { return x[idx[a]] < x[idx[b]] })
	r := make([]float64, S)
	for i := 0; i < S; {
		j := i
		for j+1 < S && x[idx[j+1]] == x[idx[i]] {
			j++
		}
		avg := float64(i+j)/2 + 1
		for k := i; k <= j; k++ {
			r[idx[k]] = avg
		}
		i = j + 1
	}
	for i := range x {
		p := (r[i] - 0.375) / (float64(S) + 0.25)
		x[i] = math.Sqrt2 * math.Erfinv(2*p-1)
	}
	return x
}

// rhatOfScores is the classical potential scale reduction of m chains of
// length n stored back to back in z.
func rhatOfScores(z []float64, m, n int) float64 {
	means := make([]float64, m)
	grand := 0.0
	wsum := 0.0
	for j := range m {
		c := z[j*n : (j+1)*n]
		mu := 0.0
		for _, v := range c {
			mu += v
		}
		mu /= float64(n)
		means[j] = mu
		grand += mu
		s := 0.0
		for _, v := range c {
			s += (v - mu) * (v - mu)
		}
		wsum += s / float64(n-1)
	}
	grand /= float64(m)
	W := wsum / float64(m)
	B := 0.0
	for _, mu := range means {
		B += (mu - grand) * (mu - grand)
	}
	B *= float64(n) / float64(m-1)
	if !(W > 0) {
		return math.NaN()
	}
	v := float64(n-1)/float64(n)*W + B/float64(n)
	return math.Sqrt(v / W)
}

// sortedQuantile is the type-7 quantile (linear interpolation between order
// statistics, the default of R and numpy) of sorted data.
func sortedQuantile(s []float64, p float64) float64 {
	n := len(s)
	if n == 0 {
		return math.NaN()
	}
	h := p * float64(n-1)
	lo := int(math.Floor(h))
	if lo >= n-1 {
		return s[n-1]
	}
	if lo < 0 {
		return s[0]
	}
	return s[lo] + (h-float64(lo))*(s[lo+1]-s[lo])
}
