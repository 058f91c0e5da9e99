package lens

import (
	"math"
	"testing"
)

// TestMagMapPixels checks the layout (row-major, row 0 at Y0, pixel centres)
// against independent per-pixel solves, also for a mirrored rectangle, on a
// map that crosses the caustics.
func TestMagMapPixels(t *testing.T) {
	b := Binary{S: 1.1, Q: 0.01}
	for _, r := range []Rect{{-0.3, -0.2, 0.5, 0.25}, {0.5, 0.25, -0.3, -0.2}} {
		const nx, ny = 37, 23
		dst := make([]float32, nx*ny)
		if err := MagMap(dst, b, r, nx, ny); err != nil {
			t.Fatal(err)
		}
		for j := 0; j < ny; j++ {
			for i := 0; i < nx; i++ {
				x := r.X0 + (float64(i)+0.5)*(r.X1-r.X0)/nx
				y := r.Y0 + (float64(j)+0.5)*(r.Y1-r.Y0)/ny
				want, err := NewSolver(b).Mag(complex(x, y))
				if err != nil {
					t.Fatal(err)
				}
				if got := float64(dst[j*nx+i]); math.Abs(got-want) > 1e-6*want {
					t.Fatalf("rect %v pixel (%d,%d): %v, want %v", r, i, j, got, want)
				}
			}
		}
	}
}

func TestMagMapErrors(t *testing.T) {
	b := Binary{S: 1, Q: 1}
	if err := MagMap(nil, b, Rect{0, 0, 1, 1}, 0, 0); err != nil {
		t.Errorf("empty map: %v", err)
	}
	if err := MagMap(make([]float32, 4), b, Rect{0, math.NaN(), 1, 1}, 2, 2); err == nil {
		t.Error("NaN rectangle accepted")
	}
	if err := MagMap(make([]float32, 4), b, Rect{0, 0, 1, 1}, -2, -2); err == nil {
		t.Error("negative size accepted")
	}
	defer func() {
		if recover() == nil {
			t.Error("wrong dst length did not panic")
		}
	}()
	MagMap(make([]float32, 3), b, Rect{0, 0, 1, 1}, 2, 2)
}

func BenchmarkMagMap512(b *testing.B) {
	bl, _ := NewBinary(1.1, 1e-3)
	dst := make([]float32, 512*512)
	r := Rect{-0.6, -0.6, 0.6, 0.6}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if err := MagMap(dst, bl, r, 512, 512); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkMagMap512Cold is the simple baseline of BenchmarkMagMap512: the
// same pixels, one goroutine, every pixel solved from a cold start.
func BenchmarkMagMap512Cold(b *testing.B) {
	bl, _ := NewBinary(1.1, 1e-3)
	dst := make([]float32, 512*512)
	sv := NewSolver(bl)
	b.ReportAllocs()
	b.ResetTimer()
	for it := 0; it < b.N; it++ {
		for j := 0; j < 512; j++ {
			for i := 0; i < 512; i++ {
				sv.Reset()
				a, err := sv.Mag(complex(-0.6+(float64(i)+0.5)*1.2/512, -0.6+(float64(j)+0.5)*1.2/512))
				if err != nil {
					b.Fatal(err)
				}
				dst[j*512+i] = float32(a)
			}
		}
	}
}
