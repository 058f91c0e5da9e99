package lens

import (
	"math"
)

// Curve is one closed critical curve and its caustic, as ordered polylines.
// The last point connects back to the first (it is not repeated).
type Curve struct {
	Critical []complex128 // lens plane
	Caustic  []complex128 // source plane, Caustic[i] is the image of Critical[i]
	// Cusps holds the indices of the cusps in Caustic, in order along the curve.
	// Each cusp is located by bisection to ~1e-12 in the critical angle and
	// included as a vertex, so drawn cusps are sharp.
	Cusps []int
}

// Topology is the caustic topology of a binary lens.
type Topology int

const (
	Close        Topology = iota + 1 // three caustics: central + two off-axis triangles
	Intermediate                     // one six-cusp (resonant) caustic
	Wide                             // two four-cusp caustics
)

func (t Topology) String() string {
	switch t {
	case Close:
		return "close"
	case Intermediate:
		return "intermediate"
	case Wide:
		return "wide"
	}
	return "invalid topology"
}

// DefaultCausticSamples is the number of critical-angle samples Caustics uses
// when asked for n = 0: enough for a smooth drawing of every curve at screen
// resolution (cusps are located exactly in any case).
const DefaultCausticSamples = 256

// Caustics returns the closed critical curves and caustics of b. Each of the
// four roots of the critical-curve quartic is followed over n equally spaced
// values of the critical angle φ (n = 0 means DefaultCausticSamples; n < 8 is
// raised to 8), so a curve made of k root tracks has k·n points plus its cusps:
// k = 2 for the wide curves and the close central curve, 1 for the close
// off-axis ovals, 4 for the intermediate curve. It returns nil for an invalid b.
//
// Method. A point z is critical when det J = 1 − |Σ mi/(z̄ − zi)²|² = 0, that
// is Σ mi/(z − zi)² = e^{iφ} for some φ; clearing denominators gives the quartic
// m1(z−z2)² + m2(z−z1)² − e^{iφ}(z−z1)²(z−z2)² = 0 (Witt 1990, A&A 236, 311).
// Its roots are found by Aberth–Ehrlich iteration warm-started from the previous
// φ and matched to the previous roots by the permutation of least total
// displacement; the permutation that closes the turn φ = 2π → 0 splits the four
// tracks into closed curves (its cycles). The caustic is the image of the
// critical curve under the lens equation.
//
// Cusps. Differentiating the quartic's defining relation gives
// dz/dφ = −i e^{iφ} / (2 Σ mi/(z − zi)³), and the lens equation then gives
// dζ/dφ = 2 Re(e^{iφ/2} dz/dφ) · e^{−iφ/2}: the caustic tangent has direction
// e^{−iφ/2} and a real signed speed that changes sign exactly at the cusps
// (derived here; it is the classical statement that cusps are where the
// critical-curve tangent lies along the Jacobian's null direction). Sign changes
// between samples are bisected and the cusp inserted.
func (b Binary) Caustics(n int) []Curve {
	if b.validate() != nil {
		return nil
	}
	if n <= 0 {
		n = DefaultCausticSamples
	}
	if n < 8 {
		n = 8
	}
	cq := newCritQuartic(b)
	// tracks[j][k] is root j at φ = (k + ½)·2π/n.
	tracks := make([][]complex128, 4)
	flat := make([]complex128, 4*n)
	for j := range tracks {
		tracks[j] = flat[j*n : (j+1)*n]
	}
	var c [6]complex128
	var roots, prev [5]complex128
	// Samples sit at φ = (k + ½)·2π/n: on-axis cusps (at φ = 0 or π by the
	// mirror symmetry of the lens) then fall between samples, never on one.
	dphi := 2 * math.Pi / float64(n)
	phi0 := 0.5 * dphi
	cq.coeffs(phi0, &c)
	cq.coldStart(&c, &roots)
	if _, ok := aberth(&c, 4, &roots, 500); !ok {
		return nil
	}
	for j := 0; j < 4; j++ {
		tracks[j][0] = roots[j]
	}
	prev = roots
	var perm [4]int
	for k := 1; k <= n; k++ {
		cq.coeffs(phi0+dphi*float64(k), &c)
		if _, ok := aberth(&c, 4, &roots, 500); !ok {
			// A non-finite step (two guesses met): restart from a ring.
			cq.coldStart(&c, &roots)
			if _, ok := aberth(&c, 4, &roots, 500); !ok {
				return nil
			}
		}
		matchRoots(&prev, &roots, &perm)
		var sorted [5]complex128
		for j := 0; j < 4; j++ {
			sorted[j] = roots[perm[j]]
		}
		roots = sorted
		if k < n {
			for j := 0; j < 4; j++ {
				tracks[j][k] = roots[j]
			}
		}
		prev = roots
	}
	// roots now holds the tracks at φ = 2π; match them to the start.
	var start [5]complex128
	for j := 0; j < 4; j++ {
		start[j] = tracks[j][0]
	}
	var closing [4]int // track j continues as track closing[j]
	matchRoots(&start, &roots, &closing)
	// closing maps start index -> end index; invert to get "end of track e
	// continues into track s".
	var next [4]int
	for s, e := range closing {
		next[e] = s
	}
	var curves []Curve
	var seen [4]bool
	for j0 := 0; j0 < 4; j0++ {
		if seen[j0] {
			continue
		}
		var cycle []int
		for j := j0; !seen[j]; j = next[j] {
			seen[j] = true
			cycle = append(cycle, j)
		}
		curves = append(curves, cq.curve(tracks, cycle, n))
	}
	return curves
}

// critQuartic holds the lens in the working frame (origin at the lighter lens,
// as for Solver) and the fixed parts of the critical-curve quartic.
type critQuartic struct {
	o, a, b, m1, m2 float64
	A               [5]float64 // (z−a)²(z−b)², low order first
	B               [3]float64 // m1(z−b)² + m2(z−a)²
}

func newCritQuartic(bl Binary) *critQuartic {
	z1, z2, m1, m2 := bl.Lenses()
	o := z2
	if bl.Q > 1 {
		o = z1
	}
	a, b := z1-o, z2-o
	cq := &critQuartic{o: o, a: a, b: b, m1: m1, m2: m2}
	// (z−a)(z−b) = z² + d1 z + d0
	d1, d0 := -(a + b), a*b
	cq.A = [5]float64{d0 * d0, 2 * d0 * d1, d1*d1 + 2*d0, 2 * d1, 1}
	cq.B = [3]float64{m1*b*b + m2*a*a, -2 * (m1*b + m2*a), m1 + m2}
	return cq
}

// coeffs fills c with B(z) − e^{iφ}A(z).
func (cq *critQuartic) coeffs(phi float64, c *[6]complex128) {
	sn, cs := math.Sincos(phi)
	e := complex(cs, sn)
	for k := 0; k < 5; k++ {
		v := -e * complex(cq.A[k], 0)
		if k < 3 {
			v += complex(cq.B[k], 0)
		}
		c[k] = v
	}
	c[5] = 0
}

// coldStart puts four guesses on a ring around the lenses. The critical curves
// lie within about one Einstein radius of the lenses (closer for wide systems),
// and Aberth–Ehrlich needs only distinct, non-symmetric guesses.
func (cq *critQuartic) coldStart(c *[6]complex128, roots *[5]complex128) {
	cen := complex((cq.a+cq.b)/2, 0)
	r := 1 + math.Abs(cq.b-cq.a)/2
	for k := 0; k < 4; k++ {
		sn, cs := math.Sincos(2*math.Pi*float64(k)/4 + 0.3)
		roots[k] = cen + complex(r*cs, r*sn)
	}
}

// matchRoots sets perm so that cur[perm[j]] is the root nearest prev[j], by the
// permutation of the four that minimises the summed squared displacement.
func matchRoots(prev, cur *[5]complex128, perm *[4]int) {
	var d [4][4]float64
	for i := 0; i < 4; i++ {
		for j := 0; j < 4; j++ {
			w := prev[i] - cur[j]
			d[i][j] = real(w)*real(w) + imag(w)*imag(w)
		}
	}
	best := math.Inf(1)
	for _, p := range perms4 {
		s := d[0][p[0]] + d[1][p[1]] + d[2][p[2]] + d[3][p[3]]
		if s < best {
			best = s
			*perm = p
		}
	}
}

// perms4 lists the 24 permutations of {0,1,2,3}, identity first.
var perms4 = func() [][4]int {
	var out [][4]int
	for a := 0; a < 4; a++ {
		for b := 0; b < 4; b++ {
			for c := 0; c < 4; c++ {
				d := 6 - a - b - c
				if a != b && a != c && b != c && d != a && d != b && d != c {
					out = append(out, [4]int{a, b, c, d})
				}
			}
		}
	}
	return out
}()

// point returns the critical point refined from z (working frame) and its
// caustic point, both in the frame of the package doc, and the signed caustic
// speed v(φ) = Re(e^{iφ/2} dz/dφ) (see Caustics).
//
// The work is done in the frame of the lens nearest to z: a critical curve
// around a lens is a ring of radius ~√mi about it, and its caustic (of size
// down to ~q/s² for the central caustic of a wide pair) comes from the
// cancellation of the ring offset with the lens's deflection. Measured from
// that lens, the offset carries round-off ε√mi instead of ε|z|, which keeps
// tiny caustics far from the working origin sharp. Two Newton steps on
// mi/w² + mj/(w + zi − zj)² = e^{iφ} in the offset w restore the digits the
// working-frame root had lost.
func (cq *critQuartic) point(z complex128, phi float64) (crit, zeta complex128, v float64) {
	zi, zj, mi, mj := cq.a, cq.b, cq.m1, cq.m2
	if abs1(z-complex(cq.b, 0)) < abs1(z-complex(cq.a, 0)) {
		zi, zj, mi, mj = cq.b, cq.a, cq.m2, cq.m1
	}
	d := complex(zi-zj, 0)
	sn, cs := math.Sincos(phi)
	e := complex(cs, sn)
	w := z - complex(zi, 0)
	cmi, cmj := complex(mi, 0), complex(mj, 0)
	var hi, hj complex128
	for it := 0; it < 2; it++ {
		hi, hj = cinv(w), cinv(w+d)
		f := cmi*hi*hi + cmj*hj*hj - e
		df := -2 * (cmi*hi*hi*hi + cmj*hj*hj*hj)
		if df == 0 {
			break
		}
		w -= cdiv(f, df)
	}
	hi, hj = cinv(w), cinv(w+d)
	g := cmi*hi + cmj*hj
	zl := w - complex(real(g), -imag(g))
	g3 := cmi*hi*hi*hi + cmj*hj*hj*hj
	dz := cdiv(complex(sn, -cs), 2*g3) // dz/dφ = −i e^{iφ} / (2 g3)
	sh, ch := math.Sincos(phi / 2)
	v = real(dz * complex(ch, sh))
	o := complex(zi+cq.o, 0)
	return w + o, zl + o, v
}

// solveAt polishes a root of the quartic at angle phi by Newton's method from z.
func (cq *critQuartic) solveAt(z complex128, phi float64) complex128 {
	var c [6]complex128
	cq.coeffs(phi, &c)
	for it := 0; it < 30; it++ {
		p, dp := horner(c[:5], z)
		if dp == 0 {
			break
		}
		w := cdiv(p, dp)
		z -= w
		if abs1(w) <= 1e-15*abs1(z) {
			break
		}
	}
	return z
}

// curve assembles one closed curve from the tracks of a cycle, in the frame of
// the package doc, with the cusps located and inserted.
func (cq *critQuartic) curve(tracks [][]complex128, cycle []int, n int) Curve {
	m := len(cycle) * n
	crit := make([]complex128, 0, m+8)
	caus := make([]complex128, 0, m+8)
	var cusps []int
	dphi := 2 * math.Pi / float64(n)
	phi0 := 0.5 * dphi
	// Along the cycle the angle runs on continuously: track cycle[t] covers
	// φ ∈ [2πt, 2π(t+1)), so e^{iφ/2} stays continuous and v keeps its sign
	// convention around the whole curve.
	phiAt := func(i int) float64 { return phi0 + dphi*float64(i) }
	zAt := func(i int) complex128 {
		i %= m
		return tracks[cycle[i/n]][i%n]
	}
	c0, zeta0, v0 := cq.point(zAt(0), phi0)
	zPrev, phiPrev, vPrev := zAt(0), phi0, v0
	crit = append(crit, c0)
	caus = append(caus, zeta0)
	for i := 1; i <= m; i++ {
		z, phi := zAt(i), phiAt(i)
		// At i == m the curve is back at its start with φ advanced by
		// 2π·len(cycle); e^{iφ/2} is then (−1)^len(cycle) times its start
		// value, so odd cycles (the three-cusp close ovals) have an odd
		// number of sign changes, as they must.
		cz, zeta, v := cq.point(z, phi)
		if (vPrev < 0) != (v < 0) && vPrev != 0 {
			zc, zetac := cq.bisectCusp(zPrev, phiPrev, vPrev, z, phi)
			cusps = append(cusps, len(caus))
			crit = append(crit, zc)
			caus = append(caus, zetac)
		}
		if i < m {
			crit = append(crit, cz)
			caus = append(caus, zeta)
		}
		zPrev, phiPrev, vPrev = z, phi, v
	}
	return Curve{Critical: crit, Caustic: caus, Cusps: cusps}
}

// bisectCusp finds the angle in (phiA, phiB) where the signed caustic speed
// changes sign, following the root from za.
func (cq *critQuartic) bisectCusp(za complex128, phiA, vA float64, zb complex128, phiB float64) (complex128, complex128) {
	lo, hi := phiA, phiB
	zlo, zhi := za, zb
	for it := 0; it < 50 && hi-lo > 1e-13; it++ {
		mid := 0.5 * (lo + hi)
		zm := cq.solveAt(0.5*(zlo+zhi), mid)
		_, _, vm := cq.point(zm, mid)
		if (vm < 0) == (vA < 0) {
			lo, zlo = mid, zm
		} else {
			hi, zhi = mid, zm
		}
	}
	mid := 0.5 * (lo + hi)
	crit, zeta, _ := cq.point(cq.solveAt(0.5*(zlo+zhi), mid), mid)
	return crit, zeta
}

// Topology classifies b (Erdl & Schneider 1993; Dominik 1999) by comparing its
// separation with TopologyBoundaries. It returns 0 for an invalid b.
func (b Binary) Topology() Topology {
	if b.validate() != nil {
		return 0
	}
	sc, sw := TopologyBoundaries(b.Q)
	switch {
	case b.S < sc:
		return Close
	case b.S > sw:
		return Wide
	}
	return Intermediate
}

// TopologyBoundaries returns the close/intermediate and intermediate/wide
// separations for mass ratio q: sWide = (1 + q^{1/3})^{3/2}/(1 + q)^{1/2} and
// sClose the root in (0, 1) of s⁸ = ((1+q)²/(27q))(1 − s⁴)³ (Erdl & Schneider
// 1993, A&A 268, 453; Dominik 1999, A&A 349, 108). Both are symmetric under
// q → 1/q. It returns NaNs for q that is not finite and > 0.
func TopologyBoundaries(q float64) (sClose, sWide float64) {
	if !(q > 0) || math.IsInf(q, 0) {
		return math.NaN(), math.NaN()
	}
	sWide = math.Pow(1+math.Cbrt(q), 1.5) / math.Sqrt(1+q)
	// With x = s⁴: x² = k(1 − x)³, k = (1+q)²/(27q); the cube root gives the
	// monotone equation x^{2/3} = k^{1/3}(1 − x), solved by bisection on x.
	c := math.Cbrt((1 + q) * (1 + q) / (27 * q))
	lo, hi := 0.0, 1.0
	for it := 0; it < 200 && hi-lo > 1e-17; it++ {
		x := 0.5 * (lo + hi)
		if math.Cbrt(x*x) < c*(1-x) {
			lo = x
		} else {
			hi = x
		}
	}
	sClose = math.Sqrt(math.Sqrt(0.5 * (lo + hi)))
	return sClose, sWide
}
