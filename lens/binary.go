package lens

import (
	"errors"
	"fmt"
	"math"
)

// Binary is a two-point-mass lens in the frame of the package doc: separation S
// (θE of the total mass) and mass ratio Q = m2/m1. Build one with NewBinary, which
// checks the values; a Binary literal with invalid fields makes every solver call
// return an error.
type Binary struct {
	S, Q float64
}

// NewBinary validates s and q (both finite, > 0). q > 1 is allowed: it means the
// heavier body sits on the positive real axis.
func NewBinary(s, q float64) (Binary, error) {
	b := Binary{S: s, Q: q}
	return b, b.validate()
}

func (b Binary) validate() error {
	switch {
	case math.IsNaN(b.S) || math.IsInf(b.S, 0):
		return fmt.Errorf("lens: binary separation s = %v is not finite", b.S)
	case b.S <= 0:
		return fmt.Errorf("lens: binary separation s = %v must be > 0", b.S)
	case math.IsNaN(b.Q) || math.IsInf(b.Q, 0):
		return fmt.Errorf("lens: binary mass ratio q = %v is not finite", b.Q)
	case b.Q <= 0:
		return fmt.Errorf("lens: binary mass ratio q = %v must be > 0", b.Q)
	}
	return nil
}

// Lenses returns the positions on the real axis (θE) and the mass fractions of
// the primary (z1, m1) and the secondary (z2, m2): z1 = −qs/(1+q), z2 = s/(1+q),
// m1 = 1/(1+q), m2 = q/(1+q), so that m1 + m2 = 1 and m1·z1 + m2·z2 = 0.
func (b Binary) Lenses() (z1, z2, m1, m2 float64) {
	m1 = 1 / (1 + b.Q)
	m2 = b.Q / (1 + b.Q)
	return -m2 * b.S, m1 * b.S, m1, m2
}

// Image is one image of a point source.
type Image struct {
	Z   complex128 // position in the lens plane (θE)
	Mag float64    // signed magnification 1/det J (negative parity < 0)
}

// ErrImages reports that the images found are not a valid set (count not 3 or 5).
var ErrImages = errors.New("lens: binary image count is not 3 or 5")

// maxImageMag caps |1/det J| of a single image. A point source exactly on a
// caustic has an infinite magnification; the cap keeps results finite. It is
// reached only within ~1e-24 θE of a fold (|det J| grows like the square root
// of the distance), far below the position precision of float64.
const maxImageMag = 1e12

// Solver finds the images of a binary lens; it keeps the previous roots to warm
// start the next source position (reuse one Solver along a trajectory).
// A Solver is not safe for concurrent use.
//
// Method. The images are the roots of the complex fifth-degree lens polynomial
// of Witt (1990, A&A 236, 311) that also satisfy the lens equation. The five
// roots are found together by the Aberth–Ehrlich iteration (Aberth 1973, Math.
// Comp. 27, 339; Ehrlich 1967, Comm. ACM 10, 107) started from the roots of the
// previous call — moved along their last displacement when the source keeps a
// straight course — which along a trajectory converges in about two sweeps
// (six from the physical cold-start guesses).
// Each root is then polished by Newton's method on the lens equation itself (a
// 2×2 real system, solved in closed form with det J), which restores the
// digits the polynomial loses near planetary caustics. A root is an image when
// its polished lens-equation residual is at round-off level; spurious roots keep
// residuals many orders larger. The accepted set must have 3 or 5 members and
// satisfy the image-parity rule n− − n+ = 1 of a two-point-mass lens (Burke
// 1981, ApJ 244, L1); otherwise the solver retries from a cold start and then
// reports ErrImages.
//
// Within about 1e-12 θE of a caustic the image count is decided by round-off
// (the source position itself is no more precise than that); the total
// magnification there is dominated by the merging pair either way. When even
// the last attempt finds no valid set and the failure comes from roots where
// det J (nearly) vanishes, so that Newton cannot converge on them or their
// parity is round-off (a source on a fold or cusp to ~1e-11), those roots are
// taken as the merging images, with |1/det J| at their position (capped at
// the value a source within round-off of a fold can reach, see foldCap) and
// the parities the rule above requires; Stats.OnCaustic counts such
// calls. Their magnification is then only an order of magnitude.
//
// The polynomial, the Aberth iteration and the cold starts are shared with the
// finite-source code, which reads all five roots through allRoots.
type Solver struct {
	b      Binary
	err    error   // validation error of b
	o      float64 // origin of the working frame: the lighter lens (see setBinary)
	z1, z2 float64 // lens positions in the working frame (z − o)
	m1, m2 float64 // mass fractions
	cm     fsLens  // the lens in the centre-of-mass frame, for the finite-source code
	wk     fsLens  // the lens in the working frame (cold starts)

	c     [6]complex128 // polynomial coefficients, c[k] multiplies z^k
	deg   int           // 5, or 4 when the source sits exactly on a lens
	roots [5]complex128 // current polynomial roots (the warm start)
	warm  bool

	// Previous call's roots and source (working frame), for the linear
	// predictor along straight paths; hist says they are valid.
	prevRoots       [5]complex128
	prevZeta, zeta0 complex128
	hist            bool
	imgs            [5]Image // scratch for Mag

	// Stats counts solver work since the last Reset: calls, Aberth sweeps and
	// cold restarts. Tests and benchmarks read it.
	Stats SolverStats
}

// SolverStats counts the work done by a Solver.
type SolverStats struct {
	Calls, Sweeps, Cold, Retries int
	// OnCaustic counts sources found on a caustic to within round-off,
	// where merging images get the magnification cap (see Solver).
	OnCaustic int
}

// NewSolver returns a solver for b.
func NewSolver(b Binary) *Solver {
	s := &Solver{}
	s.setBinary(b)
	return s
}

// setBinary installs b. The polynomial is built and solved in a frame centred
// on the lighter lens. The roots that cluster (images of sources near the
// planetary caustics, minor images near the lighter lens) then sit near the
// origin, where float64 resolves them: in the centre-of-mass frame with
// q = 4e-7 and s = 9, such a cluster of size 6e-4 at |z| = 9 loses so many
// digits that polishing lands on the wrong images. The lens equation is
// invariant under this real shift.
func (s *Solver) setBinary(b Binary) {
	s.b = b
	s.err = b.validate()
	z1, z2, m1, m2 := b.Lenses()
	o := z2
	if b.Q > 1 {
		o = z1
	}
	if s.err != nil {
		o = 0
	}
	if s.warm && o != s.o {
		for k := range s.roots {
			s.roots[k] += complex(s.o-o, 0)
		}
	}
	s.hist = false // the lens moved: no straight-line history
	s.o = o
	s.z1, s.z2, s.m1, s.m2 = z1-o, z2-o, m1, m2
	s.cm = fsLens{z1: z1, z2: z2, m1: m1, m2: m2, o: o, b: b}
	s.wk = s.cm.shifted(o)
	if s.err != nil {
		s.warm = false
	}
}

// SetBinary changes the lens (orbital motion) keeping the warm start.
func (s *Solver) SetBinary(b Binary) { s.setBinary(b) }

// Binary returns the lens the solver works on.
func (s *Solver) Binary() Binary { return s.b }

// Reset forgets the warm start (and zeroes Stats).
func (s *Solver) Reset() {
	s.warm, s.hist = false, false
	s.Stats = SolverStats{}
}

// Images appends the true images of source position zeta to dst[:0]. With
// cap(dst) ≥ 5 it does not allocate. On error it returns dst[:0].
func (s *Solver) Images(dst []Image, zeta complex128) ([]Image, error) {
	dst = dst[:0]
	if s.err != nil {
		return dst, s.err
	}
	if !finite(real(zeta)) || !finite(imag(zeta)) {
		return dst, fmt.Errorf("lens: source position %v is not finite", zeta)
	}
	s.Stats.Calls++
	zeta -= complex(s.o, 0)
	s.coefficients(zeta)
	s.predict(zeta)
	// Attempt 0: warm start (when available). Attempts 1 and 2: cold starts
	// from two different sets of guesses, the second with more sweeps
	// allowed. Attempts 3 and 4 try again accepting a source on a caustic.
	for attempt := 0; attempt < 5; attempt++ {
		if attempt == 0 && !s.warm {
			continue
		}
		if attempt > 0 {
			// 1: physical guesses, 2: ring, 3: physical again, 4: half ring.
			s.coldStart([5]int{0, 0, 1, 0, 2}[attempt], zeta)
			s.Stats.Cold++
			if attempt > 1 {
				s.Stats.Retries++
			}
		}
		maxSweeps := 60
		if attempt >= 2 {
			maxSweeps = 400
		}
		sweeps, ok := aberth(&s.c, s.deg, &s.roots, maxSweeps)
		s.Stats.Sweeps += sweeps
		if !ok {
			continue
		}
		out, ok := s.select_(dst, zeta, attempt >= 3)
		if ok {
			if s.warm && attempt == 0 {
				s.hist = true
			}
			s.warm = true
			s.zeta0 = zeta
			return out, nil
		}
	}
	s.warm, s.hist = false, false
	return dst, fmt.Errorf("%w (s = %v, q = %v, source %v)", ErrImages, s.b.S, s.b.Q, zeta+complex(s.o, 0))
}

// predict moves the warm-start roots along their last displacement when the
// source keeps moving in a straight line (trajectories, map rows): the roots
// of the previous two calls give a linear extrapolation whose error is second
// order in the step, which saves about one Aberth sweep. Any other move keeps
// the plain warm start.
//
// "Straight" allows a sideways deviation of 1e-2 of the step, not just
// rounding: trajectories bent by annual parallax curve by far more than 1e-6
// of a step, and with a rounding-level test they fell back to the plain warm
// start, which made binary χ² with parallax about 20 % slower than static
// (fit BenchmarkChi2Parallax/binary, target ≤ 1.2). The extrapolation is only
// a starting point for Aberth's iteration, so a slightly bent path costs
// nothing in accuracy; it still beats the unmoved roots by a wide margin.
func (s *Solver) predict(zeta complex128) {
	if !s.warm {
		s.hist = false
		return
	}
	cur := s.roots
	if s.hist {
		dOld, dNew := s.zeta0-s.prevZeta, zeta-s.zeta0
		n2 := real(dOld)*real(dOld) + imag(dOld)*imag(dOld)
		if n2 > 0 {
			c := (real(dNew)*real(dOld) + imag(dNew)*imag(dOld)) / n2
			if c > 0 && c <= 2 && abs1(dNew-complex(c, 0)*dOld) <= 1e-2*abs1(dNew) {
				for k := 0; k < s.deg; k++ {
					s.roots[k] += complex(c, 0) * (cur[k] - s.prevRoots[k])
				}
			}
		}
	}
	s.prevRoots = cur
	s.prevZeta = s.zeta0
	s.hist = false
}

// allRoots finds all five roots of the lens polynomial at zeta (centre-of-mass
// frame), true images and spurious roots, with their classification
// (fsLens.solve: the polynomial, Aberth iteration, cold starts and frame of
// Images), for the finite-source code, which follows all five along a source
// boundary. It warm-starts from this Solver's last roots and updates them, so
// that Images and allRoots calls can alternate along a trajectory.
func (s *Solver) allRoots(out *fsRoots, zeta complex128) error {
	if s.err != nil {
		return s.err
	}
	s.Stats.Calls++
	o := complex(s.o, 0)
	var warm *[5]complex128
	var w [5]complex128
	if s.warm {
		for k := range w {
			w[k] = s.roots[k] + o
		}
		warm = &w
	}
	s.hist = false // allRoots does not keep the straight-line history
	if !s.cm.solve(out, zeta, warm) {
		s.warm = false
		return fmt.Errorf("%w (s = %v, q = %v, source %v)", ErrImages, s.b.S, s.b.Q, zeta)
	}
	for k := range s.roots {
		s.roots[k] = out.z[k] - o
	}
	s.warm = out.n == 5
	return nil
}

// Mag is the point-source magnification at zeta: Σ|Mag| over the true images.
func (s *Solver) Mag(zeta complex128) (float64, error) {
	imgs, err := s.Images(s.imgs[:0], zeta)
	if err != nil {
		return 0, err
	}
	a := 0.0
	for _, im := range imgs {
		a += math.Abs(im.Mag)
	}
	return a, nil
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// coefficients fills s.c and s.deg with the lens polynomial of Witt (1990)
// for source zeta (working frame), built by fsLens.poly.
func (s *Solver) coefficients(zeta complex128) {
	s.deg = wittPoly(&s.c, s.z1, s.z2, s.m1, s.m2, zeta)
}

// coldStart places the initial roots (fsLens.coldStart).
func (s *Solver) coldStart(kind int, zeta complex128) {
	s.wk.coldStart(&s.roots, &s.c, s.deg, kind, zeta)
}

// cabs is |z| without the overflow care of cmplx.Abs (arguments here are far
// from the float64 limits).
func cabs(z complex128) float64 { return math.Sqrt(real(z)*real(z) + imag(z)*imag(z)) }

// cinv is 1/z in plain real arithmetic (the runtime's complex division also
// handles infinities, which we never have, and is several times slower).
func cinv(z complex128) complex128 {
	x, y := real(z), imag(z)
	d := x*x + y*y
	return complex(x/d, -y/d)
}

// cdiv is a/b, see cinv.
func cdiv(a, b complex128) complex128 {
	x, y := real(b), imag(b)
	d := x*x + y*y
	return complex((real(a)*x+imag(a)*y)/d, (imag(a)*x-real(a)*y)/d)
}

// aberth runs Gauss–Seidel Aberth–Ehrlich sweeps on the polynomial c of degree
// n (4 or 5) starting from roots[:n] until every correction is below 1e-13 of
// its root (or of the root scale for roots near 0). It reports the sweeps done
// and whether it converged to finite values.
func aberth(c *[6]complex128, n int, roots *[5]complex128, maxSweeps int) (int, bool) {
	// Monic coefficients and their sizes (L1 norms: cheaper than |·| and
	// within √2 of it, which is all a round-off bound needs).
	var a [6]complex128
	var aa [6]float64
	inv := cinv(c[n])
	for k := 0; k < n; k++ {
		a[k] = c[k] * inv
		aa[k] = abs1(a[k])
	}
	a[n] = 1
	scale := 0.0
	for k := 0; k < n; k++ {
		scale = math.Max(scale, abs1(roots[k]))
	}
	floor := 1e-300 + 1e-30*scale
	var done [5]bool
	for sweep := 1; sweep <= maxSweeps; sweep++ {
		all := true
		for k := 0; k < n; k++ {
			if done[k] {
				continue
			}
			z := roots[k]
			// Horner for p and p'.
			p := a[n]
			dp := complex(0, 0)
			az := abs1(z)
			bound := 1.0 // Σ|a_j||z|^j, the round-off scale of p(z)
			for j := n - 1; j >= 0; j-- {
				dp = dp*z + p
				p = p*z + a[j]
				bound = bound*az + aa[j]
			}
			if abs1(p) <= 1e-15*bound {
				// p(z) is zero to round-off: no further digits to gain.
				done[k] = true
				continue
			}
			ratio := cdiv(p, dp)
			var sum complex128
			for j := 0; j < n; j++ {
				if j != k {
					sum += cinv(z - roots[j])
				}
			}
			w := cdiv(ratio, 1-ratio*sum)
			if t := real(w) + imag(w); t-t != 0 {
				return sweep, false // NaN or Inf
			}
			roots[k] = z - w
			// The iteration converges cubically: after a correction of 1e-7
			// the error is ~1e-21/δ² relative, δ the relative distance to the
			// nearest other root, so below 1e-9 even for a pair of images
			// 1e-6 apart (a source ~1e-12 from a fold). True images are then
			// polished on the lens equation; spurious roots need no more.
			// The Newton ratio must be small too: a guess that sits next to
			// another guess, far from any root, gets a tiny Aberth correction
			// (|1 − N·S| is huge) without being converged.
			aw := abs1(w)
			if (aw <= 1e-7*az && abs1(ratio) <= 1e-6*az) || aw <= floor {
				done[k] = true
			} else {
				all = false
			}
		}
		if all {
			return sweep, true
		}
	}
	// Not every correction fell below the threshold (clustered roots stall at
	// round-off); the roots are still usable if finite, and the lens-equation
	// test decides.
	return maxSweeps, true
}

// abs1 is |Re z| + |Im z|, a norm within √2 of |z|.
func abs1(z complex128) float64 { return math.Abs(real(z)) + math.Abs(imag(z)) }

// horner returns the polynomial c[0] + c[1]z + … + c[len(c)−1]z^(len(c)−1)
// and its derivative at z (the Newton polishes of caustics.go and
// finite_roots.go; aberth also carries a round-off bound and keeps its own
// loop).
func horner(c []complex128, z complex128) (p, dp complex128) {
	p = c[len(c)-1]
	for j := len(c) - 2; j >= 0; j-- {
		dp = dp*z + p
		p = p*z + c[j]
	}
	return p, dp
}

// select_ polishes each root on the lens equation, keeps the true images and
// checks the set. It appends the images to dst and reports whether the set is
// valid.
//
// With onCaustic set (the last attempt), a set that fails those checks is
// read as a source on a caustic to within round-off, see Solver.
func (s *Solver) select_(dst []Image, zeta complex128, onCaustic bool) ([]Image, bool) {
	z1, z2, m1, m2 := complex(s.z1, 0), complex(s.z2, 0), s.m1, s.m2
	npos, nneg := 0, 0
	var gray [5]complex128
	var grayDet [5]float64
	ng := 0
	var capped uint8 // bit i: dst[i] had |det J| < 1/maxImageMag
	big := 0         // images with |1/det J| > 1e4
	for k := 0; k < s.deg; k++ {
		z := s.roots[k]
		var f, e complex128
		var det, res, sc, terms float64
		accepted := false
		for it := 0; it < 12; it++ {
			h1, h2 := cinv(z-z1), cinv(z-z2)
			g := complex(m1, 0)*h1 + complex(m2, 0)*h2
			e = complex(m1, 0)*h1*h1 + complex(m2, 0)*h2*h2
			f = z - zeta - complex(real(g), -imag(g))
			det = 1 - (real(e)*real(e) + imag(e)*imag(e))
			res = abs1(f)
			sc, terms = resScale(z, zeta, h1, h2, m1, m2)
			if res <= 4e-16*sc {
				accepted = true
				break
			}
			if it == 0 && res > 1e-3*sc {
				break // clearly spurious: leave it alone
			}
			if det == 0 {
				break
			}
			// Newton step on f(z, z̄) = 0: δz + E δz̄ = −f with E = ē, solved
			// as δz = (−f + ē f̄)/(1 − |e|²) (conj(e·f) = ē f̄).
			ef := e * f
			step := cdiv(complex(-real(f)+real(ef), -imag(f)-imag(ef)), complex(det, 0))
			z += step
			if abs1(step) <= 1e-15*abs1(z) {
				// Converged in position; judge by the residual there.
				h1, h2 = cinv(z-z1), cinv(z-z2)
				g = complex(m1, 0)*h1 + complex(m2, 0)*h2
				e = complex(m1, 0)*h1*h1 + complex(m2, 0)*h2*h2
				f = z - zeta - complex(real(g), -imag(g))
				det = 1 - (real(e)*real(e) + imag(e)*imag(e))
				res = abs1(f)
				sc, terms = resScale(z, zeta, h1, h2, m1, m2)
				accepted = res <= 1e-12*sc
				break
			}
		}
		if res > 1e-8*terms {
			accepted = false
		}
		if !accepted {
			if res <= 1e-9*sc && math.Abs(det) < 1e-6 {
				// A root with a small residual where Newton cannot converge
				// because det J (nearly) vanishes: possibly an image on the
				// critical curve, merging with others.
				gray[ng] = z
				grayDet[ng] = det
				ng++
			}
			continue
		}
		// Two roots polished onto one image count once (in clustered roots
		// near a lens a spurious root can sit in the basin of a true image).
		dup := false
		for _, im := range dst {
			if cabs(im.Z-complex(s.o, 0)-z) <= 1e-10*(1+cabs(z)) {
				dup = true
			}
		}
		if dup {
			if onCaustic && math.Abs(det) < 1e-6 && ng < len(gray) {
				// Merging images of a source on a cusp can share a root
				// position to 1e-10.
				gray[ng] = z
				grayDet[ng] = det
				ng++
			}
			continue
		}
		mag := 1 / det
		if math.Abs(mag) > maxImageMag || !finite(mag) {
			// |det J| below 1e-12 is not resolved by float64 (see
			// maxImageMag): images merging on the caustic to round-off,
			// where Newton stalls with the roots on the critical curve.
			mag = math.Copysign(maxImageMag, det)
			capped |= 1 << len(dst)
		}
		if math.Abs(mag) > 1e4 {
			big++
		}
		if mag > 0 {
			npos++
		} else {
			nneg++
		}
		dst = append(dst, Image{Z: z + complex(s.o, 0), Mag: mag})
		s.roots[k] = z
	}
	n := len(dst)
	if (n == 3 || n == 5) && nneg-npos == 1 {
		if big >= 2 {
			s.unresolvedPair(dst, zeta)
		}
		return dst, true
	}
	if !onCaustic {
		return dst[:0], false
	}
	// The source sits on a caustic to within round-off (a fold or a cusp
	// exactly, as for s = 2, q = 1/8, ζ = 0): the merging images are the
	// roots kept in gray and any accepted image with |det J| < 1e-9, whose
	// parity round-off decides. They keep |1/det J| at their position (capped
	// by foldCap) with the parities the rule n− − n+ = 1 requires.
	kept := dst[:0]
	npos, nneg = 0, 0
	for i, im := range dst {
		if math.Abs(im.Mag) > 1e9 || capped&(1<<i) != 0 {
			if ng == len(gray) {
				return dst[:0], false
			}
			gray[ng] = im.Z - complex(s.o, 0)
			grayDet[ng] = 1 / im.Mag
			if capped&(1<<i) != 0 {
				grayDet[ng] = 0 // unresolved: foldCap below decides
			}
			ng++
			continue
		}
		if im.Mag > 0 {
			npos++
		} else {
			nneg++
		}
		kept = append(kept, im)
	}
	dst, n = kept, len(kept)
	if ng > 0 && (n+ng == 3 || n+ng == 5) {
		needNeg := (n + ng + 1) / 2
		addNeg := needNeg - nneg
		if addNeg >= 0 && addNeg <= ng {
			for i := 0; i < ng; i++ {
				mag := maxImageMag
				if ng == 2 {
					mag = s.foldCap(gray[i], zeta) // a fold pair, see above
				}
				if d := math.Abs(grayDet[i]); d > 1/mag {
					mag = 1 / d
				}
				if i < addNeg {
					mag = -mag
				}
				dst = append(dst, Image{Z: gray[i] + complex(s.o, 0), Mag: mag})
			}
			s.Stats.OnCaustic++
			return dst, true
		}
	}
	return dst[:0], false
}

// unresolvedPair caps the pair of images merging on a fold when the source is
// on the caustic to round-off. Newton's method then stalls on two roots of
// opposite parity on the critical curve whose |det J| (down to 1e-12) says
// nothing: for a resolved fold pair a distance Δ apart, |det J| ≈ |e′|Δ (see
// foldCap). When the two images with the largest |1/det J| exceed foldCap,
// have opposite parities, lie within 1e-3 θE of each other (a merging pair,
// not two bright images of a tiny caustic, for which foldCap is no bound) and
// both have |det J| below 1e-2 |e′|Δ, both get |1/det J| = foldCap.
// Images merging at a cusp (three, or one after de-duplication) keep their
// values: there A grows like 1/δ, not 1/√δ.
func (s *Solver) unresolvedPair(dst []Image, zeta complex128) {
	// The two images with the largest |1/det J|.
	i0, i1 := -1, -1
	for i, im := range dst {
		m := math.Abs(im.Mag)
		switch {
		case i0 < 0 || m > math.Abs(dst[i0].Mag):
			i0, i1 = i, i0
		case i1 < 0 || m > math.Abs(dst[i1].Mag):
			i1 = i
		}
	}
	if i1 < 0 || (dst[i0].Mag > 0) == (dst[i1].Mag > 0) {
		return
	}
	o := complex(s.o, 0)
	idx := [2]int{i0, i1}
	var caps [2]float64
	sep := cabs(dst[i0].Z - dst[i1].Z)
	if sep > 1e-3*(1+cabs(dst[i0].Z)) {
		return // not a merging pair (all images of a tiny caustic are bright)
	}
	for k, i := range idx {
		c, e1 := s.foldCapE(dst[i].Z-o, zeta)
		m := math.Abs(dst[i].Mag)
		if m <= c || 1/m >= 1e-2*e1*sep {
			return // resolved
		}
		caps[k] = c
	}
	for k, i := range idx {
		dst[i].Mag = math.Copysign(caps[k], dst[i].Mag)
	}
}

// foldCap is the largest |1/det J| an image at z merging on a fold can have
// when the source lies within round-off of the caustic. Near a critical point
// (|e| = 1) the lens map is singular along one direction, where the source
// moves by δ ≈ |e′|Δ²/2 for an image displacement Δ, while det J grows by
// |∇det J| Δ = 2|e′|Δ, e′ = ∂e/∂z = −2Σ mi hi³. A source δ from the fold thus
// has merging images with |det J| ≈ 2√(2δ|e′|). With δ the round-off of the
// source position at this image (2.2e-16 of the lens-equation terms) this is
// the magnification a float64 source on the caustic can reach; the det J of a
// root where Newton's method stalled can be orders of magnitude smaller (down
// to round-off), and taking it as it stands gave on-caustic magnifications up
// to 1e12 where the images on either side of the caustic within 1e-11 have
// 1e7 at most. Cusps (|1/det J| growing like 1/δ) can exceed this bound, but
// only for sources within round-off of the cusp point itself.
func (s *Solver) foldCap(z, zeta complex128) float64 {
	c, _ := s.foldCapE(z, zeta)
	return c
}

// foldCapE is foldCap and |e′| at z.
func (s *Solver) foldCapE(z, zeta complex128) (float64, float64) {
	h1, h2 := cinv(z-complex(s.z1, 0)), cinv(z-complex(s.z2, 0))
	e1 := 2 * (complex(s.m1, 0)*h1*h1*h1 + complex(s.m2, 0)*h2*h2*h2)
	// Round-off scale of the source position in the centre-of-mass frame
	// (the frame of the caller's ζ; smaller than the working frame's).
	o := complex(s.o, 0)
	terms := abs1(z+o) + abs1(zeta+o) + s.m1*abs1(h1) + s.m2*abs1(h2)
	ae := cabs(e1)
	d := 2 * math.Sqrt(2*2.2e-16*terms*ae)
	if !(d > 1/maxImageMag) {
		return maxImageMag, ae
	}
	return 1 / d, ae
}

// resScale is the round-off scale of the lens-equation residual at z: the size
// of its terms plus the effect of rounding z itself, |z|·(1 + |∂ζ/∂z̄|) with
// |∂ζ/∂z̄| ≤ Σ mi|hi|², hi = 1/(z − zi). Near a lens the second part dominates.
//
// terms is the size of the terms alone. A true image cancels them; a spurious
// root sitting on a lens (it exists when the source is exactly on that lens)
// has a residual as large as the diverging term and an even larger rounding
// scale, so acceptance also asks res ≤ 1e-8·terms.
//
// Sizes are L1 norms (within √2 of |·|, no square roots: this runs for every
// root at every polishing step).
func resScale(z, zeta, h1, h2 complex128, m1, m2 float64) (sc, terms float64) {
	a1, a2 := abs1(h1), abs1(h2)
	az := abs1(z)
	terms = az + abs1(zeta) + m1*a1 + m2*a2
	return terms + az*(m1*a1*a1+m2*a2*a2), terms
}
