package lens

import (
	"math"
	"testing"
)

// benchTrajectory is a straight source path through the central and planetary
// caustic region of s = 1.1, q = 1e-3 (u0 = 0.01, α = 0.6 rad), τ ∈ [−1.5, 1.5].
func benchTrajectory(n int) []complex128 {
	zs := make([]complex128, n)
	sin, cos := math.Sincos(0.6)
	u0 := 0.01
	for i := range zs {
		tau := -1.5 + 3*float64(i)/float64(n-1)
		zs[i] = complex(tau*cos-u0*sin, tau*sin+u0*cos)
	}
	return zs
}

var sinkF float64

func BenchmarkBinaryMagWarm(b *testing.B) {
	bl, _ := NewBinary(1.1, 1e-3)
	sv := NewSolver(bl)
	zs := benchTrajectory(3000)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		a, err := sv.Mag(zs[i%len(zs)])
		if err != nil {
			b.Fatal(err)
		}
		sinkF += a
	}
}

func BenchmarkBinaryMagCold(b *testing.B) {
	bl, _ := NewBinary(1.1, 1e-3)
	sv := NewSolver(bl)
	zs := benchTrajectory(3000)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		sv.Reset()
		a, err := sv.Mag(zs[i%len(zs)])
		if err != nil {
			b.Fatal(err)
		}
		sinkF += a
	}
}

// BenchmarkBinaryMagEigenBaseline is the simple baseline of the two benchmarks
// above: the gonum companion-matrix eigen solver of binary_eigen_test.go (one
// frame, the lighter lens) with lens-equation polishing, on the same path.
func BenchmarkBinaryMagEigenBaseline(b *testing.B) {
	zs := benchTrajectory(3000)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		a := 0.0
		for _, im := range eigenImages(1.1, 1e-3, zs[i%len(zs)]) {
			a += math.Abs(im.Mag)
		}
		sinkF += a
	}
}
