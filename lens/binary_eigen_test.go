package lens

import (
	"math"
	"math/cmplx"
	"sort"

	"gonum.org/v1/gonum/mat"
)

// This file holds the independent reference solver of the binary-lens tests and
// benchmarks: the lens polynomial built by generic polynomial products, its
// roots from gonum's dense eigen-decomposition (LAPACK-style Hessenberg QR) of
// the companion matrix, and Newton polishing on the lens equation. It shares no
// code with Solver.

// polyMul multiplies polynomials given lowest order first.
func polyMul(a, b []complex128) []complex128 {
	out := make([]complex128, len(a)+len(b)-1)
	for i, x := range a {
		for j, y := range b {
			out[i+j] += x * y
		}
	}
	return out
}

func polyAdd(a, b []complex128, wb complex128) []complex128 {
	n := max(len(a), len(b))
	out := make([]complex128, n)
	copy(out, a)
	for j, y := range b {
		out[j] += wb * y
	}
	return out
}

// eigenLensPoly is p(z) = (z−ζ)P1P2 − D(m1P2 + m2P1) of references.md §3
// (Witt 1990), lowest order first.
// The frame is shifted by o (lens positions zi − o, source ζ − o), which the
// lens equation allows for real o.
func eigenLensPoly(s, q float64, zeta complex128, o float64) []complex128 {
	m1, m2 := 1/(1+q), q/(1+q)
	z1, z2 := complex(-q*s/(1+q)-o, 0), complex(s/(1+q)-o, 0)
	zeta -= complex(o, 0)
	D := polyMul([]complex128{-z1, 1}, []complex128{-z2, 1})
	N := polyAdd([]complex128{complex(m1, 0) * -z2, complex(m1, 0)}, []complex128{-z1, 1}, complex(m2, 0))
	zb := cmplx.Conj(zeta)
	P1 := polyAdd(N, D, zb-z1)
	P2 := polyAdd(N, D, zb-z2)
	first := polyMul([]complex128{-zeta, 1}, polyMul(P1, P2))
	R := polyAdd(polyAdd(nil, P2, complex(m1, 0)), P1, complex(m2, 0))
	return polyAdd(first, polyMul(D, R), -1)
}

// eigenRoots returns candidate roots of the complex polynomial c: the
// eigenvalues of the 2n×2n real representation [[Re C, −Im C], [Im C, Re C]] of
// its companion matrix C, which are the roots together with their conjugates.
// gonum's Eigen works on real matrices only; the extra conjugates are sorted out
// by the lens-equation test of the caller.
func eigenRoots(c []complex128) []complex128 {
	n := len(c) - 1
	for n > 0 && c[n] == 0 {
		n--
	}
	lead := c[n]
	cm := mat.NewDense(2*n, 2*n, nil)
	set := func(i, j int, v complex128) {
		cm.Set(i, j, real(v))
		cm.Set(i, j+n, -imag(v))
		cm.Set(i+n, j, imag(v))
		cm.Set(i+n, j+n, real(v))
	}
	for j := 0; j < n; j++ {
		set(0, j, -c[n-1-j]/lead)
	}
	for i := 1; i < n; i++ {
		set(i, i-1, 1)
	}
	var e mat.Eigen
	if !e.Factorize(cm, mat.EigenNone) {
		return nil
	}
	return e.Values(nil)
}

// eigenImages is the reference image finder: candidates from eigenRoots of the
// polynomial built in frames centred on each of the given origins (nil means
// the planet frame alone), each polished by up to 60 Newton steps on the lens
// equation, accepted when the final residual is at round-off level,
// de-duplicated. Several frames guard against the clustered-root trap of small
// q and large s, where one frame alone loses images.
func eigenImages(s, q float64, zeta complex128, origins ...float64) []Image {
	m1, m2 := 1/(1+q), q/(1+q)
	z1, z2 := complex(-q*s/(1+q), 0), complex(s/(1+q), 0)
	lensEq := func(z complex128) (f, E complex128) {
		zb := cmplx.Conj(z)
		f = z - zeta - complex(m1, 0)/(zb-z1) - complex(m2, 0)/(zb-z2)
		E = complex(m1, 0)/((zb-z1)*(zb-z1)) + complex(m2, 0)/((zb-z2)*(zb-z2))
		return f, E
	}
	var out []Image
	if len(origins) == 0 {
		origins = []float64{real(z2)}
	}
	var cands []complex128
	for _, o := range origins {
		for _, r := range eigenRoots(eigenLensPoly(s, q, zeta, o)) {
			cands = append(cands, r+complex(o, 0))
		}
	}
	for _, z := range cands {
		f, E := lensEq(z)
		for it := 0; it < 60; it++ {
			det := 1 - real(E*cmplx.Conj(E))
			step := (-f + E*cmplx.Conj(f)) / complex(det, 0)
			z += step
			f, E = lensEq(z)
			if cmplx.Abs(step) < 1e-16*cmplx.Abs(z) {
				break
			}
		}
		// Round-off scale: the terms of the lens equation plus the effect of
		// rounding z, |z|(1 + |E|).
		scale := cmplx.Abs(z)*(1+cmplx.Abs(E)) + cmplx.Abs(zeta) + m1/cmplx.Abs(z-z1) + m2/cmplx.Abs(z-z2)
		if cmplx.Abs(f) > 1e-13*scale {
			continue
		}
		// Positions of highly magnified images are uncertain by ~|μ|ε|z|.
		det := 1 - real(E*cmplx.Conj(E))
		dup := false
		for _, im := range out {
			if cmplx.Abs(im.Z-z) < (1e-9+1e-14/math.Abs(det))*(1+cmplx.Abs(z)) {
				dup = true
			}
		}
		if dup {
			continue
		}
		out = append(out, Image{Z: z, Mag: 1 / (1 - real(E*cmplx.Conj(E)))})
	}
	sort.Slice(out, func(i, j int) bool { return real(out[i].Z) < real(out[j].Z) })
	return out
}

// eigenMag is the magnification from eigenImages over the three frames centred
// on the centre of mass and on each lens.
func eigenMag(s, q float64, zeta complex128) (float64, int) {
	imgs := eigenImages(s, q, zeta, 0, -q*s/(1+q), s/(1+q))
	a := 0.0
	for _, im := range imgs {
		a += math.Abs(im.Mag)
	}
	return a, len(imgs)
}
