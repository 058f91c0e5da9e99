package lens

import "math"

// uniform is the contour-integrated magnification of a uniform disk.
func (w *finiteWork) uniform(l *fsLens, zc complex128, rho, tol float64, warm *[5]complex128) (Finite, bool) {
	area, e, ok := w.ct.disk(l, zc, rho, tol, warm)
	if !ok {
		return Finite{}, false
	}
	s := math.Pi * rho * rho
	return Finite{Mag: math.Abs(area) / s, Err: e / s, Samples: w.ct.samples}, true
}

// Limb darkening by concentric annuli (Bozza 2010, MNRAS 408, 2188, §4 gives
// one adaptive scheme; ours follows the same idea with our own estimate).
//
// With M(r) the image area of the uniform disk of radius r and the linear law
// normalised to unit mean, I(r) = 1 − Γ(1 − (3/2)√(1 − r²/ρ²)) (references.md
// §2a), the limb-darkened magnification is A = (1/πρ²)∫₀^ρ I dM. Over annuli
// r_{k−1} < r < r_k we replace I by its exact area mean
// Ī_k = [F(r_k) − F(r_{k−1})]/[π(r_k² − r_{k−1}²)], with the enclosed flux
// F(r) = (1−Γ)πr² + Γπρ²[1 − (1 − r²/ρ²)^{3/2}] (derived here by integrating
// I·2πr). The sum is exact when the mean magnification a(r) of each annulus is
// constant across it; the error of annulus k is about the covariance of I and
// a over it, estimated as ΔI_k·Δa_k·(its area)/4 with ΔI_k the change of I
// across it and Δa_k the change of the annulus means between its neighbours.
// The annulus with the largest estimate is split at its flux midpoint until the
// sum meets the tolerance.

type annulus struct {
	r    float64 // outer radius
	m    float64 // image area M(r) of the uniform disk of radius r
	e    float64 // its estimated absolute error
	n    int     // boundary samples used
	errA float64 // estimated error of this annulus's term
}

const maxAnnuli = 40

func (w *finiteWork) annuli(l *fsLens, zc complex128, rho, gamma, tol float64, warm *[5]complex128) (Finite, bool) {
	rho2 := rho * rho
	flux := func(r float64) float64 {
		x := 1 - r*r/rho2
		if x < 0 {
			x = 0
		}
		return (1-gamma)*math.Pi*r*r + gamma*math.Pi*rho2*(1-x*math.Sqrt(x))
	}
	inten := func(r float64) float64 {
		x := 1 - r*r/rho2
		if x < 0 {
			x = 0
		}
		return 1 - gamma*(1-1.5*math.Sqrt(x))
	}
	// Radius enclosing a given flux, by bisection on the monotone F.
	radiusAt := func(f, lo, hi float64) float64 {
		for i := 0; i < 60; i++ {
			mid := (lo + hi) / 2
			if flux(mid) < f {
				lo = mid
			} else {
				hi = mid
			}
		}
		return (lo + hi) / 2
	}
	// The error budget is shared: half for the annulus sum, half for the
	// contours (each asked for tol/2 relative to its own area). The contour
	// estimates run well above the true error (see ctTolCut), so the contours
	// are asked for ctTolCut times their share; the annulus-sum estimate has
	// no such margin and gets its share as it is.
	ctol := ctTolCut * tol / 2
	var ann [maxAnnuli]annulus
	n := 0
	samples := 0
	add := func(r float64) bool {
		area, e, ok := w.ct.disk(l, zc, r, ctol, warm)
		if !ok {
			return false
		}
		samples += w.ct.samples
		// insert in radius order
		i := n
		for i > 0 && ann[i-1].r > r {
			ann[i] = ann[i-1]
			i--
		}
		ann[i] = annulus{r: r, m: math.Abs(area), e: e}
		n++
		return true
	}
	ftot := math.Pi * rho2
	if !add(radiusAt(0.5*ftot, 0, rho)) || !add(rho) {
		return Finite{}, false
	}
	var mag, errSum float64
	for {
		// Sum and per-annulus error estimates.
		mag, errSum = 0, 0
		var amean [maxAnnuli]float64
		rin, min := 0.0, 0.0
		for k := 0; k < n; k++ {
			a := &ann[k]
			amean[k] = (a.m - min) / (math.Pi * (a.r*a.r - rin*rin))
			ik := (flux(a.r) - flux(rin)) / (math.Pi * (a.r*a.r - rin*rin))
			mag += ik * (a.m - min)
			rin, min = a.r, a.m
		}
		mag /= ftot
		worst, wi := -1.0, -1
		rin = 0
		for k := 0; k < n; k++ {
			a := &ann[k]
			var da float64
			switch {
			case n == 1:
				da = 0
			case k == 0:
				da = math.Abs(amean[1] - amean[0])
			case k == n-1:
				da = math.Abs(amean[k] - amean[k-1])
			default:
				da = math.Max(math.Abs(amean[k+1]-amean[k]), math.Abs(amean[k]-amean[k-1]))
			}
			di := math.Abs(inten(a.r) - inten(rin))
			a.errA = di * da * math.Pi * (a.r*a.r - rin*rin) / 4 / ftot
			errSum += a.errA
			if a.errA > worst {
				worst, wi = a.errA, k
			}
			rin = a.r
		}
		if errSum <= tol/2*mag || n == maxAnnuli {
			break
		}
		lo := 0.0
		if wi > 0 {
			lo = ann[wi-1].r
		}
		fm := (flux(lo) + flux(ann[wi].r)) / 2
		if !add(radiusAt(fm, lo, ann[wi].r)) {
			return Finite{}, false
		}
	}
	// Propagate the contour errors: A = (1/πρ²) Σ M_k (Ī_k − Ī_{k+1}).
	rin := 0.0
	var ib [maxAnnuli + 1]float64
	for k := 0; k < n; k++ {
		ib[k] = (flux(ann[k].r) - flux(rin)) / (math.Pi * (ann[k].r*ann[k].r - rin*rin))
		rin = ann[k].r
	}
	ce := 0.0
	for k := 0; k < n; k++ {
		ce += ann[k].e * math.Abs(ib[k]-ib[k+1])
	}
	return Finite{Mag: mag, Err: errSum + ce/ftot, Samples: samples}, true
}
