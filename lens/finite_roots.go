package lens

import (
	"math"
	"sync"
)

// This file holds the point-source machinery that the finite-source code needs
// beyond Solver.Images: all five roots of the lens polynomial (true images and
// the spurious "ghost" roots), kept in a stable order so that roots can be
// tracked along the boundary of a source, and analytic derivatives of the image
// magnification with respect to the source position.

// fsLens is the binary in the form the finite-source code works with.
type fsLens struct {
	z1, z2, m1, m2 float64
}

func newFSLens(b Binary) fsLens {
	m1 := 1 / (1 + b.Q)
	m2 := b.Q / (1 + b.Q)
	return fsLens{z1: -m2 * b.S, z2: m1 * b.S, m1: m1, m2: m2}
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
func (l *fsLens) poly(c *[6]complex128, zeta complex128, o float64) {
	z1, z2, m1, m2 := l.z1-o, l.z2-o, l.m1, l.m2
	zeta -= complex(o, 0)
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

// fsAberth refines the n roots in z of the monic polynomial a (a[n] = 1) by the
// simultaneous Aberth–Ehrlich iteration (Aberth 1973, Math. Comp. 27, 339),
// Gauss–Seidel style. Started from the roots of a nearby source position it
// converges in two or three sweeps. It reports whether every correction fell
// below 1e-14 of its root within maxIt sweeps (conv), and whether the roots are
// finite (fin).
func fsAberth(a *[6]complex128, n int, z *[5]complex128, maxIt int) (conv, fin bool) {
	var done [5]bool
	for it := 0; it < maxIt; it++ {
		all := true
		for k := 0; k < n; k++ {
			if done[k] {
				continue
			}
			x := z[k]
			p, dp := a[n], complex(0, 0)
			for j := n - 1; j >= 0; j-- {
				dp = dp*x + p
				p = p*x + a[j]
			}
			if p == 0 {
				done[k] = true
				continue
			}
			ratio := p * fsInv(dp)
			var sum complex128
			for j := 0; j < n; j++ {
				if j != k {
					sum += fsInv(x - z[j])
				}
			}
			w := ratio * fsInv(1-ratio*sum)
			if math.IsNaN(real(w)) || math.IsNaN(imag(w)) || math.IsInf(real(w), 0) || math.IsInf(imag(w), 0) {
				return false, false
			}
			z[k] = x - w
			if fsAbs2(w) <= 1e-28*fsAbs2(x)+1e-300 {
				done[k] = true
			} else {
				all = false
			}
		}
		if all {
			return true, true
		}
	}
	return false, true
}

// lensEq returns the lens-equation residual ζ(z) − zeta, ē = ∂ζ/∂z̄ conjugated
// (that is g(z) = Σ mi/(z − zi)²) and the round-off scale of the residual.
func (l *fsLens) lensEq(z, zeta complex128) (f, g complex128, scale float64) {
	h1, h2 := fsInv(z-complex(l.z1, 0)), fsInv(z-complex(l.z2, 0))
	d := complex(l.m1, 0)*h1 + complex(l.m2, 0)*h2
	g = complex(l.m1, 0)*h1*h1 + complex(l.m2, 0)*h2*h2
	f = z - fsConj(d) - zeta
	scale = fsAbs(z) + fsAbs(zeta) + l.m1*fsAbs(h1) + l.m2*fsAbs(h2)
	return f, g, scale
}

// solve finds the roots at zeta, starting from warm (nil: cold start), and
// classifies them. It reports false if the iteration failed even from a cold start.
func (l *fsLens) solve(out *fsRoots, zeta complex128, warm *[5]complex128) bool {
	var c [6]complex128
	o := l.z2 // origin of the polynomial's frame, see poly
	l.poly(&c, zeta, o)
	n := 5
	if fsAbs(c[5]) <= 1e-15*(fsAbs(c[4])+fsAbs(c[3])) {
		n = 4 // the source sits on a lens: one root went to infinity
	}
	var a [6]complex128
	inv := fsInv(c[n])
	for k := 0; k < n; k++ {
		a[k] = c[k] * inv
	}
	a[n] = 1
	out.n = n
	// A warm start that has not converged in 40 sweeps (possible only near a
	// double root, where Aberth's convergence is linear) is kept if finite:
	// the lens-equation polish in classify finishes the job.
	co := complex(o, 0)
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
		if conv, fin := fsAberth(&a, n, &out.z, 40); conv || fin {
			return done()
		}
	}
	for attempt := 0; attempt < 3; attempt++ {
		l.coldStart(&out.z, zeta-co, n, attempt)
		if _, fin := fsAberth(&a, n, &out.z, 300); fin {
			return done()
		}
	}
	return false
}

// coldStart places n initial roots on a circle about the lens system, rotated
// per attempt so that a failed start is not repeated.
func (l *fsLens) coldStart(z *[5]complex128, zeta complex128, n, attempt int) {
	r := 1.5 + fsAbs(zeta) + math.Abs(l.z2-l.z1)
	off := 0.3 + 0.9*float64(attempt)
	for k := 0; k < n; k++ {
		s, c := math.Sincos(2*math.Pi*float64(k)/float64(n) + off)
		z[k] = complex(r*c, r*s) + zeta/2
	}
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
		f, g, sc := l.lensEq(z, zeta)
		res := fsAbs(f) / sc
		rawRes[k] = res
		r.det[k] = 1 - fsAbs2(g)
		r.res[k] = res
		if res >= 1e-4 || res <= 1e-13 {
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
			fn, gn, scn := l.lensEq(zn, zeta)
			if rn := fsAbs(fn) / scn; rn < res {
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
			_, g, _ := l.lensEq(raw[lose], zeta)
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

// finiteWork is the scratch state of the finite-source code: buffers for the
// contour samples and the warm start of the central roots. It is taken from a
// pool per call, so FiniteMag needs no extra field in Solver and stays safe to
// call from several goroutines on different Solvers; along a light curve the
// same goroutine gets the same object back, which keeps the warm start.
type finiteWork struct {
	lens     Binary
	warm     [5]complex128
	haveWarm bool
	ct       contour
}

var finitePool = sync.Pool{New: func() any { return new(finiteWork) }}
