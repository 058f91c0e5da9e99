package lens

import (
	"math"
	"sync"
)

// This file holds the root finding shared by Solver and the finite-source
// code: the lens polynomial (fsLens.poly), the Aberth iteration (aberth, in
// binary.go) and its cold starts, and for the finite-source code all five
// roots of the polynomial (true images and the spurious roots), kept in a
// stable order so that they can be followed along the boundary of a source
// (fsLens.solve, Solver.allRoots; fsLens.track for points between two known
// ones), plus analytic derivatives of the image magnification with respect to
// the source position. Solver.Images keeps its own, stricter selection of the
// images (select_): it must reject an invalid set and retry, where the
// contour must always have all five roots.

// fsLens is a binary lens in some coordinate frame: the positions z1, z2 of
// the primary and the secondary on the real axis and their mass fractions.
// newFSLens gives the centre-of-mass frame of the package doc; shifted moves
// it along the real axis (the lens equation is unchanged by such a shift).
// The lens polynomial is built and solved in the frame whose origin is o, the
// lighter lens (see poly). Solver and the finite-source code share this type:
// one polynomial, one Aberth iteration (aberth), one set of cold starts.
type fsLens struct {
	z1, z2, m1, m2 float64
	o              float64 // origin of the polynomial's working frame in these coordinates
	b              Binary
}

func newFSLens(b Binary) fsLens {
	z1, z2, m1, m2 := b.Lenses()
	o := z2
	if b.Q > 1 {
		o = z1
	}
	return fsLens{z1: z1, z2: z2, m1: m1, m2: m2, o: o, b: b}
}

// shifted returns l in the coordinates z − d.
func (l fsLens) shifted(d float64) fsLens {
	l.z1 -= d
	l.z2 -= d
	l.o -= d
	return l
}

// fsRoots are the roots of the lens polynomial at one source position.
type fsRoots struct {
	z   [5]complex128 // roots, polished on the lens equation where they are images
	det [5]float64    // det J at z (meaningful for images)
	res [5]float64    // lens-equation residual |ζ(z) − ζ| relative to its round-off scale
	img uint8         // bit k set: z[k] is a true image
	n   int           // number of roots (5; 4 when the source sits exactly on a lens)
}

func (r *fsRoots) isImg(k int) bool { return r.img&(1<<k) != 0 }

// fsPoly fills c with the coefficients (c[k] multiplies z^k) of the fifth-degree
// lens polynomial of Witt (1990, A&A 236, 311) for source zeta, written as in
// references.md §3 [W90]: with D = (z−z1)(z−z2), N = m1(z−z2) + m2(z−z1) and
// Pi = (ζ̄ − zi)D + N, p(z) = (z − ζ)P1P2 − D(m1P2 + m2P1).
//
// The polynomial is written in a frame with its origin at o (real): the roots
// are z − o. With o at the lighter lens the images next to it, which decide the
// planetary anomalies, are small numbers whose digits the polynomial keeps; in
// the centre-of-mass frame a q = 1e-5 planet's images lose half their digits.
//
// It returns the degree: 5, or 4 when the source sits on a lens (to round-off)
// and the leading coefficient vanishes.
func (l *fsLens) poly(c *[6]complex128, zeta complex128, o float64) int {
	return wittPoly(c, l.z1-o, l.z2-o, l.m1, l.m2, zeta-complex(o, 0))
}

// wittPoly is fsLens.poly for lenses at z1, z2 (real) with masses m1, m2 and
// source zeta, all in the polynomial's frame.
func wittPoly(c *[6]complex128, z1, z2, m1, m2 float64, zeta complex128) int {
	zb := complex(real(zeta), -imag(zeta))
	d1, d0 := complex(-(z1+z2), 0), complex(z1*z2, 0)
	n0 := complex(-(m1*z2 + m2*z1), 0)
	w1, w2 := zb-complex(z1, 0), zb-complex(z2, 0)
	a2, a1, a0 := w1, w1*d1+1, w1*d0+n0
	b2, b1, b0 := w2, w2*d1+1, w2*d0+n0
	q4 := a2 * b2
	q3 := a2*b1 + a1*b2
	q2 := a2*b0 + a1*b1 + a0*b2
	q1 := a1*b0 + a0*b1
	q0 := a0 * b0
	cm1, cm2 := complex(m1, 0), complex(m2, 0)
	r2 := cm1*b2 + cm2*a2
	r1 := cm1*b1 + cm2*a1
	r0 := cm1*b0 + cm2*a0
	c[5] = q4
	c[4] = q3 - zeta*q4 - r2
	c[3] = q2 - zeta*q3 - (r1 + d1*r2)
	c[2] = q1 - zeta*q2 - (r0 + d1*r1 + d0*r2)
	c[1] = q0 - zeta*q1 - (d1*r0 + d0*r1)
	c[0] = -zeta*q0 - d0*r0
	if abs1(c[5]) <= 1e-15*(abs1(c[4])+abs1(c[3])) {
		return 4
	}
	return 5
}

// fsAbs is |z| without Hypot's overflow care (values here are far from the
// float64 limits) — it is on the hot path of every root solve.
func fsAbs(z complex128) float64 { return math.Sqrt(real(z)*real(z) + imag(z)*imag(z)) }

func fsAbs2(z complex128) float64 { return real(z)*real(z) + imag(z)*imag(z) }

func fsInv(z complex128) complex128 {
	d := real(z)*real(z) + imag(z)*imag(z)
	return complex(real(z)/d, -imag(z)/d)
}

func fsConj(z complex128) complex128 { return complex(real(z), -imag(z)) }

// fsCross is Im(conj(a)·b), the z-component of the cross product a × b.
func fsCross(a, b complex128) float64 { return real(a)*imag(b) - imag(a)*real(b) }

// lensEq returns the lens-equation residual ζ(z) − zeta and ē = ∂ζ/∂z̄
// conjugated (that is g(z) = Σ mi/(z − zi)²).
func (l *fsLens) lensEq(z, zeta complex128) (f, g complex128) {
	f, g, _, _ = l.lensTerms(z, zeta)
	return f, g
}

// lensTerms is lensEq with hi = 1/(z − zi), from which lensRes takes the
// size of the terms.
func (l *fsLens) lensTerms(z, zeta complex128) (f, g, h1, h2 complex128) {
	h1, h2 = fsInv(z-complex(l.z1, 0)), fsInv(z-complex(l.z2, 0))
	m1h1, m2h2 := complex(l.m1, 0)*h1, complex(l.m2, 0)*h2
	g = m1h1*h1 + m2h2*h2
	f = z - fsConj(m1h1+m2h2) - zeta
	return f, g, h1, h2
}

// lensRes is lensEq with the residual relative to its round-off scale: the
// size of the terms plus the effect of rounding z itself, |z|·|∂ζ/∂z̄| ≤
// |z|·Σ mi|hi|², which dominates next to a lens (as in resScale of the
// Solver). A spurious root sitting on a lens (it exists when the source is
// within round-off of that lens) has a residual as large as the diverging
// term but a larger rounding scale; like the Solver, a residual above 1e-8 of
// the terms alone is not taken for an image when the rounding part dominates
// (the root sits on a lens). L1 norms (within √2 of |·|): no square roots on
// this hot path.
func (l *fsLens) lensRes(z, zeta complex128) (f, g complex128, res float64) {
	f, g, h1, h2 := l.lensTerms(z, zeta)
	a1, a2 := abs1(h1), abs1(h2)
	az := abs1(z)
	terms := az + abs1(zeta) + l.m1*a1 + l.m2*a2
	af := abs1(f)
	round := az * (l.m1*a1*a1 + l.m2*a2*a2)
	res = af / (terms + round)
	if round > 1e6*terms && af > 1e-8*terms {
		res = 1 // a root sitting on a lens
	}
	return f, g, res
}

// solve finds the five roots at zeta (in l's coordinates), starting from warm
// (nil: cold start), and classifies them. The roots are kept in the order of
// warm, so that they can be followed from one source position to the next.
// It reports false if the iteration failed even from the cold starts.
func (l *fsLens) solve(out *fsRoots, zeta complex128, warm *[5]complex128) bool {
	var c [6]complex128
	n := l.poly(&c, zeta, l.o)
	out.n = n
	co := complex(l.o, 0)
	done := func() bool {
		for k := 0; k < n; k++ {
			out.z[k] += co
		}
		l.classify(out, zeta)
		return true
	}
	if warm != nil {
		for k := 0; k < 5; k++ {
			out.z[k] = warm[k] - co
		}
		// A start that has not converged (possible only near a double root,
		// where Aberth's convergence is linear) is kept if finite: the
		// lens-equation polish in classify finishes the job.
		if _, ok := aberth(&c, n, &out.z, 60); ok {
			return done()
		}
	}
	lw := l.shifted(l.o)
	for kind := 0; kind < 3; kind++ {
		lw.coldStart(&out.z, &c, n, kind, zeta-co)
		if _, ok := aberth(&c, n, &out.z, 400); ok {
			return done()
		}
	}
	return false
}

// coldStart places the initial roots of the degree-n polynomial c for source
// zeta, all in l's coordinates. Kind 0 uses the physical picture of a binary
// lens: the major image near the source displaced by both deflections, one
// minor image next to each lens (first-order solutions of the lens equation
// there), and two guesses off the axis on the Einstein ring, where the extra
// pair of a five-image source lies. Kinds 1 and 2 use the classical Aberth
// ring around the root centroid, with a radius from a Fujiwara-type bound
// (full and halved). Guesses need only be distinct; a bad set costs sweeps,
// not correctness.
func (l *fsLens) coldStart(roots *[5]complex128, c *[6]complex128, n, kind int, zeta complex128) {
	if kind == 0 && n == 5 {
		a, b := complex(l.z1, 0), complex(l.z2, 0)
		m1, m2 := complex(l.m1, 0), complex(l.m2, 0)
		cm := complex(l.m1*l.z1+l.m2*l.z2, 0) // centre of mass
		roots[0] = zeta + cdiv(m1, fsConj(zeta-a)) + cdiv(m2, fsConj(zeta-b))
		roots[1] = a + cdiv(m1, fsConj(a-zeta-cdiv(m2, a-b)))
		roots[2] = b + cdiv(m2, fsConj(b-zeta-cdiv(m1, b-a)))
		roots[3] = cm + complex(0.13, 0.97)
		roots[4] = cm + complex(-0.11, -1.03)
		ok := true
		for k := 0; k < n && ok; k++ {
			ok = finite(real(roots[k])) && finite(imag(roots[k]))
			for j := 0; j < k && ok; j++ {
				ok = roots[k] != roots[j]
			}
		}
		if ok {
			return
		}
		kind = 1
	}
	lead := c[n]
	cen := -c[n-1] / (complex(float64(n), 0) * lead)
	r := 0.0
	for k := 1; k <= n; k++ {
		v := math.Pow(cabs(c[n-k]/lead), 1/float64(k))
		if v > r {
			r = v
		}
	}
	if !(r > 0) || math.IsInf(r, 0) {
		r = 1
	}
	if kind == 2 {
		r *= 0.5
	}
	off := 0.4 + 0.7*float64(kind)
	for k := 0; k < n; k++ {
		sn, cs := math.Sincos(2*math.Pi*float64(k)/float64(n) + off)
		roots[k] = cen + complex(r*cs, r*sn)
	}
}

// track finds the roots at zeta from predictions pred (l's coordinates) for a
// source point next to one whose images are known: the roots flagged in imgs
// are images continuing along their tracks and are refined by Newton's method
// on the lens equation alone; the two others, if any, are the remaining roots
// of the lens polynomial after the images are divided out (a quadratic). This
// is several times cheaper than the Aberth iteration over all five roots. It
// reports false (leaving out undefined) when anything is unexpected: an image
// that does not converge quickly or lands on another, a degree drop, or a
// remaining root that is an image too; the caller then uses solve.
func (l *fsLens) track(out *fsRoots, zeta complex128, pred *[5]complex128, imgs uint8) bool {
	nimg := 0
	for k := 0; k < 5; k++ {
		if imgs&(1<<k) != 0 {
			nimg++
		}
	}
	if nimg != 3 && nimg != 5 {
		return false
	}
	out.n = 5
	for k := 0; k < 5; k++ {
		if imgs&(1<<k) == 0 {
			continue
		}
		// Newton's method on the lens equation, δz = (−f + ḡ f̄)/det J. The
		// error after a step is about |δz|²|g′|/|det J| (g′ = dg/dz, the
		// curvature of the lens map), which decides when to stop; det J and
		// the boundary derivatives are recomputed at the final position by
		// the caller. Next to a critical curve (small det J) the basin of
		// quadratic convergence is small and a start may take several
		// steps: eight before the full solve takes over (five failed on
		// 25 % of the tracked samples of disks near the central caustic of
		// q = 1e-3, s = 1.2; eight on 12 %; a full solve costs several
		// times more).
		z := pred[k]
		for it := 0; ; it++ {
			h1, h2 := fsInv(z-complex(l.z1, 0)), fsInv(z-complex(l.z2, 0))
			m1h1, m2h2 := complex(l.m1, 0)*h1, complex(l.m2, 0)*h2
			f := z - fsConj(m1h1+m2h2) - zeta
			g := m1h1*h1 + m2h2*h2
			g1 := m1h1*h1*h1 + m2h2*h2*h2 // −g′/2
			det := 1 - fsAbs2(g)
			if it == 8 || !(det != 0) {
				return false
			}
			step := (-f + fsConj(g)*fsConj(f)) * complex(1/det, 0)
			z += step
			a1, a2, az := abs1(h1), abs1(h2), abs1(z)
			sc := az + abs1(zeta) + l.m1*a1 + l.m2*a2 + az*(l.m1*a1*a1+l.m2*a2*a2)
			if next := fsAbs2(step) * 2 * abs1(g1) / math.Abs(det); next <= 1e-15*sc {
				out.res[k] = next / sc
				break
			}
		}
		out.z[k] = z
	}
	// Each image must have stayed with its own prediction: nearer to it than
	// half the distance to any other prediction.
	for k := 0; k < 5; k++ {
		if imgs&(1<<k) == 0 {
			continue
		}
		d := fsAbs2(out.z[k] - pred[k])
		for j := 0; j < 5; j++ {
			if j != k && 4*d >= fsAbs2(pred[j]-pred[k]) {
				return false
			}
		}
	}
	out.img = imgs
	if nimg == 5 {
		return true
	}
	var c [6]complex128
	if l.poly(&c, zeta, l.o) != 5 {
		return false
	}
	co := complex(l.o, 0)
	// Divide out the three images (synthetic division, highest first).
	q := c
	deg := 5
	for k := 0; k < 5; k++ {
		if imgs&(1<<k) == 0 {
			continue
		}
		r := out.z[k] - co
		var b [6]complex128
		b[deg-1] = q[deg]
		for i := deg - 1; i >= 1; i-- {
			b[i-1] = q[i] + r*b[i]
		}
		q = b
		deg--
	}
	// q[0..2] is the quadratic; the stable pair of roots.
	disc := q[1]*q[1] - 4*q[2]*q[0]
	sq := csqrt(disc)
	w := q[1] + sq
	if fsAbs2(q[1]-sq) > fsAbs2(w) {
		w = q[1] - sq
	}
	w *= -0.5
	if w == 0 || q[2] == 0 {
		return false
	}
	gh := [2]complex128{cdiv(w, q[2]), cdiv(q[0], w)}
	// Polish on the full polynomial (the division carries the images'
	// round-off into the quadratic).
	for i, z := range gh {
		if p, dp := horner(c[:], z); dp != 0 {
			z -= cdiv(p, dp) // one Newton step
		}
		gh[i] = z + co
	}
	// Assign the two to the free slots by their predictions.
	var slot [2]int
	ns := 0
	for k := 0; k < 5 && ns < 2; k++ {
		if imgs&(1<<k) == 0 {
			slot[ns] = k
			ns++
		}
	}
	if fsAbs2(gh[0]-pred[slot[0]])+fsAbs2(gh[1]-pred[slot[1]]) > fsAbs2(gh[1]-pred[slot[0]])+fsAbs2(gh[0]-pred[slot[1]]) {
		gh[0], gh[1] = gh[1], gh[0]
	}
	nnew := 0
	for i, k := range slot {
		z := gh[i]
		f, g, res := l.lensRes(z, zeta)
		if res != res || (res > 1e-9 && res < 1e-4) {
			// Neither clearly spurious nor clearly an image (a pair next to
			// the critical curve, where the deflated quadratic loses digits):
			// let classify decide, as solve would.
			return false
		}
		if res <= 1e-9 {
			// A root next to satisfying the lens equation: a pair of
			// images was created. Polish it like classify would.
			for it := 0; it < 8 && res > 1e-16; it++ {
				det := 1 - fsAbs2(g)
				if det == 0 {
					break
				}
				zn := z + (-f+fsConj(g)*fsConj(f))*complex(1/det, 0)
				fn, gn, rn := l.lensRes(zn, zeta)
				if !(rn < res) {
					break
				}
				z, f, g, res = zn, fn, gn, rn
			}
			if res > 1e-12 {
				return false
			}
			nnew++
		}
		out.z[k], out.res[k], out.det[k] = z, res, 1-fsAbs2(g)
	}
	switch nnew {
	case 0:
	case 2:
		if fsAbs2(out.z[slot[0]]-out.z[slot[1]]) == 0 {
			return false
		}
		out.img |= 1<<slot[0] | 1<<slot[1]
	default:
		return false // one of the two only: let classify decide
	}
	return true
}

// csqrt is the principal square root.
func csqrt(z complex128) complex128 {
	x, y := real(z), imag(z)
	r := math.Sqrt(x*x + y*y)
	re := math.Sqrt(0.5 * (r + x))
	im := math.Sqrt(0.5 * (r - x))
	if y < 0 {
		im = -im
	}
	return complex(re, im)
}

// classify polishes roots that nearly satisfy the lens equation by Newton's
// method on the lens equation itself and marks the true images: those whose
// relative residual reaches 1e-12 (spurious roots keep residuals of the order
// of the source's distance to the caustic, and 1e-12 of it is below anything
// the contour samples). The count of true images of a binary lens is 3 or 5
// [W90]; where round-off breaks that, the ranking by residual decides.
func (l *fsLens) classify(r *fsRoots, zeta complex128) {
	r.img = 0
	var raw [5]complex128
	var rawRes, moved [5]float64
	for k := 0; k < r.n; k++ {
		z := r.z[k]
		raw[k] = z
		f, g, res := l.lensRes(z, zeta)
		rawRes[k] = res
		r.det[k] = 1 - fsAbs2(g)
		r.res[k] = res
		if res >= 1e-4 || res <= 1e-16 {
			continue // spurious, or an image already at round-off level
		}
		// The polynomial loses digits for small q (references.md §3), so a
		// root with a smallish residual is polished by Newton's method on the
		// lens equation: δz + ē δz̄ = −f, δz = (−f + ē·f̄)/det J.
		for it := 0; it < 8 && res > 1e-16; it++ {
			det := 1 - fsAbs2(g)
			if det == 0 {
				break
			}
			e := fsConj(g)
			zn := z + (-f+e*fsConj(f))*complex(1/det, 0)
			fn, gn, rn := l.lensRes(zn, zeta)
			if rn < res {
				z, f, g, res = zn, fn, gn, rn
			} else {
				break
			}
		}
		if res > 1e-12 {
			continue // not an image: keep the raw root, a continuous function of ζ
		}
		r.z[k], r.res[k], r.det[k] = z, res, 1-fsAbs2(g)
		moved[k] = fsAbs(z - raw[k])
	}
	// Near a critical curve Newton's method started on a spurious root can
	// land on the true image next to it. Two roots polished onto one point:
	// the one that moved more is spurious and gets its raw values back.
	for k := 0; k < r.n; k++ {
		for j := 0; j < k; j++ {
			if r.res[k] > 1e-12 || r.res[j] > 1e-12 {
				continue
			}
			if fsAbs(r.z[k]-r.z[j]) > 0.01*fsAbs(raw[k]-raw[j]) {
				continue
			}
			lose := k
			if moved[j] > moved[k] {
				lose = j
			}
			r.z[lose], r.res[lose] = raw[lose], math.Max(rawRes[lose], 1e-9)
			_, g := l.lensEq(raw[lose], zeta)
			r.det[lose] = 1 - fsAbs2(g)
		}
	}
	// Images: residual at round-off level. Count must be 3 or 5.
	const trueRes = 1e-12
	cnt := 0
	for k := 0; k < r.n; k++ {
		if r.res[k] <= trueRes {
			cnt++
		}
	}
	if cnt == 3 || cnt == 5 {
		for k := 0; k < r.n; k++ {
			if r.res[k] <= trueRes {
				r.img |= 1 << k
			}
		}
		return
	}
	if cnt == 4 {
		// One image too many (or a fifth that Newton's method could not
		// finish next to a critical curve). Residuals at round-off cannot
		// rank the four; the image-parity rule n− − n+ = 1 (Burke 1981, ApJ
		// 244, L1) and the distance to the critical curve can: drop, among
		// the images whose removal leaves a valid set of three, the one with
		// the smallest |det J| — a member of a pair at the critical curve,
		// taken as not yet created (or already destroyed).
		npos := 0
		for k := 0; k < r.n; k++ {
			if r.res[k] <= trueRes {
				r.img |= 1 << k
				if r.det[k] > 0 {
					npos++
				}
			}
		}
		drop := -1
		for pass := 0; pass < 2 && drop < 0; pass++ {
			for k := 0; k < r.n; k++ {
				if !r.isImg(k) {
					continue
				}
				p := npos
				if r.det[k] > 0 {
					p--
				}
				if pass == 0 && (3-p)-p != 1 {
					continue // removing k would break the parity rule
				}
				if drop < 0 || math.Abs(r.det[k]) < math.Abs(r.det[drop]) {
					drop = k
				}
			}
		}
		r.img &^= 1 << drop
		return
	}
	// Rank by residual: 5 images when the 4th and 5th are still small.
	idx := [5]int{0, 1, 2, 3, 4}
	for i := 1; i < r.n; i++ {
		for j := i; j > 0 && r.res[idx[j]] < r.res[idx[j-1]]; j-- {
			idx[j], idx[j-1] = idx[j-1], idx[j]
		}
	}
	want := 3
	if r.n == 5 && r.res[idx[4]] < 1e-6 {
		want = 5
	}
	for i := 0; i < want && i < r.n; i++ {
		r.img |= 1 << idx[i]
	}
}

// mag is Σ|1/det J| over the images.
func (r *fsRoots) mag() float64 {
	a := 0.0
	for k := 0; k < r.n; k++ {
		if r.isImg(k) {
			a += math.Abs(1 / r.det[k])
		}
	}
	return a
}

// imgDeriv returns, for an image at z, the signed magnification μ = 1/D with
// D = det J, the Laplacian term L = ∂ζ∂ζ̄|μ| (so ∇²|μ| = 4L) and
// G = |∂ζ̄ μ| (so |∇μ| = 2G), all with respect to the source position. With
// g = Σ mi/(z−zi)², D = 1 − |g|², the image map dz = (dζ − ḡ dζ̄)/D gives
// (derived here; checked against finite differences in the tests)
//
//	∂ζ̄ μ = N/D³,  N = g ḡ′ − g′ ḡ²,
//	∂ζ∂ζ̄ μ = [|g′|²(1 + 2|g|²) − 2 Re(g″ ḡ²)]/D⁴ + 3|N|²/D⁵.
func (l *fsLens) imgDeriv(z complex128) (mu, lap, grad float64) {
	h1, h2 := fsInv(z-complex(l.z1, 0)), fsInv(z-complex(l.z2, 0))
	m1, m2 := complex(l.m1, 0), complex(l.m2, 0)
	h12, h22 := h1*h1, h2*h2
	g := m1*h12 + m2*h22
	g1 := -2 * (m1*h12*h1 + m2*h22*h2)
	g2 := 6 * (m1*h12*h12 + m2*h22*h22)
	D := 1 - fsAbs2(g)
	gb := fsConj(g)
	N := g*fsConj(g1) - g1*gb*gb
	D2 := D * D
	D4 := D2 * D2
	lap = (fsAbs2(g1)*(1+2*fsAbs2(g))-2*real(g2*gb*gb))/D4 + 3*fsAbs2(N)/(D4*D)
	grad = fsAbs(N) / math.Abs(D2*D)
	mu = 1 / D
	if D < 0 {
		lap = -lap
	}
	return mu, lap, grad
}

// finiteWork is the scratch state of the finite-source code: the buffers of
// the contour samples. It is taken from a pool per call, so FiniteMag needs no
// extra field in Solver and stays safe to call from several goroutines on
// different Solvers. (The warm start of the central roots is the Solver's.)
type finiteWork struct {
	ct contour
}

var finitePool = sync.Pool{New: func() any { return new(finiteWork) }}
