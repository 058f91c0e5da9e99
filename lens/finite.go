package lens

import (
	"fmt"
	"math"
)

// Method says how a finite-source magnification was computed.
type Method int

const (
	// PointSource: the point-source magnification, chosen when the quadrupole
	// term is below the tolerance and no caustic is near the source.
	PointSource Method = iota
	// Quadrupole: point source plus the analytic quadrupole term
	// ρ²∇²A/8·(1 − Γ/5) of the images (Gould 2008; Pejcha & Heyrovsky 2009).
	Quadrupole
	// Hexadecapole: the 13-point quadrupole + hexadecapole formula of
	// Gould (2008).
	Hexadecapole
	// Contour: full finite source by contour integration of the image
	// boundaries (Bozza 2010), annuli for limb darkening.
	Contour
)

func (m Method) String() string {
	switch m {
	case PointSource:
		return "point-source"
	case Quadrupole:
		return "quadrupole"
	case Hexadecapole:
		return "hexadecapole"
	case Contour:
		return "contour"
	}
	return fmt.Sprintf("Method(%d)", int(m))
}

// Finite is a finite-source magnification with its estimated error.
type Finite struct {
	Mag    float64
	Err    float64 // estimated absolute error of Mag
	Method Method
	// Samples is the number of point-source solutions used (1 for a point
	// source or quadrupole, 13 for the hexadecapole, boundary samples summed
	// over annuli for a contour).
	Samples int
}

// Safety factors of the method switch. Each approximation is accepted when its
// estimated error, multiplied by the factor, is within the tolerance; the
// factors were set on the reference set of finite_ref_test.go (true error ≤ tol
// at every point, with margin) and are pinned by TestSwitchWithinTolerance.
const (
	psSafety  = 4 // point source: |quadrupole| · psSafety ≤ tol·A
	quSafety  = 4 // quadrupole: estimated |hexadecapole| · quSafety ≤ tol·A
	hexSafety = 4 // hexadecapole: estimated next term · hexSafety ≤ tol·A
	// Distance from the source centre to the nearest caustic, in ρ, below which
	// no expansion is used: a caustic inside the disk makes every Taylor
	// expansion meaningless. Gould (2008) asks for one source diameter; the
	// distance estimate is rough, hence the margin.
	psReach = 3
	mpReach = 2.5
)

// FiniteMag is the magnification of a source of radius rho (θE) at zeta with
// linear limb darkening ld (the u of the package doc, in [0, 1]), to relative
// accuracy tol (0 means DefaultTol).
//
// The cheapest adequate method is chosen per call. From the images of the
// source centre (all five roots from the Solver, allRoots, warm-started from
// its previous call) it computes analytically the quadrupole term of each
// image (Laplacian of its magnification, see imgDeriv), an estimate of the
// hexadecapole term, and an estimate of the distance to the nearest caustic
// (from the near-critical images, and from sampled copies of the caustics
// kept per lens and reused for nearby s under orbital motion, see
// causticDistance). With these it picks, in order: point source, analytic
// quadrupole, the 13-point hexadecapole of Gould (2008) with a consistency
// check against the analytic terms, or full contour integration (contour.go;
// limb darkening by annuli, contour_annuli.go), asked for tol itself (its
// error estimate runs above the true error, see ctSegment). Err is the
// estimated absolute error; the tests measure the true error against the
// image-plane brute force (finite_table_test.go) and contours at tight
// tolerance (TestLimbNearLens, TestNearCausticConvergence).
//
// rho = 0 gives the point-source magnification. Errors: a non-finite or
// negative rho, ld outside [0, 1], a negative or non-finite tol, a non-finite
// zeta, an invalid lens, or a root solve that fails.
func (s *Solver) FiniteMag(zeta complex128, rho, ld, tol float64) (Finite, error) {
	switch {
	case math.IsNaN(rho) || math.IsInf(rho, 0) || rho < 0:
		return Finite{}, fmt.Errorf("lens: source radius rho = %v must be finite and >= 0", rho)
	case math.IsNaN(ld) || ld < 0 || ld > 1:
		return Finite{}, fmt.Errorf("lens: limb-darkening coefficient u = %v must lie in [0, 1]", ld)
	case math.IsNaN(tol) || math.IsInf(tol, 0) || tol < 0:
		return Finite{}, fmt.Errorf("lens: tolerance %v must be finite and >= 0", tol)
	case math.IsNaN(real(zeta)) || math.IsNaN(imag(zeta)) || math.IsInf(real(zeta), 0) || math.IsInf(imag(zeta), 0):
		return Finite{}, fmt.Errorf("lens: source position %v is not finite", zeta)
	}
	b := s.Binary()
	if !(b.S > 0) || !(b.Q > 0) || math.IsInf(b.S, 0) || math.IsInf(b.Q, 0) {
		return Finite{}, fmt.Errorf("lens: invalid binary s = %v, q = %v", b.S, b.Q)
	}
	if tol == 0 {
		tol = DefaultTol
	}
	w := finitePool.Get().(*finiteWork)
	defer finitePool.Put(w)
	return w.finiteMag(s, zeta, rho, ld, tol)
}

func (w *finiteWork) finiteMag(s *Solver, zeta complex128, rho, ld, tol float64) (Finite, error) {
	b := s.b
	l := s.cm
	var r0 fsRoots
	if err := s.allRoots(&r0, zeta); err != nil {
		return Finite{}, fmt.Errorf("lens: root solve failed at source %v (s = %v, q = %v)", zeta, b.S, b.Q)
	}
	a0 := r0.mag()
	if rho == 0 {
		return Finite{Mag: a0, Method: PointSource, Samples: 1}, nil
	}
	gamma := GammaFromLD(ld)
	est := l.estimate(&r0, zeta, rho)
	// The images may already put a caustic too close for any expansion.
	if est.dist > mpReach*rho {
		if d := causticDistance(b, zeta, rho); d < est.dist {
			est.dist = d
		}
	}
	qc := 1 - gamma/5
	hc := 1 - 11*gamma/35
	tolAbs := tol * a0
	switch {
	case est.dist > psReach*rho && est.qAbs*math.Abs(qc)*psSafety <= tolAbs:
		return Finite{Mag: a0, Err: est.qAbs * qc, Method: PointSource, Samples: 1}, nil
	case est.dist > psReach*rho && est.hAbs*hc*quSafety <= tolAbs:
		return Finite{Mag: a0 + est.q*qc, Err: est.hAbs * hc, Method: Quadrupole, Samples: 1}, nil
	case est.dist > mpReach*rho && est.next*hexSafety <= tolAbs:
		m, ok := computeMultipole(&l, &r0, zeta, rho, gamma, a0)
		if ok && m.sameCount && mpConsistent(m, est, qc, hc) {
			// The next term estimated from the 13-point terms themselves (a
			// geometric series) or from the analytic estimate, whichever is larger.
			e := est.next
			if m.q != 0 {
				e = math.Max(e, m.h*m.h/math.Abs(m.q))
			}
			if e*hexSafety <= tol*m.hex {
				return Finite{Mag: m.hex, Err: e, Method: Hexadecapole, Samples: 13}, nil
			}
		}
	}
	var f Finite
	var ok bool
	if ld == 0 {
		f, ok = w.uniform(&l, zeta, rho, tol, &r0.z)
	} else {
		f, ok = w.annuli(&l, zeta, rho, gamma, tol, &r0.z)
	}
	if !ok {
		return Finite{}, fmt.Errorf("lens: root solve failed on the source boundary at %v (rho = %v, s = %v, q = %v)", zeta, rho, b.S, b.Q)
	}
	f.Method = Contour
	return f, nil
}

// causticDistance is the distance from zeta to the caustics of b as the method
// switch needs it: exact enough where it decides (within psReach·ρ + a
// margin), a lower bound beyond. With orbital motion each epoch has its own s
// and the sampled caustics of a nearby s serve (causticFor), in tiers: a map
// within 0.05 θE of b's caustics for points far from them, within 10ρ, and
// within ρ/4 only where the decision hangs on it. A light curve through a
// caustic region then builds a few maps instead of one per epoch.
func causticDistance(b Binary, zeta complex128, rho float64) float64 {
	d := 0.0
	for _, shift := range [3]float64{0.05, 10 * rho, rho / 4} {
		m := causticFor(b, shift)
		d = m.distance(b, zeta, 10*rho)
		if d >= psReach*rho || m.shift(b) <= rho/4 {
			break // decided, or as exact as the last tier would be
		}
	}
	return d
}

// mpConsistent checks the 13-point terms against the analytic ones: a caustic
// near the stencil shows up as finite differences that disagree with the local
// derivatives.
func mpConsistent(m multipole, est causticEstimate, qc, hc float64) bool {
	qa := est.q * qc
	if math.Abs(m.q-qa) > 0.3*math.Abs(qa)+1e-3*est.qAbs*qc {
		return false
	}
	return math.Abs(m.h) <= 0.5*math.Abs(m.q)
}

// causticEstimate summarises the local expansion of the point-source
// magnification at the source centre.
type causticEstimate struct {
	q    float64 // Σ over images of the signed quadrupole ρ²∇²|μ|/8 (uniform source)
	qAbs float64 // Σ |quadrupole|
	hAbs float64 // estimated Σ |hexadecapole| (uniform source)
	next float64 // estimated size of the term after the hexadecapole
	dist float64 // estimated distance to the nearest caustic (θE)
}

// estimate computes the causticEstimate from the roots at the source centre.
//
// Per image, μ and its derivatives give a length d = |μ|/|∇μ|/2: for an image
// near a fold, where |μ| ∝ δ^{-1/2} with δ the distance to the caustic, d = δ
// exactly; for an image near a point lens, where |μ| ∝ 1/u, d = u/2. With it
// the hexadecapole is estimated as 0.4·(ρ/d)² times the quadrupole (the ratio is
// (105/288)(ρ/d)² for the fold and (3/32)(ρ/d)² for the point lens, derived here
// from the one-dimensional derivatives of δ^{-1/2} and 1/u) and the next term
// likewise from the hexadecapole.
//
// A source outside a caustic has no near-critical image, so FiniteMag also
// takes the distance to the sampled caustics (causticMap).
func (l *fsLens) estimate(r *fsRoots, zeta complex128, rho float64) causticEstimate {
	e := causticEstimate{dist: math.Inf(1)}
	r2 := rho * rho
	for k := 0; k < r.n; k++ {
		if !r.isImg(k) {
			continue
		}
		mu, lap, grad := l.imgDeriv(r.z[k])
		q := r2 / 2 * lap
		e.q += q
		aq := math.Abs(q)
		e.qAbs += aq
		d := math.Abs(mu) / (4 * grad)
		if grad == 0 {
			d = math.Inf(1)
		}
		x := r2 / (d * d)
		e.hAbs += 0.4 * aq * x
		e.next += 0.16 * aq * x * x
		// Only images that are near-critical say something about a caustic:
		// an image near a lens has |μ| ≈ 1 and d ≈ its distance from the lens.
		if math.Abs(mu) > 1.5 && d < e.dist {
			e.dist = d
		}
	}
	return e
}
