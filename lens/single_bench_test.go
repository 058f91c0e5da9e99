package lens

import "testing"

// sinkSingle keeps results alive so the compiler cannot drop the calls.
var sinkSingle float64

// Regimes: points over one decade of u/ρ so that branch prediction sees a
// realistic mix; ρ = 0.01.
func benchSingle(b *testing.B, f func(u float64) float64, z0, z1 float64) {
	const rho = 0.01
	const n = 64
	var us [n]float64
	for i := range us {
		us[i] = rho * (z0 + (z1-z0)*float64(i)/n)
	}
	b.ReportAllocs()
	var s float64
	for i := 0; b.Loop(); i++ {
		s += f(us[i%n])
	}
	sinkSingle = s
}

func BenchmarkPointMag(b *testing.B) {
	benchSingle(b, PointMag, 0.1, 100)
}

func BenchmarkDiskMag(b *testing.B) {
	b.Run("near/u<3rho", func(b *testing.B) { benchSingle(b, func(u float64) float64 { return DiskMag(u, 0.01) }, 0, 3) })
	b.Run("mid/u=3-30rho", func(b *testing.B) { benchSingle(b, func(u float64) float64 { return DiskMag(u, 0.01) }, 3, 30) })
	b.Run("far/series", func(b *testing.B) { benchSingle(b, func(u float64) float64 { return DiskMag(u, 0.01) }, 300, 3000) })
	// Baseline: the brute-force 2-D Gauss–Legendre quadrature of the tests at
	// 64×64 nodes (agreement ≈ 1e-6 with DiskMag).
	b.Run("baseline-2D-quadrature", func(b *testing.B) {
		benchSingle(b, func(u float64) float64 { return bruteDisk(u, 0.01, 0, 64) }, 0, 3)
	})
}

func BenchmarkLimbDiskMag(b *testing.B) {
	b.Run("near/u<3rho", func(b *testing.B) {
		benchSingle(b, func(u float64) float64 { return LimbDiskMag(u, 0.01, 0.6) }, 0, 3)
	})
	b.Run("baseline-2D-quadrature", func(b *testing.B) {
		benchSingle(b, func(u float64) float64 { return bruteDisk(u, 0.01, 0.5, 64) }, 0, 3)
	})
}

func BenchmarkSingleMag(b *testing.B) {
	for _, c := range []struct {
		name   string
		ld     float64
		z0, z1 float64
	}{
		{"uniform/near-u<2rho", 0, 0, 2},
		{"uniform/series-u=2-10rho", 0, 2, 10},
		{"uniform/point-u>30rho", 0, 30, 300},
		{"ld0.6/near-u<2rho", 0.6, 0, 2},
		{"ld0.6/series-u=2-10rho", 0.6, 2, 10},
		{"ld0.6/point-u>30rho", 0.6, 30, 300},
	} {
		b.Run(c.name, func(b *testing.B) {
			benchSingle(b, func(u float64) float64 { return SingleMag(u, 0.01, c.ld, 1e-3) }, c.z0, c.z1)
		})
	}
	b.Run("ld0.6/near-u<2rho/tol1e-6", func(b *testing.B) {
		benchSingle(b, func(u float64) float64 { return SingleMag(u, 0.01, 0.6, 1e-6) }, 0, 2)
	})
}
