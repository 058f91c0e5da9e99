package view

import (
	"errors"
	"fmt"
	"math"

	"lensbook/fit"
	"lensbook/lens"
)

// Series is one dataset as the host page sends it: times (full JD), fluxes and
// their 1σ uncertainties, with the dataset's own fitting settings.
type Series struct {
	Name               string
	T, Flux, Err       []float64
	Masked             []bool  // nil = all used
	ErrScale, ErrFloor float64 // see fit.Dataset
	LD                 float64 // linear limb-darkening coefficient u
	ZeroPoint          float64 // ZP of m = ZP − 2.5 log10 F
}

// Data holds the loaded photometry and computes the total χ² of a model with
// package fit's likelihood (linear flux solution per dataset), so the number
// shown beside the map is the one the fitting steps use.
type Data struct {
	// Coords is the event's sky position (nil = unknown), needed for χ² of
	// models with annual parallax; set it before Chi2.
	Coords *fit.Coords

	sets   []Series
	ref    lens.Reference
	tol    float64
	tref   float64
	coords *fit.Coords // the position the likelihood was built with
	lik    *fit.Likelihood
	n      int
}

// Set replaces the datasets, checking that each has matching slice lengths.
func (d *Data) Set(sets []Series) error {
	for _, s := range sets {
		if len(s.Flux) != len(s.T) || len(s.Err) != len(s.T) || (s.Masked != nil && len(s.Masked) != len(s.T)) {
			return fmt.Errorf("mapview: dataset %q: t, flux, err (and masked) lengths differ: %d, %d, %d",
				s.Name, len(s.T), len(s.Flux), len(s.Err))
		}
	}
	d.sets, d.lik, d.n = sets, nil, 0
	for _, s := range sets {
		d.n += len(s.T)
	}
	return nil
}

// N is the number of points loaded.
func (d *Data) N() int { return d.n }

// Range returns the time span of the data (0, 0 when empty).
func (d *Data) Range() (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, s := range d.sets {
		for _, t := range s.T {
			lo, hi = math.Min(lo, t), math.Max(hi, t)
		}
	}
	if lo > hi {
		return 0, 0
	}
	return lo, hi
}

// ErrNoData is returned by Chi2 when no data are loaded.
var ErrNoData = errors.New("mapview: no data loaded")

// Chi2 returns the total χ² of m against the data. The likelihood is built
// on first use and rebuilt when the reference point or the tolerance change.
func (d *Data) Chi2(m *lens.Model) (float64, error) {
	if d.n == 0 {
		return math.NaN(), ErrNoData
	}
	// t0,par: the model's, or its t0 (lens.Model's default) when unset; a
	// likelihood keeps one t0,par, so a new one means a new likelihood.
	tref := m.TRef
	if tref == 0 && (fit.HasParallax(&m.Params) || fit.HasOrbit(&m.Params)) {
		tref = m.T0
	}
	if d.lik == nil || d.ref != m.Ref || d.tol != m.Tol || d.tref != tref || !sameCoords(d.coords, d.Coords) {
		ev := &fit.Event{Name: "map view", Ref: m.Ref, Tol: m.Tol, Coords: d.Coords, TRef: tref}
		for _, s := range d.sets {
			line := make([]int, len(s.T))
			for i := range line {
				line[i] = i + 1
			}
			ev.Datasets = append(ev.Datasets, &fit.Dataset{
				Name: s.Name, T: s.T, Flux: s.Flux, Err: s.Err, Line: line, Masked: s.Masked,
				ErrScale: s.ErrScale, ErrFloor: s.ErrFloor, LD: s.LD,
			})
		}
		lik, err := fit.NewLikelihood(ev)
		if err != nil {
			return math.NaN(), err
		}
		d.lik, d.ref, d.tol, d.tref = lik, m.Ref, m.Tol, tref
		d.coords = nil
		if d.Coords != nil {
			c := *d.Coords
			d.coords = &c
		}
	}
	return d.lik.Chi2(&m.Params)
}

func sameCoords(a, b *fit.Coords) bool {
	return a == nil && b == nil || a != nil && b != nil && *a == *b
}

// Fits returns the per-dataset χ², source and blend fluxes of the last Chi2
// call (nil before the first); the slice is overwritten by the next call.
func (d *Data) Fits() []fit.DatasetFit {
	if d.lik == nil {
		return nil
	}
	return d.lik.Fits()
}

// Mags writes into dst the magnitudes of magnifications a on the first
// dataset's scale, m = ZP₀ − 2.5 log10(fs₀·A + fb₀), with the fluxes of the
// last Chi2 call (the scale the notebook's light-curve plot uses); NaN where
// the model flux is not positive or no fit is available.
func (d *Data) Mags(dst, a []float64) []float64 {
	dst = dst[:0]
	fits := d.Fits()
	for _, x := range a {
		y := math.NaN()
		if len(fits) > 0 && len(d.sets) > 0 {
			if f := fits[0].Fs*x + fits[0].Fb; f > 0 {
				y = d.sets[0].ZeroPoint - 2.5*math.Log10(f)
			}
		}
		dst = append(dst, y)
	}
	return dst
}
