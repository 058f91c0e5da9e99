package lens

import (
	"math"
	"math/bits"
)

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
// I·2πr). In the area variable t = r²/ρ² and with a(t) = dM/(πρ² dt) the
// mean magnification on the circle of radius r, the error of annulus k is
// exactly the covariance term ∫(I − Ī_k)(a − ā_k) dt over it, ā_k its mean
// magnification (M_k − M_{k−1})/(π(r_k² − r_{k−1}²)).
//
// Error estimate (derived here). |∫(I − Ī)(a − ā) dt| ≤ max|a − ā|·∫|I − Ī| dt,
// and I is monotone, so ∫|I − Ī| dt ≤ ΔI_k·Δt_k/2. The annulus means alone
// do not bound max|a − ā|: two annuli whose means agree by chance say nothing
// of a caustic or a lens between them (a disk holding the primary near its
// limb over the central caustic, where a rises by 50 % and falls by 20 %
// across the outer annulus, once stopped at two annuli with means 0.2 % apart
// and a true error 3× its estimate). So the ends of each annulus are sampled
// too: a on the circle of radius r is the mean over the contour's boundary
// samples of the point-source magnification (edgeMean), free once the contour
// of M(r) is done. The estimate of annulus k is D_k·ΔI_k·Δt_k/2 with D_k the
// larger deviation of its two end values from ā_k: 3× the true error for a
// and I linear over the annulus (D·ΔI·Δt/6), and a bound for a narrow spike of
// a anywhere in an annulus over which I is linear (the error is then
// spike·(I(t_spike) − Ī), at most D·Δt·ΔI/2). The central disk has only its
// outer end: the point-source magnification at the centre is a point value,
// which next to a caustic differs from the circle means a hair away by
// factors (there, splitting the central disk for it cost 50 % more boundary
// samples over the limb-darkened rows of the reference table for nothing).
// The old estimate from the neighbouring means, ΔI_k·Δa_k·Δt_k/4 with Δa_k
// the larger difference of ā_k from a neighbour's, is kept as a floor. The
// annulus with the largest estimate is split at its flux midpoint until the
// sum meets the tolerance.

type annulus struct {
	r    float64 // outer radius
	m    float64 // image area M(r) of the uniform disk of radius r
	e    float64 // its estimated absolute error
	edge float64 // mean point-source magnification on the circle of radius r
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
	// contours (each asked for tol/2 relative to its own area).
	ctol := tol / 2
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
		ann[i] = annulus{r: r, m: math.Abs(area), e: e, edge: edgeMean(&w.ct)}
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
		ain := 0.0 // edge mean at rin (none for the central disk)
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
			dev := math.Abs(a.edge - amean[k])
			if k > 0 {
				dev = math.Max(dev, math.Abs(ain-amean[k]))
			}
			di := math.Abs(inten(a.r) - inten(rin))
			dt := (a.r*a.r - rin*rin) / rho2
			a.errA = di * dt * math.Max(da/4, dev/2)
			errSum += a.errA
			if a.errA > worst {
				worst, wi = a.errA, k
			}
			rin, ain = a.r, a.edge
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

// edgeMean is the mean point-source magnification over the source boundary
// of the last contour c integrated: the trapezoid rule in θ over its samples,
// which the contour placed densely where its images change fast. Where the
// boundary crosses a caustic inside an interval, the pair of images that
// appears or disappears there has |μ| ∝ (θ − θc)^{−1/2} (the fold law), whose
// integral from θc to the sample with the pair is 2·P·δ, P the pair's |μ| at
// that sample and δ its distance from θc; δ comes from the same law at the
// next sample out, P² ∝ 1/δ (derived here), or is taken as half the interval.
// The trapezoid there would be off by up to 4×, enough to matter for an
// error estimate though not for the area.
func edgeMean(c *contour) float64 {
	if len(c.s) == 0 {
		return 0
	}
	last := int32(0)
	for i := c.s[0].nxt; i != 0; i = c.s[i].nxt {
		last = i
	}
	sum := 0.0
	prev := last
	for i := int32(0); ; {
		a := &c.s[i]
		b := &c.s[a.nxt]
		h := b.th - a.th
		if h <= 0 {
			h += 2 * math.Pi
		}
		na, nb := bits.OnesCount8(a.r.img), bits.OnesCount8(b.r.img)
		switch {
		case na == nb+2:
			// The pair disappears inside (a, b): the fold law from a and the
			// sample before it.
			p := &c.s[prev]
			hp := a.th - p.th
			if hp <= 0 {
				hp += 2 * math.Pi
			}
			sum += foldPart(&a.r, &p.r, bits.OnesCount8(p.r.img) == na, hp, h) + h/2*(a.r.mag()-pairMag(&a.r)+b.r.mag())
		case nb == na+2:
			nx := &c.s[b.nxt]
			hn := nx.th - b.th
			if hn <= 0 {
				hn += 2 * math.Pi
			}
			sum += foldPart(&b.r, &nx.r, bits.OnesCount8(nx.r.img) == nb, hn, h) + h/2*(a.r.mag()+b.r.mag()-pairMag(&b.r))
		default:
			sum += h / 2 * (a.r.mag() + b.r.mag())
		}
		prev, i = i, a.nxt
		if i == 0 {
			break
		}
	}
	return sum / (2 * math.Pi)
}

// foldPart is ∫|μ| dθ of the pair of images of r that vanishes at a caustic
// crossing within h of it (see edgeMean); o is the sample hOut beyond r on
// the other side, used when it holds the pair too (same).
func foldPart(r, o *fsRoots, same bool, hOut, h float64) float64 {
	p := pairMag(r)
	d := h / 2
	if same {
		if po := pairMag(o); p > po {
			d = math.Min(h, hOut*po*po/(p*p-po*po))
		}
	}
	return 2 * p * d
}

// pairMag is the summed |μ| of the two images of r closest to a critical
// curve (smallest |det J|): next to a fold crossing, the pair that appears or
// disappears there.
func pairMag(r *fsRoots) float64 {
	d1, d2 := math.Inf(1), math.Inf(1)
	for k := 0; k < r.n; k++ {
		if !r.isImg(k) {
			continue
		}
		d := math.Abs(r.det[k])
		if d < d1 {
			d1, d2 = d, d1
		} else if d < d2 {
			d2 = d
		}
	}
	if math.IsInf(d2, 1) {
		return 0
	}
	return 1/d1 + 1/d2
}
