package lens

import (
	"math"
	"math/rand/v2"
	"testing"
)

// randomBinary draws log-uniform q ∈ [1e-7, 1] and s ∈ [0.05, 20].
func randomBinary(rng *rand.Rand) Binary {
	q := math.Pow(10, -7*rng.Float64())
	s := 0.05 * math.Pow(400, rng.Float64())
	return Binary{S: s, Q: q}
}

// randomSource draws a source position in one of several regions of interest.
func randomSource(rng *rand.Rand, b Binary) complex128 {
	z1, z2, _, _ := b.Lenses()
	switch rng.IntN(4) {
	case 0: // box around the lenses
		return complex(z1-1.5+(z2-z1+3)*rng.Float64(), -1.5+3*rng.Float64())
	case 1: // near the primary
		r := math.Pow(10, -4+3*rng.Float64())
		sn, cs := math.Sincos(2 * math.Pi * rng.Float64())
		return complex(z1+r*cs, r*sn)
	case 2: // near the planetary caustic at s − 1/s from the primary
		w := 4*math.Sqrt(b.Q)/b.S + 1e-3
		return complex(z1+b.S-1/b.S+w*(2*rng.Float64()-1), w*(2*rng.Float64()-1))
	default: // near the secondary
		r := math.Pow(10, -5+4*rng.Float64())
		sn, cs := math.Sincos(2 * math.Pi * rng.Float64())
		return complex(z2+r*cs, r*sn)
	}
}

// TestSolverVsEigen compares Solver with the independent gonum eigen solver
// (binary_eigen_test.go) on random configurations: image counts must agree and
// magnifications agree to 1e-8 relative.
func TestSolverVsEigen(t *testing.T) {
	n := 10000
	if testing.Short() {
		n = 3000
	}
	rng := rand.New(rand.NewPCG(1, 2))
	var buf [5]Image
	worst := 0.0
	shared := NewSolver(Binary{S: 1, Q: 1})
	for i := 0; i < n; i++ {
		b := randomBinary(rng)
		zeta := randomSource(rng, b)
		want, nw := eigenMag(b.S, b.Q, zeta)
		// Alternate a fresh solver with one that carries the roots of the
		// previous, unrelated configuration as its warm start (the hardest
		// warm start there is).
		sv := NewSolver(b)
		if i%2 == 1 {
			sv = shared
			sv.SetBinary(b)
		}
		imgs, err := sv.Images(buf[:0], zeta)
		if err != nil {
			t.Errorf("s=%v q=%v ζ=%v: %v (eigen: %d images)", b.S, b.Q, zeta, err, nw)
			continue
		}
		a := 0.0
		for _, im := range imgs {
			a += math.Abs(im.Mag)
		}
		if len(imgs) != nw {
			t.Errorf("s=%v q=%v ζ=%v: %d images, eigen %d (A %v vs %v)", b.S, b.Q, zeta, len(imgs), nw, a, want)
			continue
		}
		r := math.Abs(a-want) / want
		worst = math.Max(worst, r)
		if r > 1e-8 {
			t.Errorf("s=%v q=%v ζ=%v: A = %.12g, eigen %.12g (rel %.2g)", b.S, b.Q, zeta, a, want, r)
		}
	}
	t.Logf("%d configurations, worst relative difference %.2g", n, worst)
}
