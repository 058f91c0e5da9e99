package lens

import (
	"math"
	"testing"
)

// TestExtremeSourceSizes: FiniteMag at tol 1e-3 for the largest and the
// smallest sources the trade meets, against the image-plane brute force
// (finite_imageplane_test.go, asked for 2e-5; itself checked against the
// exact disk values of references.md §2b/§2c and gonum quadrature by
// TestImagePlaneSingleLens and TestDiskPolyQuadrature): ρ = 1 and 0.5 centred on the
// lens axis and off it, disks that cover every caustic of the lens (the
// resonant caustic of equal masses, the central and planetary caustics of
// q = 1e-3 at s = 1.2 and of q = 0.1 at s = 0.8), and ρ = 1e-5 within 2ρ of
// a fold or cusp (nearCausticPoints), uniform and limb-darkened (u = 0.6).
// The true error must be within tol and within the returned estimate (plus
// the reference's own). Measured: worst 1.4e-4 relative (ρ = 1, u = 0.6).
func TestExtremeSourceSizes(t *testing.T) {
	const tol = 1e-3
	type pt struct {
		b   Binary
		z   complex128
		rho float64
	}
	var pts []pt
	for _, b := range []Binary{{1, 1}, {1.2, 1e-3}, {0.8, 0.1}} {
		for _, z := range []complex128{0, 0.3 + 0.2i, 0.9 - 0.4i} {
			pts = append(pts, pt{b, z, 1}, pt{b, z, 0.5})
		}
		for _, z := range nearCausticPoints(b, 1e-5, 4, 3) {
			pts = append(pts, pt{b, z, 1e-5})
		}
	}
	worst := 0.0
	for _, p := range pts {
		s := NewSolver(p.b)
		for _, ld := range []float64{0, 0.6} {
			if testing.Short() && ld > 0 && p.rho > 0.1 {
				continue // the limb-darkened brute force takes ~0.2 s per large disk
			}
			f, err := s.FiniteMag(p.z, p.rho, ld, tol)
			if err != nil {
				t.Fatalf("b = %v ρ = %g u = %g ζ = %v: %v", p.b, p.rho, ld, p.z, err)
			}
			ref, refErr, _ := imagePlaneMag(binaryMasses(p.b), p.z, p.rho, ld, finiteRefAcc)
			d := math.Abs(f.Mag - ref)
			worst = math.Max(worst, d/ref)
			if d > tol*ref+refErr || d > f.Err+refErr {
				t.Errorf("b = %v ρ = %g u = %g ζ = %v: %v %.8g ± %.2g, brute force %.8g ± %.2g (rel %.2g)",
					p.b, p.rho, ld, p.z, f.Method, f.Mag, f.Err, ref, refErr, d/ref)
			}
		}
	}
	t.Logf("%d disks, worst relative error %.2g", len(pts), worst)
}
