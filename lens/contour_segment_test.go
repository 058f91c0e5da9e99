package lens

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
)

// segmentExact is the area ½∫Im(z̄ dz) of track f over [tha, thb] by
// Gauss–Legendre quadrature (gonum quad.Fixed, n nodes).
func segmentExact(f branchTrack, tha, thb float64, n int) float64 {
	return quad.Fixed(func(th float64) float64 {
		z, dz, _ := f(th)
		return 0.5 * fsCross(z, dz)
	}, tha, thb, n, quad.Legendre{}, 0)
}

// TestSegmentQuintic: the value of ctSegment is the area of the quintic
// Hermite interpolant of the end data, so on a track that is a polynomial
// of degree 5 in θ it is exact (the integrand Im(z̄ ż) has degree 9, which
// 5-node Gauss–Legendre quadrature integrates exactly: gonum quad.Fixed is
// the reference). The Taylor rule (ctTaylor) is exact only to degree 3 and
// must show an error on the same tracks, or the test would not tell the two
// apart.
func TestSegmentQuintic(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 5))
	cplx := func() complex128 { return complex(rng.NormFloat64(), rng.NormFloat64()) }
	for trial := 0; trial < 200; trial++ {
		var c [6]complex128
		for k := range c {
			c[k] = cplx() / complex(float64(k+1), 0)
		}
		f := func(th float64) (z, dz, d2z complex128) {
			x := complex(th, 0)
			for k := 5; k >= 0; k-- {
				z = z*x + c[k]
			}
			for k := 5; k >= 1; k-- {
				dz = dz*x + c[k]*complex(float64(k), 0)
			}
			for k := 5; k >= 2; k-- {
				d2z = d2z*x + c[k]*complex(float64(k*(k-1)), 0)
			}
			return z, dz, d2z
		}
		tha := rng.Float64() - 0.5
		h := 0.05 + rng.Float64()
		a, b := branchPair(f, tha, tha+h)
		ex := segmentExact(f, tha, tha+h, 5)
		seg, _ := ctSegment(a.r.z[0], b.r.z[0], a.dz[0], b.dz[0], a.d2z[0], b.d2z[0], a.pc[0], b.pc[0], h)
		tay, _, _ := ctTaylor(a.r.z[0], b.r.z[0], a.dz[0], b.dz[0], a.d2z[0], b.d2z[0], a.pc[0], b.pc[0], h)
		scale := 0.0 // size of the terms, for round-off
		for _, z := range []complex128{a.r.z[0], b.r.z[0]} {
			scale = max(scale, fsAbs2(z))
		}
		if d := math.Abs(seg - ex); d > 1e-13*scale {
			t.Errorf("trial %d (h = %.3g): quintic Hermite area %.16g, exact %.16g (diff %.2g)", trial, h, seg, ex, d)
		}
		if h > 0.5 && math.Abs(tay-ex) < 1e-9*scale {
			t.Errorf("trial %d (h = %.3g): the Taylor rule is exact too (%.3g): the test cannot tell the rules apart", trial, h, math.Abs(tay-ex))
		}
	}
}

// TestSegmentOrder: on a smooth track that is no polynomial the error of
// ctSegment must fall as h⁷ per segment (the first term the quintic cannot
// follow), measured by halving h, and stay within its estimate; reference
// areas by 20-node Gauss–Legendre quadrature (gonum quad.Fixed).
func TestSegmentOrder(t *testing.T) {
	// An elongated, rotating loop: the shape of an arc image of a disk.
	f := func(th float64) (z, dz, d2z complex128) {
		e := complex(math.Cos(th), math.Sin(th))
		w := complex(0.3*math.Cos(2*th), 0)
		dw := complex(-0.6*math.Sin(2*th), 0)
		d2w := complex(-1.2*math.Cos(2*th), 0)
		i := complex(0, 1)
		z = e * (1 + w)
		dz = e * (i*(1+w) + dw)
		d2z = e * (-(1 + w) + 2*i*dw + d2w)
		return z, dz, d2z
	}
	const tha = 0.3
	var prev float64
	for k, h := range []float64{0.4, 0.2, 0.1, 0.05} {
		a, b := branchPair(f, tha, tha+h)
		seg, est := ctSegment(a.r.z[0], b.r.z[0], a.dz[0], b.dz[0], a.d2z[0], b.d2z[0], a.pc[0], b.pc[0], h)
		d := math.Abs(seg - segmentExact(f, tha, tha+h, 20))
		t.Logf("h = %-5g error %.3g, estimate %.3g", h, d, est)
		if d > est {
			t.Errorf("h = %g: error %.3g beyond the estimate %.3g", h, d, est)
		}
		if k > 0 {
			if order := math.Log2(prev / d); order < 6.5 {
				t.Errorf("h = %g: error fell as h^%.2f, want h^7", h, order)
			}
		}
		prev = d
	}
}
