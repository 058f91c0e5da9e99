package fit

import (
	"fmt"
	"math"
	"sort"

	"lensbook/lens"
)

// RenormSettings configures RenormaliseErrors. The zero value fits the scale
// factor k only (no floor).
type RenormSettings struct {
	// Floor is a fixed error floor e_min (magnitudes) used when AutoFloor is false.
	Floor float64 `json:"floor"`
	// AutoFloor chooses e_min per dataset so that the brighter and the fainter
	// half of the points (by model magnification) have the same mean χ² per
	// point, then k; e_min is searched in [0, 0.1] mag.
	AutoFloor bool `json:"autoFloor"`
}

// Renorm records the renormalisation of one dataset.
type Renorm struct {
	Dataset    string  `json:"dataset"`
	N          int     `json:"n"`
	K          float64 `json:"k"`          // scale factor set in Dataset.ErrScale
	Floor      float64 `json:"floor"`      // e_min (mag) set in Dataset.ErrFloor
	Chi2Before float64 `json:"chi2Before"` // at the model, with the uncertainties as they were
	Chi2After  float64 `json:"chi2After"`  // ≈ N − 2 by construction
}

// RenormaliseErrors rescales every dataset's uncertainties around model p,
// σ' = k·√(σ² + (e_min·F·ln10/2.5)²), so that each dataset's χ² equals its
// N − 2 degrees of freedom (N points, two flux parameters): the per-dataset
// error renormalisation that is common practice in published analyses
// (often credited to Yee et al. 2012, ApJ 755, 102; from memory). It writes k
// and e_min into Dataset.ErrScale and ErrFloor and returns the record; build a
// new Likelihood afterwards. Datasets with fewer than 3 used points are left
// unchanged.
func RenormaliseErrors(ev *Event, p lens.Params, set RenormSettings) ([]Renorm, error) {
	if set.Floor < 0 || math.IsNaN(set.Floor) {
		return nil, fmt.Errorf("fit: error floor %v must be >= 0", set.Floor)
	}
	l, err := NewLikelihood(ev)
	if err != nil {
		return nil, err
	}
	if _, err := l.Chi2(&p); err != nil {
		return nil, err
	}
	out := make([]Renorm, len(ev.Datasets))
	for k, d := range ev.Datasets {
		s := &l.sets[k]
		fit := l.fits[k]
		out[k] = Renorm{Dataset: d.Name, N: len(s.t), Chi2Before: fit.Chi2, K: d.ErrScale, Floor: d.ErrFloor}
		if len(s.t) < 3 {
			continue
		}
		// residuals and raw uncertainties of the used points
		n := len(s.t)
		res := make([]float64, n)
		sig := make([]float64, n)
		flx := make([]float64, n)
		for i, j := range s.idx {
			res[i] = s.f[i] - fit.Fs*s.a[i] - fit.Fb
			sig[i] = d.Err[j]
			flx[i] = d.Flux[j]
		}
		floor := set.Floor
		if set.AutoFloor {
			floor = autoFloor(res, sig, flx, s.a)
		}
		// refit fluxes with the floor-only weights, then the scale
		for iter := 0; iter < 3; iter++ {
			w := make([]float64, n)
			for i := range w {
				v := sig[i]*sig[i] + sq(floor*math.Abs(flx[i])*math.Ln10/2.5)
				w[i] = 1 / v
			}
			fs, fb, c, _ := SolveFlux(s.a, s.f, w, s.blend)
			for i := range res {
				res[i] = s.f[i] - fs*s.a[i] - fb
			}
			dof := float64(n - 2)
			kk := math.Sqrt(c / dof)
			if !(kk > 0) {
				kk = 1
			}
			out[k].K, out[k].Floor, out[k].Chi2After = kk, floor, c/(kk*kk)
			if !set.AutoFloor {
				break
			}
		}
		d.ErrScale, d.ErrFloor = out[k].K, out[k].Floor
	}
	return out, nil
}

func sq(x float64) float64 { return x * x }

// autoFloor returns e_min ∈ [0, 0.1] mag equalising the mean χ² per point of the
// brighter and fainter halves of the points (split at the median magnification).
func autoFloor(res, sig, flx, a []float64) float64 {
	n := len(res)
	ord := make([]int, n)
	for i := range ord {
		ord[i] = i
	}
	sort.Slice(ord, func(i, j int) bool { return a[ord[i]] < a[ord[j]] })
	faint, bright := ord[:n/2], ord[n/2:]
	g := func(e float64) float64 {
		mean := func(ix []int) float64 {
			s := 0.0
			for _, i := range ix {
				v := sig[i]*sig[i] + sq(e*math.Abs(flx[i])*math.Ln10/2.5)
				s += res[i] * res[i] / v
			}
			return s / float64(len(ix))
		}
		return mean(bright) - mean(faint)
	}
	if g(0) <= 0 {
		return 0
	}
	lo, hi := 0.0, 0.1
	if g(hi) > 0 {
		return hi
	}
	for it := 0; it < 50; it++ {
		mid := 0.5 * (lo + hi)
		if g(mid) > 0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	return 0.5 * (lo + hi)
}
