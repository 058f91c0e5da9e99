package lens

import (
	"math"
	"math/cmplx"
	"math/rand/v2"
	"sort"
	"testing"
)

// Brute-force reference. The finite-source tests compare FiniteMag with the
// image-plane brute force of finite_imageplane_test.go (inverse ray shooting on
// an adaptive quadtree with rigorous bounds), which uses only the forward lens
// equation. It replaced a source-plane integration of the point-source
// magnification, which was 0.5–2 % off where the disk holds a lens or sits on
// a caustic. The Gauss–Kronrod rule below stays as the tests' 1-D quadrature.

// bruteFallbacks is logged by refCheck; the image-plane reference never calls
// Solver.Mag, so it stays 0.
var bruteFallbacks int

// gk15 nodes and weights (Kronrod 15 with embedded Gauss 7); the standard
// values, as tabulated e.g. in QUADPACK (Piessens et al. 1983), here to 16 digits.
var (
	fsGKX = [8]float64{
		0.991455371120812639, 0.949107912342758525, 0.864864423359769073, 0.741531185599394440,
		0.586087235467691130, 0.405845151377397167, 0.207784955007898468, 0,
	}
	fsGKWK = [8]float64{
		0.022935322010529225, 0.063092092629978553, 0.104790010322250184, 0.140653259715525919,
		0.169004726639267903, 0.190350578064785410, 0.204432940075298892, 0.209482141084727828,
	}
	fsGKWG = [4]float64{ // weights of the Gauss nodes fsGKX[1], fsGKX[3], fsGKX[5], fsGKX[7]
		0.129484966168869693, 0.279705391489276668, 0.381830050505118945, 0.417959183673469388,
	}
)

// gk returns the Kronrod estimate and |K − G| on [a, b].
func fsGK(f func(float64) float64, a, b float64) (k, e float64) {
	c, h := (a+b)/2, (b-a)/2
	var sk, sg float64
	for i := 0; i < 7; i++ {
		x := h * fsGKX[i]
		v := f(c-x) + f(c+x)
		sk += fsGKWK[i] * v
		if i%2 == 1 {
			sg += fsGKWG[i/2] * v
		}
	}
	fc := f(c)
	sk += fsGKWK[7] * fc
	sg += fsGKWG[3] * fc
	return sk * h, math.Abs(sk-sg) * h
}

// fsAdaptGK integrates f on [a, b] to absolute accuracy tol by recursive
// bisection, halving the tolerance with the interval. An interval stops
// splitting when its error estimate is at round-off level or at depth
// fsGKMaxDepth.
func fsAdaptGK(f func(float64) float64, a, b, tol float64, depth int) float64 {
	k, e := fsGK(f, a, b)
	if e <= tol || e <= 1e-14*math.Abs(k) || depth >= fsGKMaxDepth {
		return k
	}
	m := (a + b) / 2
	return fsAdaptGK(f, a, m, tol/2, depth+1) + fsAdaptGK(f, m, b, tol/2, depth+1)
}

// fsGKMaxDepth caps the bisection (2^-40 of a piece): an |x|^{-1/2} caustic
// singularity left in the last interval then contributes ~1e-6 of the piece
// at most.
var fsGKMaxDepth = 40

// gridDisk is the midpoint rule on an n × 2n polar grid over the disk, in the
// area variable x = (r/ρ)² (so every cell has the same area) and the angle: the
// crude source-plane brute force, kept as the speed baseline of the
// benchmarks (its error at a caustic falls only as n^-1.5).
func gridDisk(mag func(complex128) float64, zc complex128, rho, ld float64, n int) float64 {
	g := GammaFromLD(ld)
	sum := 0.0
	m := 2 * n
	var sc [1024][2]float64
	for j := 0; j < m; j++ {
		sc[j][0], sc[j][1] = math.Sincos(2 * math.Pi * (float64(j) + 0.5) / float64(m))
	}
	for i := 0; i < n; i++ {
		x := (float64(i) + 0.5) / float64(n)
		r := rho * math.Sqrt(x)
		w := 1 - g*(1-1.5*math.Sqrt(1-x))
		row := 0.0
		for j := 0; j < m; j++ {
			row += mag(zc + complex(r*sc[j][1], r*sc[j][0]))
		}
		sum += w * row
	}
	return sum / float64(n*m)
}

// bruteBinaryDisk is the brute-force reference magnification of a disk of
// radius rho at zc with linear limb darkening ld behind the lens of s: the
// image-plane method converged to relative accuracy eps (imagePlaneMag).
func bruteBinaryDisk(t testing.TB, s *Solver, zc complex128, rho, ld, eps float64) float64 {
	m, e, _ := imagePlaneMag(binaryMasses(s.Binary()), zc, rho, ld, eps)
	if !(e <= eps*m) {
		t.Logf("image-plane reference at %v (rho %g): error estimate %.2g above the asked %.2g", zc, rho, e/m, eps)
	}
	return m
}

// fsCriticalPoints returns n·4 points of the critical curves of b and their
// caustic images, from the quartic m1(z−z2)² + m2(z−z1)² = e^{iφ}(z−z1)²(z−z2)²
// (|Σ mi/(z−zi)²| = 1, det J = 0; references.md §3 Jacobian [W90]).
func fsCriticalPoints(b Binary, n int) (crit, caus []complex128) {
	l := newFSLens(b)
	z1, z2 := complex(l.z1, 0), complex(l.z2, 0)
	var z [5]complex128
	for i := 0; i < n; i++ {
		l.criticalQuartic(cmplx.Rect(1, 2*math.Pi*float64(i)/float64(n)), &z, i == 0)
		for k := 0; k < 4; k++ {
			crit = append(crit, z[k])
			zb := cmplx.Conj(z[k])
			caus = append(caus, z[k]-complex(l.m1, 0)/(zb-z1)-complex(l.m2, 0)/(zb-z2))
		}
	}
	return crit, caus
}

// cusps finds the cusps among the caustic samples of fsCriticalPoints: along
// each root track the caustic's direction of travel reverses at a cusp
// (tangent reversal, the criterion used for the cusp counts of
// references.md §5).
func fsCusps(crit, caus []complex128, n int) []complex128 {
	var out []complex128
	for k := 0; k < 4; k++ {
		// Across φ = 2π the quartic's roots come back permuted: the
		// neighbour there is the nearest critical point of the other end.
		near := func(i, k, j int) int {
			best, bk := math.Inf(1), 0
			for kk := 0; kk < 4; kk++ {
				if d := cmplx.Abs(crit[4*j+kk] - crit[4*i+k]); d < best {
					best, bk = d, kk
				}
			}
			return 4*j + bk
		}
		for i := 0; i < n; i++ {
			prev, next := 4*(i-1)+k, 4*(i+1)+k
			if i == 0 {
				prev = near(0, k, n-1)
			}
			if i == n-1 {
				next = near(n-1, k, 0)
			}
			a := caus[4*i+k] - caus[prev]
			b := caus[next] - caus[4*i+k]
			if real(a)*real(b)+imag(a)*imag(b) < 0 {
				out = append(out, caus[4*i+k])
			}
		}
	}
	return out
}

type fsRefPoint struct {
	s, q, rho float64
	zeta      complex128
	kind      string
}

// fsRefSet draws points near and on the caustics (folds and cusps) of every
// configuration in the grid of the issue: ρ ∈ {1e-4, 1e-3, 1e-2, 0.1},
// q ∈ {1e-5, 1e-3, 0.3, 1}, s ∈ {0.5, 0.9, 1.0, 1.2, 2.5}; per configuration
// perConf points: a third on a caustic point exactly, a third within 2ρ of a
// fold, a third within 3ρ of a cusp. Seeded, deterministic.
func fsRefSet(perConf int, seed uint64) []fsRefPoint {
	rng := rand.New(rand.NewPCG(seed, 7))
	var pts []fsRefPoint
	for _, c := range fsRefConfigs() {
		rho := c.rho
		const n = 720
		crit, caus := fsCriticalPoints(Binary{S: c.s, Q: c.q}, n)
		cs := fsCusps(crit, caus, n)
		for i := 0; i < perConf; i++ {
			p := fsRefPoint{s: c.s, q: c.q, rho: rho}
			switch i % 3 {
			case 0:
				p.zeta = caus[rng.IntN(len(caus))]
				p.kind = "on caustic"
			case 1:
				d := 2 * rho * rng.Float64()
				p.zeta = caus[rng.IntN(len(caus))] + cmplx.Rect(d, 2*math.Pi*rng.Float64())
				p.kind = "near fold"
			default:
				cusp := cs[rng.IntN(len(cs))]
				d := 3 * rho * rng.Float64()
				p.zeta = cusp + cmplx.Rect(d, 2*math.Pi*rng.Float64())
				p.kind = "near cusp"
			}
			pts = append(pts, p)
		}
	}
	return pts
}

// fsRefConfigs is the grid of configurations, ρ outermost and s
// innermost (the order fixes the seeded draws of the reference table).
func fsRefConfigs() (out []struct{ rho, q, s float64 }) {
	for _, rho := range []float64{1e-4, 1e-3, 1e-2, 0.1} {
		for _, q := range []float64{1e-5, 1e-3, 0.3, 1} {
			for _, s := range []float64{0.5, 0.9, 1.0, 1.2, 2.5} {
				out = append(out, struct{ rho, q, s float64 }{rho, q, s})
			}
		}
	}
	return out
}

// fsSwitchSet draws perConf points per configuration of the same grid between
// 3ρ and 20ρ from a caustic point (seeded): where FiniteMag's switch chooses
// between the point source, the expansions and the contour.
func fsSwitchSet(perConf int, seed uint64) []fsRefPoint {
	rng := rand.New(rand.NewPCG(seed, 13))
	var pts []fsRefPoint
	for _, c := range fsRefConfigs() {
		_, caus := fsCriticalPoints(Binary{S: c.s, Q: c.q}, 720)
		for i := 0; i < perConf; i++ {
			d := c.rho * (3 + 17*rng.Float64())
			z := caus[rng.IntN(len(caus))] + cmplx.Rect(d, 2*math.Pi*rng.Float64())
			pts = append(pts, fsRefPoint{s: c.s, q: c.q, rho: c.rho, zeta: z, kind: "off caustic"})
		}
	}
	return pts
}

func TestCriticalPointsAreCritical(t *testing.T) {
	for _, b := range []Binary{{1, 1}, {2, 1e-3}, {0.5, 0.3}} {
		crit, _ := fsCriticalPoints(b, 90)
		l := newFSLens(b)
		for _, z := range crit {
			_, g := l.lensEq(z, 0)
			if d := 1 - fsAbs2(g); math.Abs(d) > 1e-9 {
				t.Fatalf("b = %v: det J = %g at critical point %v", b, d, z)
			}
		}
	}
	// Cusp counts, references.md §5 (standard results): close 4+3+3, resonant 6, wide 4+4.
	for _, c := range []struct {
		b    Binary
		want int
	}{{Binary{1, 1e-3}, 6}, {Binary{2.5, 1}, 8}, {Binary{0.5, 1}, 10}, {Binary{1, 1}, 6}} {
		crit, caus := fsCriticalPoints(c.b, 2000)
		if got := len(fsCusps(crit, caus, 2000)); got != c.want {
			t.Errorf("b = %v: %d cusps, want %d (references.md §5)", c.b, got, c.want)
		}
	}
}

func fsQuantile(x []float64, p float64) float64 {
	y := append([]float64(nil), x...)
	sort.Float64s(y)
	return y[int(p*float64(len(y)-1))]
}
