package fit

import "math"

// SolveFlux returns the source and blend fluxes fs, fb minimising
// χ² = Σ w_i (f_i − fs·a_i − fb)² for magnifications a, fluxes f and weights
// w = 1/σ² under the blend rule b, and that χ². It is the closed-form weighted
// linear least-squares solution (the normal equations of a two-column design),
// computed about the weighted means of a and f to avoid cancellation.
//
// When the magnification is the same at every point, fs is not identifiable:
// SolveFlux then returns fs = 0 and fb the weighted mean flux (BlendFree or
// BlendNonNegative), or fs as for BlendFixed with the fixed fb, and ok = false.
// It panics if the slices differ in length.
func SolveFlux(a, f, w []float64, b Blend) (fs, fb, chi2 float64, ok bool) {
	if len(a) != len(f) || len(a) != len(w) {
		panic("fit: SolveFlux slice lengths differ")
	}
	ok = true
	switch b.Mode {
	case BlendFixed:
		fb = b.Fb
		fs, ok = slopeThroughOrigin(a, f, w, fb)
	default:
		var sw, sa, sf float64
		for i, wi := range w {
			sw += wi
			sa += wi * a[i]
			sf += wi * f[i]
		}
		if sw == 0 {
			return 0, 0, 0, false
		}
		ma, mf := sa/sw, sf/sw
		var saa, saf float64
		for i, wi := range w {
			da := a[i] - ma
			saa += wi * da * da
			saf += wi * da * (f[i] - mf)
		}
		if saa > 0 && saa > 1e-24*sw*ma*ma {
			fs = saf / saa
			fb = mf - fs*ma
		} else {
			fs, fb, ok = 0, mf, false
		}
		if b.Mode == BlendNonNegative && fb < 0 {
			fb = 0
			fs, ok = slopeThroughOrigin(a, f, w, 0)
		}
	}
	for i, wi := range w {
		r := f[i] - fs*a[i] - fb
		chi2 += wi * r * r
	}
	return fs, fb, chi2, ok
}

// slopeThroughOrigin solves f − fb = fs·a for fs by weighted least squares.
func slopeThroughOrigin(a, f, w []float64, fb float64) (float64, bool) {
	var saa, saf float64
	for i, wi := range w {
		saa += wi * a[i] * a[i]
		saf += wi * a[i] * (f[i] - fb)
	}
	if !(saa > 0) || math.IsInf(saa, 0) {
		return 0, false
	}
	return saf / saa, true
}
