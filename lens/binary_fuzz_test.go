package lens

import (
	"errors"
	"math"
	"strings"
	"testing"
)

// FuzzBinaryMag: NewBinary must refuse invalid s, q with a lens: error and
// accept the rest; for accepted lenses Solver.Mag must not panic and must
// return a finite magnification ≥ 1 or an error (ErrImages is allowed only
// outside the supported range q ∈ [1e-7, 1e7], s ∈ [0.05, 20], |ζ| ≤ 100, or
// within float64 round-off of a caustic, where the count is undefined; see
// Solver). MagMap must never write NaN or Inf.
func FuzzBinaryMag(f *testing.F) {
	for _, c := range binaryRef {
		f.Add(c.s, c.q, real(c.zeta), imag(c.zeta))
	}
	f.Add(0.0, 1.0, 0.0, 0.0)
	f.Add(1.0, -1.0, 0.0, 0.0)
	f.Add(math.NaN(), 1.0, 0.0, 0.0)
	f.Add(1.0, math.Inf(1), 0.0, 0.0)
	f.Add(20.0, 1e-7, 19.9, 0.0)
	f.Add(0.05, 1e-7, 0.0, 1e-9)
	f.Add(1.0, 1.0, math.NaN(), 0.0)
	f.Fuzz(func(t *testing.T, s, q, x, y float64) {
		b, err := NewBinary(s, q)
		valid := s > 0 && q > 0 && !math.IsInf(s, 0) && !math.IsInf(q, 0)
		if !valid {
			if err == nil || !strings.HasPrefix(err.Error(), "lens: ") {
				t.Fatalf("NewBinary(%v, %v) accepted or unclear error: %v", s, q, err)
			}
			return
		}
		if err != nil {
			t.Fatalf("NewBinary(%v, %v): %v", s, q, err)
		}
		sv := NewSolver(b)
		zeta := complex(x, y)
		a, err := sv.Mag(zeta)
		finiteZ := !math.IsNaN(x) && !math.IsNaN(y) && !math.IsInf(x, 0) && !math.IsInf(y, 0)
		if !finiteZ {
			if err == nil {
				t.Fatalf("Mag(%v) accepted a non-finite source", zeta)
			}
			return
		}
		if err != nil {
			inRange := q >= 1e-7 && q <= 1e7 && s >= 0.05 && s <= 20 && math.Abs(x) <= 100 && math.Abs(y) <= 100
			if !errors.Is(err, ErrImages) || (inRange && !nearCausticRoundOff(b, zeta)) {
				t.Fatalf("s=%v q=%v ζ=%v: %v", s, q, zeta, err)
			}
			return
		}
		if math.IsNaN(a) || math.IsInf(a, 0) || a < 1-1e-9 {
			t.Fatalf("s=%v q=%v ζ=%v: A = %v", s, q, zeta, a)
		}
		var dst [4]float32
		if err := MagMap(dst[:], b, Rect{x - 0.01, y - 0.01, x + 0.01, y + 0.01}, 2, 2); err == nil {
			for _, v := range dst {
				if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
					t.Fatalf("MagMap wrote %v", v)
				}
			}
		}
	})
}

// nearCausticRoundOff reports whether zeta is so close to a caustic that the
// image count is undefined in float64: some image of a nearby point has
// |μ| > 1e8.
func nearCausticRoundOff(b Binary, zeta complex128) bool {
	sv := NewSolver(b)
	for _, d := range []complex128{1e-7, -1e-7, 1e-7i, -1e-7i} {
		imgs, err := sv.Images(nil, zeta+d)
		if err != nil {
			return true
		}
		for _, im := range imgs {
			if math.Abs(im.Mag) > 1e8 {
				return true
			}
		}
	}
	return false
}
