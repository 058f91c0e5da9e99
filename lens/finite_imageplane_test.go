package lens

import (
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"slices"
	"testing"
)

// Image-plane brute force: the finite-source reference of the finite-source
// tests, independent of the contour code and of every root finder.
//
// Method. Inverse ray shooting (Kayser, Refsdal & Stabell 1986, A&A 166, 36;
// volume/page from memory) uses only the forward lens equation
// β(z) = z − Σ mᵢ/(z̄ − zᵢ): by conservation of surface brightness the flux of
// a source of profile I is ∫ I(β(z)) d²z over the image plane, so a uniform
// disk of radius ρ at ζ has the magnification
//
//	A = area{z : |β(z) − ζ| ≤ ρ} / (πρ²),
//
// and a limb-darkened disk the image-plane integral of its normalised profile
// W(|β(z) − ζ|/ρ) over πρ². Instead of a grid of rays we walk an adaptive
// quadtree of square cells (centre c, half-side h) with two rigorous bounds,
// both derived here from the lens equation (lenses on the real axis, so
// β = z − g(z̄) with g(w) = Σ mᵢ/(w − zᵢ) holomorphic):
//
//   - first order: the real Jacobian of β has operator norm 1 + |g′| ≤
//     1 + Σ mᵢ/dᵢ² =: L on the cell, dᵢ the distance from lens i to the cell, so
//     |β(z) − β(c)| ≤ L·√2h; a cell with |β(c) − ζ| > ρ + L√2h holds no image
//     and one with |β(c) − ζ| < ρ − L√2h lies inside an image;
//   - second order: the Taylor remainder of g along the segment c→z gives
//     |β(z) − β(c) − dβ(c)(z − c)| ≤ |z − c|²·sup|g″|/2 ≤ 2h²·Σ mᵢ/dᵢ³ =: B₂,
//     hence also |β(z) − β(c)| ≤ (1 + |g′(c̄)|)·√2h + B₂, the sharper of the
//     two once the cell is small.
//
// A cell that neither test settles (for the limb-darkened disk: any cell not
// outside) is split until B₂ ≤ η·ρ (η is the resolution parameter). There β is
// replaced by its linearisation, under which the cell maps onto a
// parallelogram P of the source plane and the part of the cell inside the
// image has the exact area |P ∩ disk|/|det J| (and the profile integral
// ∫_{P∩disk} W/|det J|), computed in closed form by fanning P from the disk
// centre (diskPoly). By the B₂ bound, the linearised and the true image differ
// only where the linearised |β − ζ| lies within B₂ of ρ: the area of that band,
// |P ∩ annulus|/|det J|, is a rigorous bound on the cell's error for the
// uniform disk, summed into Bound. For the limb-darkened disk, a cell deep
// inside the image is integrated instead by a Gauss–Legendre rule on the exact
// lens equation (gaussCell). Cells holding a lens are never linearised; they
// are split down to hMin and count their full area into Bound. The leaves'
// error falls as η (the band width), by about 4 per extra level of
// subdivision: imagePlaneMag repeats the walk with η/4 (half the leaf size)
// until its error estimate (the rigorous bound, or the change between walks)
// is below the asked accuracy.
//
// Search region (derived here): an image z of a source point β with
// |β| ≤ b satisfies |z| ≤ b + Σ mᵢ/|z − zᵢ| ≤ b + 1/(|z| − a) for |z| > a =
// max|zᵢ| (Σ mᵢ = 1), so (|z| − a)(|z| − b) ≤ 1 once |z| > max(a, b), i.e.
// |z| ≤ R* = (a + b + √((a − b)² + 4))/2. The root cell is the square of
// half-side R* about the origin.

// ipMass is a point mass of the image-plane brute force (positions on the
// real axis, masses summing to 1).
type ipMass struct{ z, m float64 }

// binaryMasses returns the two masses of b in the frame of the package doc.
func binaryMasses(b Binary) []ipMass {
	z1, z2, m1, m2 := b.Lenses()
	return []ipMass{{z1, m1}, {z2, m2}}
}

// ipWalk is one quadtree walk at a fixed resolution η.
type ipWalk struct {
	lens  []ipMass
	zeta  complex128
	rho   float64
	gamma float64 // Γ of the linear law (0: uniform disk)
	eta   float64
	hMin  float64

	sum   float64 // ∫ W over the image plane (area for the uniform disk)
	bound float64 // rigorous bound on |sum − true| for the uniform disk (for Γ > 0 it misses the profile's variation, and run reports NaN)
	cells int     // cells visited
	leafs int     // linearised leaves
}

// imagePlaneRun is the result of one walk.
type imagePlaneRun struct {
	Mag, Bound   float64 // magnification and its rigorous error bound (uniform disk; NaN for a limb-darkened one)
	Cells, Leafs int
}

func (w *ipWalk) run() imagePlaneRun {
	a := 0.0
	for _, l := range w.lens {
		a = math.Max(a, math.Abs(l.z))
	}
	b := fsAbs(w.zeta) + w.rho
	r := (a + b + math.Sqrt((a-b)*(a-b)+4)) / 2
	if w.hMin == 0 {
		w.hMin = 1e-10 * w.rho
	}
	w.cell(0, r*(1+1e-9))
	n := math.Pi * w.rho * w.rho
	bound := w.bound / n
	if w.gamma != 0 {
		bound = math.NaN()
	}
	return imagePlaneRun{Mag: w.sum / n, Bound: bound, Cells: w.cells, Leafs: w.leafs}
}

// wMax is the largest value of the normalised profile W (at the disk centre).
func (w *ipWalk) wMax() float64 { return 1 + w.gamma/2 }

func (w *ipWalk) cell(c complex128, h float64) {
	w.cells++
	x, y := real(c), imag(c)
	var g, gc complex128 // g(c̄) = Σ m/(c̄ − zᵢ) and κ = ∂β/∂z̄ = −g′(c̄) = Σ m/(c̄ − zᵢ)²
	l1, s3 := 1.0, 0.0
	hasLens := false
	for _, m := range w.lens {
		dx := math.Max(0, math.Abs(x-m.z)-h)
		dy := math.Max(0, math.Abs(y)-h)
		d2 := dx*dx + dy*dy
		if d2 == 0 {
			hasLens = true
		} else {
			l1 += m.m / d2
			s3 += m.m / (d2 * math.Sqrt(d2))
		}
		inv := 1 / complex(x-m.z, -y) // 1/(c̄ − zᵢ)
		g += complex(m.m, 0) * inv
		gc += complex(m.m, 0) * inv * inv
	}
	v := c - g - w.zeta // β(c) − ζ
	r := fsAbs(v)
	sq2h := math.Sqrt2 * h
	if !hasLens {
		lip := l1 * sq2h
		b2 := 2 * h * h * s3
		// dβ = dz + κ dz̄, of operator norm 1 + |κ|.
		if l2 := (1+fsAbs(gc))*sq2h + b2; l2 < lip {
			lip = l2
		}
		if r-w.rho > lip {
			return
		}
		if w.gamma == 0 && w.rho-r > lip {
			w.sum += 4 * h * h
			return
		}
		if b2 <= w.eta*w.rho || h <= w.hMin {
			if w.leaf(c, v, gc, h, b2) {
				return
			}
		}
	}
	if h <= w.hMin {
		// A cell at the resolution floor holding a lens (or singular):
		// its whole area is uncertain.
		w.bound += 4 * h * h * w.wMax()
		return
	}
	h2 := h / 2
	w.cell(c+complex(-h2, -h2), h2)
	w.cell(c+complex(h2, -h2), h2)
	w.cell(c+complex(h2, h2), h2)
	w.cell(c+complex(-h2, h2), h2)
}

// leaf integrates the linearised cell: β(c + d) − ζ ≈ v + d + κ d̄. It
// reports false when the linear map is too close to singular for the
// division by det J (the cell is then split further).
func (w *ipWalk) leaf(c, v, kappa complex128, h, b2 float64) bool {
	det := 1 - fsAbs2(kappa)
	if math.Abs(det) < 1e-12 {
		return false
	}
	var p [4]complex128
	for k, d := range [4]complex128{complex(-h, -h), complex(h, -h), complex(h, h), complex(-h, h)} {
		p[k] = v + d + kappa*fsConj(d)
	}
	cellArea := 4 * h * h
	var val float64
	if w.gamma != 0 && w.deepInside(p[:]) {
		val = w.gaussCell(c, h)
	} else {
		val = diskPoly(p[:], w.rho, w.gamma) / det
	}
	val = math.Min(math.Max(val, 0), cellArea*w.wMax())
	w.sum += val
	w.leafs++
	if w.gamma != 0 {
		return true // no rigorous bound for the profile (see ipWalk.bound)
	}
	// The band where the linearised |β − ζ| is within B₂ of ρ.
	hi := diskPoly(p[:], w.rho+b2, 0) / det
	lo := 0.0
	if w.rho > b2 {
		lo = diskPoly(p[:], w.rho-b2, 0) / det
	}
	w.bound += math.Min(math.Max(hi-lo, 0), cellArea)
	return true
}

// deepInside reports whether the parallelogram p lies inside the disk by at
// least twice its diameter: there the profile is analytic on a neighbourhood
// of the cell wide enough for the 6×6 Gauss–Legendre rule of gaussCell
// (relative error ~1e-11 from the Bernstein-ellipse bound, the nearest
// singularity of the profile being ≥ 4 half-widths away), which, unlike the
// fan of diskPoly, neither cancels O(1) terms down to the cell's area nor
// divides by det J.
func (w *ipWalk) deepInside(p []complex128) bool {
	rmax, diam := 0.0, 0.0
	for i := range p {
		rmax = math.Max(rmax, fsAbs(p[i]))
		for j := 0; j < i; j++ {
			diam = math.Max(diam, fsAbs(p[i]-p[j]))
		}
	}
	return w.rho-rmax-w.eta*w.rho >= 2*diam
}

// 6-point Gauss–Legendre nodes and weights on [−1, 1] (the standard values,
// e.g. Abramowitz & Stegun 1964, Table 25.4).
var (
	ipGLX = [6]float64{-0.9324695142031521, -0.6612093864662645, -0.2386191860831969, 0.2386191860831969, 0.6612093864662645, 0.9324695142031521}
	ipGLW = [6]float64{0.1713244923791704, 0.3607615730481386, 0.4679139345726910, 0.4679139345726910, 0.3607615730481386, 0.1713244923791704}
)

// gaussCell integrates the profile over the cell of centre c and half-side
// h by the 6×6 Gauss–Legendre product rule on the exact lens equation (no
// linearisation: the cell is deep inside the image, see deepInside).
func (w *ipWalk) gaussCell(c complex128, h float64) float64 {
	sum := 0.0
	for i, xi := range ipGLX {
		for j, yj := range ipGLX {
			z := c + complex(h*xi, h*yj)
			beta := z
			for _, m := range w.lens {
				beta -= complex(m.m, 0) / fsConj(z-complex(m.z, 0))
			}
			r := fsAbs(beta-w.zeta) / w.rho
			sum += ipGLW[i] * ipGLW[j] * (1 - w.gamma + 1.5*w.gamma*math.Sqrt(math.Max(0, 1-r*r)))
		}
	}
	return sum * h * h
}

// diskPoly is the integral over the intersection of the disk |y| ≤ R with the
// polygon p (counter-clockwise positive, a negative value for a clockwise
// polygon) of the normalised linear-law profile W(|y|/R) = 1 − Γ + (3Γ/2)·
// √(1 − |y|²/R²) (mean 1 over the disk; Γ = 0 gives the area). It sums over
// the edges the signed integral over the triangle (0, pₖ, pₖ₊₁) clipped by the
// circle: the parts of an edge inside the disk contribute a triangle, the
// parts outside a circular sector (the standard circle–polygon intersection),
// and for Γ > 0 the triangle's √ term comes from the closed form of fanV.
func diskPoly(p []complex128, R, gamma float64) float64 {
	sum := 0.0
	n := len(p)
	for k := 0; k < n; k++ {
		sum += diskEdge(p[k]/complex(R, 0), p[(k+1)%n]/complex(R, 0), gamma)
	}
	return sum * R * R
}

// diskEdge is the signed profile integral over the triangle (0, a, b) ∩ unit disk.
func diskEdge(a, b complex128, gamma float64) float64 {
	d := b - a
	A := fsAbs2(d)
	if A == 0 {
		return 0
	}
	B := real(a)*real(d) + imag(a)*imag(d)
	C := fsAbs2(a) - 1
	disc := B*B - A*C
	if disc <= 0 {
		return fanSector(a, b)
	}
	sq := math.Sqrt(disc)
	// Stable roots of A t² + 2B t + C = 0.
	var t1, t2 float64
	if B >= 0 {
		q := -(B + sq)
		t1, t2 = q/A, C/q
	} else {
		q := -B + sq
		t1, t2 = C/q, q/A
	}
	if t1 > t2 {
		t1, t2 = t2, t1
	}
	if t1 >= 1 || t2 <= 0 {
		return fanSector(a, b)
	}
	sum := 0.0
	p0, p1 := a, b
	on0, on1 := false, false
	if t1 > 0 {
		p0, on0 = a+complex(t1, 0)*d, true
		sum += fanSector(a, p0)
	}
	if t2 < 1 {
		p1, on1 = a+complex(t2, 0)*d, true
		sum += fanSector(p1, b)
	}
	return sum + fanInside(p0, p1, on0, on1, gamma)
}

// fanSector is the profile integral over the sector of the unit disk between
// the directions of a and b (∫₀¹ W r dr = 1/2 per radian).
func fanSector(a, b complex128) float64 {
	return math.Atan2(fsCross(a, b), real(a)*real(b)+imag(a)*imag(b)) / 2
}

// fanInside is the profile integral over the triangle (0, p, q), both points
// in the unit disk (on0, on1: the point is a crossing of the circle):
// (1 − Γ)·area + (3Γ/2)·∫√(1 − r²), the last by fanV.
func fanInside(p, q complex128, on0, on1 bool, gamma float64) float64 {
	area := fsCross(p, q) / 2
	if gamma == 0 {
		return area
	}
	d := q - p
	ld := fsAbs(d)
	if ld == 0 {
		return 0
	}
	u := d / complex(ld, 0)
	hp := imag(fsConj(u) * p) // signed distance of the edge's line from 0
	c := math.Abs(hp)
	if c < 1e-300 {
		return (1 - gamma) * area
	}
	sgn := -1.0
	if hp < 0 {
		sgn = 1
	}
	sp := sgn * real(fsConj(u)*p)
	sq := sgn * real(fsConj(u)*q)
	return (1-gamma)*area + gamma/2*(fanV(sq, c, fanW(q, on1))-fanV(sp, c, fanW(p, on0)))
}

// fanW is √(1 − |p|²), exactly 0 for a point found on the circle: there the
// rounding of |p|² would leave an error of √ε ≈ 1e-8 in it, which the
// cancelling √-singular terms of fanV pass on to the result.
func fanW(p complex128, on bool) float64 {
	if on {
		return 0
	}
	return math.Sqrt(math.Max(0, 1-fsAbs2(p)))
}

// fanV is an antiderivative for ∫√(1 − r²) over the triangle between the
// origin and a line at distance c < 1 from it, parametrised by the position s
// along the line (s increasing counter-clockwise; w = √(1 − c² − s²)): the
// triangle integral is [fanV(s₁) − fanV(s₀)]/3. Derived here: in polar
// coordinates the integral is (1/3)∫[1 − (1 − c²sec²θ)^{3/2}] dθ, and with
// t = tan θ, a² = 1 − c²,
//
//	∫(1 − c²sec²θ)^{3/2} dθ = −(c²t/2)√(a² − c²t²) − (c a²/2 + c) asin(ct/a) + atan(t/√(a² − c²t²)),
//
// written in s = c·t (so √(a² − c²t²) = w) and with θ − atan(s/(c w)) as one
// atan2 that stays finite as c → 0. (Differentiating checks it; the tests
// check it against quadrature.)
func fanV(s, c, w float64) float64 {
	return c*s*w/2 + c*(3-c*c)/2*math.Atan2(s, w) - math.Atan2(s*c*(1-w), c*c*w+s*s)
}

// imagePlaneMag is the converged brute-force magnification of a disk of
// radius rho at zeta (linear limb darkening ld) behind the point masses lens.
// It walks the quadtree at η = 1e-3, 2.5e-4, … (each step halves the leaf
// size) until the error estimate err is at most relTol·A. For the uniform
// disk err is the larger of the rigorous bound of the last walk and the
// change from the walk before. For the limb-darkened disk, which has no
// rigorous bound (see ipWalk), err is three times the last change, from the
// third walk on, and at least 1e-6·A: the leaf error falls by about 4 per
// walk, but not smoothly (cells change type between walks); against the exact
// single-lens values (TestImagePlaneSingleLens) the error of a walk was up to
// 6 times the change to the next one, and below 1e-6 three times the last
// change once fell short (1.1e-7 against 9e-8). It gives up after maxLevel
// walks and returns the last one with its estimate.
func imagePlaneMag(lens []ipMass, zeta complex128, rho, ld, relTol float64) (mag, err float64, runs []imagePlaneRun) {
	const maxLevel = 8
	g := GammaFromLD(ld)
	eta := 1e-3
	for lvl := 0; lvl < maxLevel; lvl++ {
		w := ipWalk{lens: lens, zeta: zeta, rho: rho, gamma: g, eta: eta}
		runs = append(runs, w.run())
		eta /= 4
		if len(runs) < 2 || (g != 0 && len(runs) < 3) {
			continue
		}
		cur, prev := runs[len(runs)-1], runs[len(runs)-2]
		mag = cur.Mag
		err = math.Abs(cur.Mag - prev.Mag)
		if g == 0 {
			err = math.Max(err, cur.Bound)
		} else {
			err = math.Max(3*err, 1e-6*mag)
		}
		if err <= relTol*mag {
			break
		}
	}
	return mag, err, runs
}

// diskPolyNumeric integrates the profile over the parallelogram p0 + s·e1 +
// t·e2 (s, t ∈ [0, 1]) ∩ unit disk by nested adaptive Gauss–Kronrod in (s, t),
// the inner integral split where the line meets the circle: an independent
// check of the fan formulas of diskPoly.
func diskPolyNumeric(p0, e1, e2 complex128, gamma float64) float64 {
	det := fsCross(e1, e2)
	inner := func(s float64) float64 {
		a := p0 + complex(s, 0)*e1
		W := func(t float64) float64 {
			r2 := fsAbs2(a + complex(t, 0)*e2)
			if r2 > 1 {
				return 0
			}
			return 1 - gamma + 1.5*gamma*math.Sqrt(1-r2)
		}
		A := fsAbs2(e2)
		B := real(a)*real(e2) + imag(a)*imag(e2)
		C := fsAbs2(a) - 1
		disc := B*B - A*C
		if disc <= 0 {
			return 0
		}
		t0 := math.Max(0, (-B-math.Sqrt(disc))/A)
		t1 := math.Min(1, (-B+math.Sqrt(disc))/A)
		if t0 >= t1 {
			return 0
		}
		return ipAdapt(W, t0, t1, 1e-11, 0)
	}
	return det * ipAdapt(inner, 0, 1, 1e-10, 0)
}

// ipAdapt is adaptive Gauss–Kronrod bisection to an error of tolPerLen per
// unit length, at most 25 levels deep: only the intervals around a kink of
// the integrand go deep, and evaluation noise below tolPerLen cannot make
// every interval split to the bottom.
func ipAdapt(f func(float64) float64, a, b, tolPerLen float64, depth int) float64 {
	k, e := fsGK(f, a, b)
	if e <= tolPerLen*(b-a) || depth >= 25 {
		return k
	}
	m := (a + b) / 2
	return ipAdapt(f, a, m, tolPerLen, depth+1) + ipAdapt(f, m, b, tolPerLen, depth+1)
}

// TestDiskPolyQuadrature checks the closed-form circle–polygon integrals
// against nested quadrature on parallelograms inside, across and outside the
// disk, including thin slivers over the limb (the shape of cells on a
// critical curve) and one holding the whole disk.
func TestDiskPolyQuadrature(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	type para struct{ p0, e1, e2 complex128 }
	var cases []para
	cases = append(cases,
		para{-2 - 2i, 4, 4i},              // holds the disk: π
		para{0.2 + 0.1i, 0.3, 0.1 + 0.2i}, // inside
		para{0.8 - 0.3i, 0.5, 0.6i},       // across the limb
		para{1.5, 0.2, 0.2i},              // outside
		para{1 - 0.005i, 1e-2 * cmplx.Rect(1, 0.5), 1e-7 * cmplx.Rect(1, 0.5+math.Pi/2)}, // thin sliver over the limb
		para{-1.01, 0.02i, 1e-6}, // sliver along the limb
	)
	for i := 0; i < 20; i++ {
		size := math.Pow(10, -3*rng.Float64())
		c := cmplx.Rect(0.5+0.7*rng.Float64(), 2*math.Pi*rng.Float64())
		e1 := cmplx.Rect(size, 2*math.Pi*rng.Float64())
		e2 := cmplx.Rect(size*math.Pow(10, -4*rng.Float64()), 2*math.Pi*rng.Float64())
		cases = append(cases, para{c - (e1+e2)/2, e1, e2})
	}
	for _, c := range cases {
		p := []complex128{c.p0, c.p0 + c.e1, c.p0 + c.e1 + c.e2, c.p0 + c.e2}
		area := math.Abs(fsCross(c.e1, c.e2))
		for _, g := range []float64{0, 0.5} {
			got := diskPoly(p, 1, g)
			want := diskPolyNumeric(c.p0, c.e1, c.e2, g)
			if math.Abs(got-want) > 1e-9*area+1e-15 {
				t.Errorf("parallelogram %v + s·%v + t·%v, Γ = %g: closed form %.15g, quadrature %.15g (diff %.2g of the area)",
					c.p0, c.e1, c.e2, g, got, want, (got-want)/area)
			}
		}
	}
	// Scaling with R: the same shape at radius 3 carries R² times the integral.
	p := []complex128{0.8 - 0.3i, 1.3 - 0.3i, 1.3 + 0.3i, 0.8 + 0.3i}
	q := make([]complex128, len(p))
	for i := range p {
		q[i] = 3 * p[i]
	}
	if a, b := diskPoly(q, 3, 0.5), 9*diskPoly(p, 1, 0.5); math.Abs(a-b) > 1e-13*b {
		t.Errorf("R scaling: %.15g vs %.15g", a, b)
	}
}

// TestImagePlaneSingleLens: a single point lens, against the exact uniform
// and limb-darkened (Γ = 0.5 ⇔ u = 0.6) disk magnifications of references.md
// §2b and §2c (scipy dblquad, the 1-D integral and the closed form of Witt &
// Mao 1994 agreeing to ≤ 1e-12). The true error must lie within the brute
// force's own error estimate, and that below 1e-4.
func TestImagePlaneSingleLens(t *testing.T) {
	single := []ipMass{{0, 1}}
	rhos := []float64{0.001, 0.01, 0.1, 1}
	cols := []int{0, 1, 2, 3, 4, 5, 6}
	if testing.Short() {
		rhos = []float64{0.01}
		cols = []int{0, 3, 5} // u/ρ = 0, 1, 2
	}
	worst := 0.0
	for _, row := range diskTable { // references.md §2b, §2c (single_test.go)
		rho := row.rho
		if !slices.Contains(rhos, rho) {
			continue
		}
		for _, i := range cols {
			zr := diskZ[i]
			for _, c := range []struct {
				ld   float64
				want float64
			}{{0, row.a[i]}, {0.6, row.aLD[i]}} {
				// Off the real axis, so that the grid is not aligned with the lens.
				zeta := cmplx.Rect(zr*rho, 0.7)
				m, e, _ := imagePlaneMag(single, zeta, rho, c.ld, finiteRefAcc)
				d := math.Abs(m - c.want)
				worst = math.Max(worst, d/c.want)
				if d > e || e > 1e-4*m {
					t.Errorf("ρ=%g u/ρ=%g ld=%g: brute force %.12g ± %.2g, exact %.12g (rel err %.2g)", rho, zr, c.ld, m, e/m, c.want, d/c.want)
				}
			}
		}
	}
	t.Logf("worst relative error %.2g", worst)
	// The binary frame in the single-lens limit (s = 30, q = 1e-9: the
	// companion's shear changes A by ≲ 1e-8 here) gives the same.
	b := Binary{S: 30, Q: 1e-9}
	z1, _, _, _ := b.Lenses()
	for _, zr := range []float64{0.5, 1.1} {
		const rho = 0.01
		want := DiskMag(zr*rho, rho)
		m, e, _ := imagePlaneMag(binaryMasses(b), complex(z1, 0)+cmplx.Rect(zr*rho, 2), rho, 0, finiteRefAcc)
		if d := math.Abs(m - want); d > e+1e-8*want {
			t.Errorf("binary single-lens limit u/ρ=%g: %.12g ± %.2g, DiskMag %.12g", zr, m, e/m, want)
		}
	}
}

// TestImagePlaneConverges shows the convergence of the brute force as the
// leaves are halved (η/4 per level) at a cusp, a fold crossing and a disk
// holding the primary (central caustic of q = 1e-3; uniform and
// limb-darkened): the rigorous bound of the uniform disk falls by about 4 per
// level, successive values agree within their bounds, and the change per
// level falls too (the error estimate of imagePlaneMag).
func TestImagePlaneConverges(t *testing.T) {
	type pt struct {
		name string
		b    Binary
		zeta complex128
		rho  float64
		ld   float64
	}
	var pts []pt
	{
		b := Binary{S: 1.2, Q: 1e-3}
		crit, caus := fsCriticalPoints(b, 720)
		cs := fsCusps(crit, caus, 720)
		pts = append(pts, pt{"cusp", b, cs[0] + 5e-4, 1e-3, 0}, pt{"fold crossing", b, caus[100] + 3e-4i, 1e-3, 0})
		z1, _, _, _ := b.Lenses()
		pts = append(pts, pt{"lens in disk", b, complex(z1, 0) + 2e-3 + 1e-3i, 1e-2, 0})
		pts = append(pts, pt{"lens in disk, u=0.6", b, complex(z1, 0) + 2e-3 + 1e-3i, 1e-2, 0.6})
	}
	levels := 5
	if testing.Short() {
		levels = 4
	}
	for _, p := range pts {
		eta := 1e-3
		var runs []imagePlaneRun
		for k := 0; k < levels; k++ {
			w := ipWalk{lens: binaryMasses(p.b), zeta: p.zeta, rho: p.rho, gamma: GammaFromLD(p.ld), eta: eta}
			runs = append(runs, w.run())
			eta /= 4
		}
		for k, r := range runs {
			line := fmt.Sprintf("%-13s level %d: A = %.12g, bound %.2g, %8d cells", p.name, k, r.Mag, r.Bound/r.Mag, r.Cells)
			if k > 0 {
				d := math.Abs(r.Mag - runs[k-1].Mag)
				line += fmt.Sprintf(", change %.2g", d/r.Mag)
				if p.ld != 0 {
					// no rigorous bound for the limb-darkened disk
				} else if d > r.Bound+runs[k-1].Bound {
					t.Errorf("%s: levels %d and %d differ by %.3g, more than their bounds %.3g + %.3g", p.name, k-1, k, d, runs[k-1].Bound, r.Bound)
				} else if ratio := r.Bound / runs[k-1].Bound; ratio > 0.35 || ratio < 0.15 {
					t.Errorf("%s: bound fell by %.3g from level %d to %d, want about 1/4", p.name, ratio, k-1, k)
				}
			}
			t.Log(line)
		}
		// The change per level must fall with the bound (to a floor 100×
		// below the 1e-4 the reference asks).
		first := math.Abs(runs[1].Mag - runs[0].Mag)
		last := math.Abs(runs[levels-1].Mag - runs[levels-2].Mag)
		if last > first/8 && last > 1e-6*runs[0].Mag {
			t.Errorf("%s: change per level %.3g at the start, %.3g at the end: not converging", p.name, first, last)
		}
	}
}

// BenchmarkImagePlane: the cost per point of the brute force on the points of
// BenchmarkFiniteNearCaustic (ρ = 1e-3 within 2ρ of a fold or cusp of s = 1.2,
// q = 1e-3), beside FiniteMag at tol 1e-3 in the same run. "walk" is one
// quadtree walk at η = 1e-3 (true error ~1e-5, rigorous bound ~1e-3: the
// accuracy of FiniteMag at tol 1e-3); "converged" is the reference of the
// table (imagePlaneMag to 2e-5 with its doubling steps).
func BenchmarkImagePlane(b *testing.B) {
	bin := Binary{S: 1.2, Q: 1e-3}
	pts := nearCausticPoints(bin, 1e-3, 64, 5)
	b.Run("finite", func(b *testing.B) {
		s := NewSolver(bin)
		for i := 0; b.Loop(); i++ {
			f, _ := s.FiniteMag(pts[i%len(pts)], 1e-3, 0, 1e-3)
			benchSink += f.Mag
		}
	})
	b.Run("walk", func(b *testing.B) {
		for i := 0; b.Loop(); i++ {
			w := ipWalk{lens: binaryMasses(bin), zeta: pts[i%len(pts)], rho: 1e-3, eta: 1e-3}
			benchSink += w.run().Mag
		}
	})
	b.Run("converged", func(b *testing.B) {
		for i := 0; b.Loop(); i++ {
			m, _, _ := imagePlaneMag(binaryMasses(bin), pts[i%len(pts)], 1e-3, 0, finiteRefAcc)
			benchSink += m
		}
	})
}
