package fit

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
)

// Samples is a flat table of posterior samples of one mode: N rows of
// len(Names) values, with ln π and χ² per row. Chain.Samples builds it from the
// kept (post-burn-in) part of a chain; Map turns sampler coordinates into
// physical ones (log10 s → s, radians → degrees) for summaries and exports.
type Samples struct {
	Mode    string
	Walkers int       // walkers per stored step (rows are step-major)
	Names   []string  // column names, e.g. "tE"
	Units   []string  // units per column ("d", "deg", "" for dimensionless)
	X       []float64 // row-major, N × len(Names)
	LogP    []float64 // ln π per row
	Chi2    []float64 // χ² per row, nil when unknown
	// Param maps each column to the sampler parameter it is a one-to-one
	// function of (−1 if none), so its autocorrelation diagnostics apply.
	Param []int
	// Diagnostics of the chain the samples came from.
	Diagnostics Diagnostics
	Status      ChainStatus
}

// Len is the number of rows.
func (s *Samples) Len() int {
	if len(s.Names) == 0 {
		return 0
	}
	return len(s.X) / len(s.Names)
}

// Row returns row i (aliases X).
func (s *Samples) Row(i int) []float64 {
	d := len(s.Names)
	return s.X[i*d : (i+1)*d : (i+1)*d]
}

// Column fills dst (length Len, allocated when nil) with column j.
func (s *Samples) Column(dst []float64, j int) []float64 {
	n, d := s.Len(), len(s.Names)
	if dst == nil {
		dst = make([]float64, n)
	}
	if len(dst) != n {
		panic("fit: Column destination length differs from the number of samples")
	}
	for i := range n {
		dst[i] = s.X[i*d+j]
	}
	return dst
}

// Index returns the column named name, or −1.
func (s *Samples) Index(name string) int { return slices.Index(s.Names, name) }

// Samples returns the samples kept after burn-in (Diagnostics.Burn), in
// step-major order, named names (len Dim) with units (nil means none).
func (c *Chain) Samples(names, units []string) (*Samples, error) {
	if len(names) != c.Dim || (units != nil && len(units) != c.Dim) {
		return nil, fmt.Errorf("fit: %d names and %d units for a chain of %d parameters", len(names), len(units), c.Dim)
	}
	if units == nil {
		units = make([]string, c.Dim)
	}
	from := c.Diagnostics.Burn
	s := &Samples{Mode: c.Mode, Walkers: c.Walkers, Names: slices.Clone(names), Units: slices.Clone(units),
		X:     slices.Clone(c.X[from*c.Walkers*c.Dim : c.Stored*c.Walkers*c.Dim]),
		LogP:  slices.Clone(c.LogP[from*c.Walkers : c.Stored*c.Walkers]),
		Param: make([]int, c.Dim), Diagnostics: c.Diagnostics, Status: c.Status}
	if c.Chi2 != nil {
		s.Chi2 = slices.Clone(c.Chi2[from*c.Walkers : c.Stored*c.Walkers])
	}
	for i := range s.Param {
		s.Param[i] = i
	}
	return s, nil
}

// Map returns a new Samples whose rows are f(row): f fills dst (len(names))
// from a row x of s. param gives, per new column, the sampler parameter it is
// a one-to-one function of (−1 if none); nil means none.
func (s *Samples) Map(names, units []string, param []int, f func(dst, x []float64)) *Samples {
	n, d := s.Len(), len(names)
	if units == nil {
		units = make([]string, d)
	}
	if param == nil {
		param = slices.Repeat([]int{-1}, d)
	}
	if len(units) != d || len(param) != d {
		panic("fit: Map names, units and param lengths differ")
	}
	out := &Samples{Mode: s.Mode, Walkers: s.Walkers, Names: slices.Clone(names), Units: slices.Clone(units), X: make([]float64, n*d),
		LogP: s.LogP, Chi2: s.Chi2, Param: slices.Clone(param), Diagnostics: s.Diagnostics, Status: s.Status}
	for i := range n {
		f(out.X[i*d:(i+1)*d], s.Row(i))
	}
	return out
}

// Draw returns n rows chosen uniformly without replacement (all rows, in a
// shuffled order, when n ≥ Len), from the seeded stream; used for posterior
// bands and forecasts.
func (s *Samples) Draw(n int, seed uint64) [][]float64 {
	N := s.Len()
	r := rand.New(rand.NewPCG(seed, 0x6472617773))
	idx := r.Perm(N)
	if n < N {
		idx = idx[:n]
	}
	out := make([][]float64, len(idx))
	for i, k := range idx {
		out[i] = slices.Clone(s.Row(k))
	}
	return out
}

// Quantile probabilities of the ±1σ-equivalent interval: Φ(−1) and Φ(+1) of the
// standard normal, which round to the customary 16 % and 84 %.
const (
	LowerQuantile = 0.15865525393145707
	UpperQuantile = 0.8413447460685429
)

// ParamSummary is the marginal posterior of one column.
type ParamSummary struct {
	Name, Unit string
	Median     float64
	Lower      float64 // LowerQuantile
	Upper      float64 // UpperQuantile
	Mean, Std  float64
	Best       float64 // value at the best-χ² sample
	Tau        float64 // autocorrelation time of the underlying sampler parameter (steps), NaN if none
	ESS        float64 // effective samples, NaN if none
	RHat       float64 // split-R̂, NaN if none
}

// Summary is the posterior summary of one mode.
type Summary struct {
	Mode    string
	Params  []ParamSummary
	Samples int // rows summarised
	// Best is the best-χ² sample (the sample of largest ln π when χ² is unknown);
	// BestChi2 is its χ² (NaN when unknown) and BestLogP its ln π.
	Best     []float64
	BestChi2 float64
	BestLogP float64
	// Corr is the correlation matrix of the columns (Pearson, over all rows).
	Corr [][]float64
	// Converged and Reasons repeat the chain's verdict so that no table shows
	// numbers without it.
	Converged bool
	Reasons   []string
	Status    ChainStatus
}

// ErrNoSamples means a summary was asked of an empty sample table.
var ErrNoSamples = errors.New("fit: no posterior samples")

// Summarize computes medians, ±1σ-equivalent quantiles, mean, standard
// deviation, the best-χ² sample and the correlation matrix of s.
func Summarize(s *Samples) (Summary, error) {
	n, d := s.Len(), len(s.Names)
	if n == 0 {
		return Summary{}, ErrNoSamples
	}
	out := Summary{Mode: s.Mode, Samples: n, Params: make([]ParamSummary, d), BestChi2: math.NaN(),
		Converged: s.Diagnostics.Converged, Reasons: slices.Clone(s.Diagnostics.Reasons), Status: s.Status}
	best := 0
	if s.Chi2 != nil {
		for i, c := range s.Chi2 {
			if c < s.Chi2[best] || math.IsNaN(s.Chi2[best]) {
				best = i
			}
		}
		out.BestChi2 = s.Chi2[best]
	}
	if s.Chi2 == nil || math.IsNaN(out.BestChi2) {
		for i, l := range s.LogP {
			if l > s.LogP[best] {
				best = i
			}
		}
		if s.Chi2 != nil {
			out.BestChi2 = s.Chi2[best]
		}
	}
	out.Best = slices.Clone(s.Row(best))
	out.BestLogP = s.LogP[best]
	cols := make([][]float64, d)
	means := make([]float64, d)
	sorted := make([]float64, n)
	for j := range d {
		col := s.Column(nil, j)
		cols[j] = col
		m := 0.0
		for _, v := range col {
			m += v
		}
		m /= float64(n)
		means[j] = m
		v := 0.0
		for _, x := range col {
			v += (x - m) * (x - m)
		}
		copy(sorted, col)
		slices.Sort(sorted)
		p := ParamSummary{Name: s.Names[j], Unit: s.Units[j], Mean: m, Std: math.Sqrt(v / float64(max(n-1, 1))),
			Median: sortedQuantile(sorted, 0.5), Lower: sortedQuantile(sorted, LowerQuantile), Upper: sortedQuantile(sorted, UpperQuantile),
			Best: out.Best[j], Tau: math.NaN(), ESS: math.NaN(), RHat: math.NaN()}
		if j < len(s.Param) && s.Param[j] >= 0 && s.Param[j] < len(s.Diagnostics.Tau) {
			k := s.Param[j]
			diag := s.Diagnostics
			p.Tau = diag.Tau[k]
			p.ESS = diag.ESS[k]
			p.RHat = diag.RHat[k]
		}
		out.Params[j] = p
	}
	out.Corr = make([][]float64, d)
	for i := range d {
		out.Corr[i] = make([]float64, d)
	}
	for i := range d {
		for j := i; j < d; j++ {
			sij, sii, sjj := 0.0, 0.0, 0.0
			for k := range n {
				a, b := cols[i][k]-means[i], cols[j][k]-means[j]
				sij += a * b
				sii += a * a
				sjj += b * b
			}
			r := sij / math.Sqrt(sii*sjj)
			if i == j {
				r = 1
				if sii == 0 {
					r = math.NaN()
				}
			}
			out.Corr[i][j], out.Corr[j][i] = r, r
		}
	}
	return out, nil
}

// ModeComparison ranks modes by their best χ², with the Bayesian information
// criterion BIC = χ²_min + k ln n (Schwarz 1978, Annals of Statistics 6, 461)
// as a cheap evidence proxy: a mode's evidence relative to the best is roughly
// exp(−ΔBIC/2). Neither is an evidence; modes with ΔBIC < ~2 are not
// distinguished by the data (common practice).
type ModeComparison struct {
	Mode      string
	Chi2      float64 // best χ² of the mode
	DeltaChi2 float64 // Chi2 minus the smallest Chi2 over modes
	K         int     // number of fitted parameters: sampler dimension plus flux parameters
	BIC       float64
	DeltaBIC  float64
}

// CompareModes compares modes summarised from the same data: nData points,
// with k[i] fitted parameters in mode i (include the per-dataset source and
// blend fluxes). It needs each summary's BestChi2.
func CompareModes(sums []Summary, k []int, nData int) ([]ModeComparison, error) {
	if len(k) != len(sums) {
		return nil, fmt.Errorf("fit: %d parameter counts for %d modes", len(k), len(sums))
	}
	if nData < 1 {
		return nil, ErrNoSamples
	}
	out := make([]ModeComparison, len(sums))
	bestChi, bestBIC := math.Inf(1), math.Inf(1)
	for i, s := range sums {
		if math.IsNaN(s.BestChi2) {
			return nil, fmt.Errorf("fit: mode %q has no χ² (sampled without Target.Posterior)", s.Mode)
		}
		out[i] = ModeComparison{Mode: s.Mode, Chi2: s.BestChi2, K: k[i], BIC: s.BestChi2 + float64(k[i])*math.Log(float64(nData))}
		bestChi = min(bestChi, out[i].Chi2)
		bestBIC = min(bestBIC, out[i].BIC)
	}
	for i := range out {
		out[i].DeltaChi2 = out[i].Chi2 - bestChi
		out[i].DeltaBIC = out[i].BIC - bestBIC
	}
	return out, nil
}
