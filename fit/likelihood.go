package fit

import (
	"fmt"
	"math"

	"lensbook/lens"
)

// DatasetFit is the linear part of a fit for one dataset at given model
// parameters: its χ² and the solved source and blend fluxes.
type DatasetFit struct {
	Name string  `json:"name"`
	N    int     `json:"n"`    // points used (not masked)
	Chi2 float64 `json:"chi2"` // Σ((f − fs·A − fb)/σ')² with σ' the renormalised uncertainty
	Fs   float64 `json:"fs"`   // source flux (dataset flux units)
	Fb   float64 `json:"fb"`   // blend flux (dataset flux units)
	// Degenerate is true when fs was not identifiable (flat model light curve).
	Degenerate bool `json:"degenerate,omitempty"`
}

// Likelihood evaluates χ² = Σ_datasets Σ_points ((f − fs·A − fb)/σ')² with fs, fb
// solved per dataset by weighted linear least squares at every call (SolveFlux).
// It snapshots the event's used points and renormalised uncertainties when
// built: rebuild it after masking or renormalising. After construction the
// evaluation methods allocate only the binary-lens solver of each dataset
// (one small allocation per dataset and call, none for a single lens). A Likelihood is not safe for concurrent
// use (it owns a lens.Evaluator and buffers); give each goroutine its own.
type Likelihood struct {
	ev   *Event
	sets []lset
	fits []DatasetFit
	n    int
	eval lens.Evaluator
	mod  lens.Model
	par  parallaxState // t0,par and cached parallax offsets (parallax.go)
}

type lset struct {
	idx     []int     // dataset point index of each used point
	t, f, w []float64 // time, flux, weight 1/σ'²
	isig    []float64 // 1/σ'
	a       []float64 // magnification buffer
	ld      float64
	blend   Blend
}

// NewLikelihood builds the likelihood of ev (validated first).
func NewLikelihood(ev *Event) (*Likelihood, error) {
	if err := ev.Validate(); err != nil {
		return nil, err
	}
	l := &Likelihood{ev: ev, sets: make([]lset, len(ev.Datasets)), fits: make([]DatasetFit, len(ev.Datasets))}
	for k, d := range ev.Datasets {
		s := &l.sets[k]
		for i := range d.T {
			if !d.Used(i) {
				continue
			}
			sig := d.Sigma(i)
			if !(sig > 0) || math.IsInf(sig, 0) {
				return nil, fmt.Errorf("fit: dataset %q point %d (line %d): renormalised uncertainty %v is not > 0", d.Name, i, lineOf(d, i), sig)
			}
			s.idx = append(s.idx, i)
			s.t = append(s.t, d.T[i])
			s.f = append(s.f, d.Flux[i])
			s.w = append(s.w, 1/(sig*sig))
			s.isig = append(s.isig, 1/sig)
		}
		s.a = make([]float64, len(s.t))
		s.ld = d.LD
		s.blend = ev.BlendOf(k)
		l.fits[k] = DatasetFit{Name: d.Name, N: len(s.t)}
		l.n += len(s.t)
	}
	return l, nil
}

// Event returns the event the likelihood was built from.
func (l *Likelihood) Event() *Event { return l.ev }

// N is the number of points used.
func (l *Likelihood) N() int { return l.n }

// ResetSolver forgets the binary-lens warm start so that the next evaluation
// does not depend on earlier ones (used to make grid nodes independent of the
// order in which a worker visits them).
func (l *Likelihood) ResetSolver() { l.eval = lens.Evaluator{} }

// Counts returns how many points were computed with each lens.Method so far.
func (l *Likelihood) Counts() [lens.Contour + 1]int { return l.eval.Counts }

// magnify fills every dataset's magnification buffer for p.
func (l *Likelihood) magnify(p *lens.Params) error {
	l.mod = lens.Model{Params: *p, Ref: l.ev.Ref, Tol: l.ev.Tol}
	if err := l.par.prepare(l, p); err != nil {
		return err
	}
	for k := range l.sets {
		s := &l.sets[k]
		if len(s.t) == 0 {
			continue
		}
		l.mod.LD = s.ld
		// A fresh evaluator per dataset and call: warm-starting the binary
		// roots from the previous call's last epoch (far along the trajectory)
		// measured 1.3–2× slower than a cold start at the first epoch
		// (alternating timing on the 10,000-point benchmark event). It costs one small
		// allocation per dataset.
		l.eval = lens.Evaluator{Counts: l.eval.Counts}
		if err := l.eval.LightCurve(s.a, &l.mod, s.t, l.par.offsets(k)); err != nil {
			return err
		}
	}
	return nil
}

// Chi2 returns the total χ² at p and stores the per-dataset fits (see Fits).
// An invalid model or a non-finite magnification returns +Inf and an error.
func (l *Likelihood) Chi2(p *lens.Params) (float64, error) {
	if err := l.magnify(p); err != nil {
		return math.Inf(1), err
	}
	total := 0.0
	for k := range l.sets {
		s := &l.sets[k]
		fs, fb, c, ok := SolveFlux(s.a, s.f, s.w, s.blend)
		l.fits[k].Fs, l.fits[k].Fb, l.fits[k].Chi2, l.fits[k].Degenerate = fs, fb, c, !ok
		total += c
	}
	if math.IsNaN(total) || math.IsInf(total, 0) {
		return math.Inf(1), fmt.Errorf("fit: χ² not finite at %+v (magnification not finite?)", *p)
	}
	return total, nil
}

// Fits returns the per-dataset results of the last Chi2 or Residuals call. The
// slice is owned by l and overwritten by the next call.
func (l *Likelihood) Fits() []DatasetFit { return l.fits }

// Residuals writes the normalised residuals (f − fs·A − fb)/σ' of every used
// point into dst, dataset after dataset in time order, and returns χ² = Σ dst².
// It panics if len(dst) != N().
func (l *Likelihood) Residuals(dst []float64, p *lens.Params) (float64, error) {
	if len(dst) != l.n {
		panic("fit: Residuals length mismatch")
	}
	chi2, err := l.Chi2(p)
	if err != nil {
		return chi2, err
	}
	j := 0
	for k := range l.sets {
		s := &l.sets[k]
		fs, fb := l.fits[k].Fs, l.fits[k].Fb
		for i := range s.a {
			dst[j] = (s.f[i] - fs*s.a[i] - fb) * s.isig[i]
			j++
		}
	}
	return chi2, nil
}

// Magnification returns the magnification of dataset k's used points computed
// by the last call (owned by l). Use PointIndex to map back to dataset indices.
func (l *Likelihood) Magnification(k int) []float64 { return l.sets[k].a }

// PointIndex returns the dataset index of each used point of dataset k.
func (l *Likelihood) PointIndex(k int) []int { return l.sets[k].idx }

// Times returns the times of dataset k's used points (owned by l).
func (l *Likelihood) Times(k int) []float64 { return l.sets[k].t }

// Residual is one point's residual from a model, for plots and anomaly tests.
type Residual struct {
	Dataset int     `json:"dataset"`
	Index   int     `json:"index"` // point index in the dataset
	T       float64 `json:"t"`     // full JD
	Flux    float64 `json:"flux"`  // observed flux
	Model   float64 `json:"model"` // fs·A + fb
	Sigma   float64 `json:"sigma"` // renormalised uncertainty
	Norm    float64 `json:"norm"`  // (flux − model)/sigma
}

// AppendResiduals evaluates p and appends one Residual per used point to dst.
func (l *Likelihood) AppendResiduals(dst []Residual, p *lens.Params) ([]Residual, error) {
	if _, err := l.Chi2(p); err != nil {
		return dst, err
	}
	for k := range l.sets {
		s := &l.sets[k]
		fs, fb := l.fits[k].Fs, l.fits[k].Fb
		for i := range s.a {
			m := fs*s.a[i] + fb
			dst = append(dst, Residual{Dataset: k, Index: s.idx[i], T: s.t[i], Flux: s.f[i], Model: m,
				Sigma: 1 / s.isig[i], Norm: (s.f[i] - m) * s.isig[i]})
		}
	}
	return dst, nil
}
