package lens

import (
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"
)

// references.md §7 [G08]: s = 2, q = 1e-3, ρ = 0.002, uniform source; exact A
// from Gauss–Legendre × trapezoid disk integration there (converged to ≤ 2e-7
// for the fold cases, ≤ 6e-4 only for the 1.5ρ cusp case not used here).
// Points are host-centred; the host sits at x = −0.001998002 in our frame.
func TestReferenceSection7(t *testing.T) {
	b := Binary{S: 2, Q: 1e-3}
	host := -0.001998002
	cases := []struct {
		name       string
		x, y, want float64
	}{
		{"outside fold 2ρ", 1.490559, 0.007464, 1.650913967},
		{"inside fold 2ρ", 1.494990, 0.000803, 4.904472068},
		{"cusp axis 3ρ", 1.475639, 0, 4.367879077},
	}
	s := NewSolver(b)
	for _, c := range cases {
		z := complex(c.x+host, c.y)
		for _, tol := range []float64{1e-3, 1e-4} {
			f, err := s.FiniteMag(z, 0.002, 0, tol)
			if err != nil {
				t.Fatal(err)
			}
			if e := math.Abs(f.Mag/c.want - 1); e > tol {
				t.Errorf("%s tol %g: %v A = %.9f, want %.9f (rel err %.2g)", c.name, tol, f.Method, f.Mag, c.want, e)
			}
		}
		// Forced contour at a tight tolerance: the reference digits
		// (the 6-digit rounding of the positions limits agreement to ~1e-5).
		var w finiteWork
		l := newFSLens(b)
		f, ok := w.uniform(&l, z, 0.002, 1e-5, nil)
		if !ok || math.Abs(f.Mag/c.want-1) > 2e-5 {
			t.Errorf("%s contour: A = %.9f, want %.9f", c.name, f.Mag, c.want)
		}
	}
	// [G08] excludes the cusp axis: the switch must not use an expansion there.
	f, _ := s.FiniteMag(complex(1.475639+host, 0), 0.002, 0, 1e-3)
	if f.Method != Contour {
		t.Errorf("cusp axis 3ρ: method %v, want contour", f.Method)
	}
}

// Single-lens limit: a far, very light companion (s = 30, q = 1e-9: its shear
// on the host, γ = q/s² ≈ 1e-12, changes A by ~γ/u ≤ 1e-8 at u ≥ 1e-4) must give the uniform and limb-darkened
// disk values of references.md §2b and §2c [WM94] (Γ = 0.5 ⇔ u = 0.6).
func TestSingleLensLimit(t *testing.T) {
	b := Binary{S: 30, Q: 1e-9}
	host := -1e-9 * 30 / (1 + 1e-9)
	s := NewSolver(b)
	tols := []float64{1e-3, 1e-4}
	if testing.Short() {
		tols = tols[:1]
	}
	for _, tol := range tols {
		for _, c := range diskTable { // references.md §2b, §2c (single_test.go)
			rho, row := c.rho, c.a
			for i, zr := range diskZ {
				if zr == 1 {
					// The source limb exactly over the host, 30 θE from the
					// lighter lens at the origin of the contour's frame:
					// there the source position has ~7e-15 of round-off,
					// the images sweep around the host's ring where the limb
					// passes and the area terms, measured from 30 θE away,
					// cancel to 1e-7 of themselves, so the contour returns a
					// huge error estimate (known limitation; the host's own
					// frame cannot resolve the companion's image instead).
					// TestLimbNearLens covers edges through a lens at s = 1.2;
					// u/ρ = 0.9 and 1.1 bracket this one.
					continue
				}
				if zr == 0 {
					zr = 1e-3 // the source exactly on the host is a degenerate polynomial; 1e-3ρ off changes A by < 1e-6ρ²
				}
				z := complex(host, 0) + cmplx.Rect(zr*rho, 0.7)
				f, err := s.FiniteMag(z, rho, 0, tol)
				if err != nil {
					t.Fatal(err)
				}
				if e := math.Abs(f.Mag/row[i] - 1); e > tol {
					t.Errorf("uniform ρ=%g u/ρ=%g tol %g: %v %.10g want %.10g (rel %.2g)", rho, diskZ[i], tol, f.Method, f.Mag, row[i], e)
				}
				g, err := s.FiniteMag(z, rho, 0.6, tol)
				if err != nil {
					t.Fatal(err)
				}
				if e := math.Abs(g.Mag/c.aLD[i] - 1); e > tol {
					t.Errorf("LD ρ=%g u/ρ=%g tol %g: %v %.10g want %.10g (rel %.2g)", rho, diskZ[i], tol, g.Method, g.Mag, c.aLD[i], e)
				}
			}
		}
	}
}

// The analytic image derivatives of imgDeriv against central differences of
// the point-source magnification (independent: only the lens equation).
func TestImageDerivatives(t *testing.T) {
	b := Binary{S: 1.2, Q: 0.01}
	l := newFSLens(b)
	var r fsRoots
	for _, zeta := range []complex128{0.3 + 0.2i, -0.1 + 0.05i, 0.6 - 0.4i, 1.5 + 0.7i} {
		if !l.solve(&r, zeta, nil) {
			t.Fatal("solve")
		}
		// Sum over images of ∇²|μ| (= 4·lap) and the 5-point Laplacian.
		lap := 0.0
		for k := 0; k < r.n; k++ {
			if r.isImg(k) {
				_, lp, _ := l.imgDeriv(r.z[k])
				lap += 4 * lp
			}
		}
		h := 1e-4
		m := func(z complex128) float64 {
			var q fsRoots
			l.solve(&q, z, &r.z)
			return q.mag()
		}
		fd := (m(zeta+complex(h, 0)) + m(zeta-complex(h, 0)) + m(zeta+complex(0, h)) + m(zeta-complex(0, h)) - 4*m(zeta)) / (h * h)
		if math.Abs(fd-lap) > 1e-4*math.Abs(lap)+1e-6 {
			t.Errorf("ζ = %v: analytic ∇²A = %.8g, finite differences %.8g", zeta, lap, fd)
		}
	}
}

// TestCausticDistance checks the sampled caustic distance of the method
// switch against the distance to a 14× denser sampling of the caustic (the
// critical-curve quartic of finite_ref_test.go), at random points around the
// caustics of several lenses: it must not overestimate the distance by more
// than 1% of it plus 1e-6 θE.
func TestCausticDistance(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	worst := 0.0
	for _, b := range []Binary{{2, 1e-3}, {1, 1}, {0.5, 1e-3}, {1.2, 0.3}, {2.5, 1e-5}, {0.9, 1e-5}} {
		_, dense := fsCriticalPoints(b, 7200)
		var c causticMap
		for i := 0; i < 200; i++ {
			zeta := dense[rng.IntN(len(dense))] + cmplx.Rect(0.01*rng.Float64()*rng.Float64(), 2*math.Pi*rng.Float64())
			truth := math.Inf(1)
			for _, p := range dense {
				truth = math.Min(truth, fsAbs(p-zeta))
			}
			got := c.distance(b, zeta, 1)
			if r := (got - truth) / (truth + 1e-6); r > worst {
				worst = r
			}
			if got > 1.01*truth+1e-6 {
				t.Errorf("b = %v ζ = %v: caustic distance %.4g, dense sampling %.4g", b, zeta, got, truth)
			}
		}
	}
	t.Logf("worst relative overestimate %.3g", worst)
}

// TestSwitchWithinTolerance: wherever FiniteMag picks an approximation (point
// source, quadrupole, hexadecapole) at tol 1e-3, its value must be within tol
// of the contour integration run at tol 1e-5 (checked against the exact values
// of references.md §2b/§2c/§7 by the tests above). Points are drawn between 0
// and 20ρ from the caustics of a grid of lenses (seeded).
func TestSwitchWithinTolerance(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	var n [Contour + 1]int
	var worst [Contour + 1]float64
	for _, rho := range []float64{1e-4, 1e-3, 1e-2} {
		for _, q := range []float64{1e-5, 1e-3, 0.3, 1} {
			for _, sep := range []float64{0.5, 0.9, 1.2, 2.5} {
				b := Binary{S: sep, Q: q}
				_, caus := fsCriticalPoints(b, 360)
				s := NewSolver(b)
				l := newFSLens(b)
				for i := 0; i < 12; i++ {
					z := caus[rng.IntN(len(caus))] + cmplx.Rect(20*rho*rng.Float64(), 2*math.Pi*rng.Float64())
					for _, ld := range []float64{0, 0.6} {
						f, err := s.FiniteMag(z, rho, ld, 1e-3)
						if err != nil {
							t.Fatal(err)
						}
						n[f.Method]++
						if f.Method == Contour {
							continue
						}
						var w finiteWork
						var ref Finite
						if ld == 0 {
							ref, _ = w.uniform(&l, z, rho, 1e-5, nil)
						} else {
							ref, _ = w.annuli(&l, z, rho, GammaFromLD(ld), 1e-5, nil)
						}
						e := math.Abs(f.Mag/ref.Mag - 1)
						worst[f.Method] = math.Max(worst[f.Method], e)
						if e > 1e-3 {
							t.Errorf("s=%g q=%g ρ=%g u=%g ζ=%v: %v %.8g, contour %.8g (rel %.2g)", sep, q, rho, ld, z, f.Method, f.Mag, ref.Mag, e)
						}
					}
				}
			}
		}
	}
	for m := PointSource; m <= Contour; m++ {
		t.Logf("%-13v %4d points, worst rel err vs contour %.2g", m, n[m], worst[m])
	}
}

// TestNearCausticConvergence: on the benchmark's points (ρ = 1e-3 within 2ρ
// of a fold or cusp), FiniteMag at tol 1e-3 against the contour at tol 1e-6
// (self-convergence; the contour itself is checked against exact values above).
// It also logs the ratio of FiniteMag's error estimate to its true error and,
// split into disks near the primary (its central caustic, within 0.05 θE) and
// the rest, the boundary samples and that ratio: the estimate must never be
// below the true error.
func TestNearCausticConvergence(t *testing.T) {
	for _, bin := range []Binary{{1.2, 1e-3}, {1, 1}} {
		pts := nearCausticPoints(bin, 1e-3, 256, 5)
		if testing.Short() {
			pts = pts[:64]
		}
		s := NewSolver(bin)
		l := newFSLens(bin)
		z1, _, _, _ := bin.Lenses()
		var errs, ratio []float64
		var group [2]struct{ samples, ratio []float64 }
		nOut := 0
		for _, p := range pts {
			f, err := s.FiniteMag(p, 1e-3, 0, 1e-3)
			if err != nil {
				t.Fatal(err)
			}
			var w finiteWork
			ref, _ := w.uniform(&l, p, 1e-3, 1e-6, nil)
			e := math.Abs(f.Mag/ref.Mag - 1)
			errs = append(errs, e)
			if e > 1e-3 {
				nOut++
			}
			if e > 3e-3 {
				t.Errorf("b = %v ζ = %v: %v %.8g vs %.8g (rel %.2g)", bin, p, f.Method, f.Mag, ref.Mag, e)
			}
			if d := math.Abs(f.Mag - ref.Mag); d > f.Err+ref.Err {
				t.Errorf("b = %v ζ = %v: true error %.3g above the estimate %.3g", bin, p, d, f.Err)
			}
			r := f.Err / math.Max(math.Abs(f.Mag-ref.Mag), ref.Err)
			ratio = append(ratio, r)
			g := 1
			if cmplx.Abs(p-complex(z1, 0)) < 0.05 {
				g = 0
			}
			group[g].samples = append(group[g].samples, float64(f.Samples))
			group[g].ratio = append(group[g].ratio, r)
		}
		t.Logf("b = %v: %d points, median err %.2g, max %.2g, %d beyond tol; estimate/true error smallest %.2g, median %.2g",
			bin, len(pts), fsQuantile(errs, 0.5), fsQuantile(errs, 1), nOut, fsQuantile(ratio, 0), fsQuantile(ratio, 0.5))
		for g, name := range []string{"near the primary", "elsewhere"} {
			if n := len(group[g].samples); n > 0 {
				t.Logf("  %-16s %3d points: median %.0f boundary samples, estimate/true error median %.2g",
					name, n, fsQuantile(group[g].samples, 0.5), fsQuantile(group[g].ratio, 0.5))
			}
		}
		if float64(nOut) > 0.005*float64(len(pts)) {
			t.Errorf("%d of %d points beyond tol", nOut, len(pts))
		}
	}
}

// TestContourTightTolerance: contours of the same disk asked for 1e-6 and
// 1e-10 must agree within the sum of their error estimates, on near-caustic
// points (ρ = 1e-3 within 2ρ of a fold or cusp) of three lenses. Before the
// branch-point rules a disk next to a cusp of the equal-mass lens at
// ζ = 0.04425 + 0.59298i, asked for 1e-9, ran to the sample cap with 257,504
// frozen intervals and returned a value 3 % off with an estimate of 4e-6.
func TestContourTightTolerance(t *testing.T) {
	type pt struct {
		b Binary
		z complex128
	}
	pts := []pt{{Binary{1, 1}, complex(0.04424600420610139, 0.5929754870379375)}}
	for _, b := range []Binary{{1.2, 1e-3}, {1, 1}, {0.8, 0.1}} {
		n := 256
		if testing.Short() {
			n = 64
		}
		for _, z := range nearCausticPoints(b, 1e-3, n, 7) {
			pts = append(pts, pt{b, z})
		}
	}
	var c1, c2 contour
	c2.maxSamples = 100000
	bad, maxn := 0, 0
	for _, p := range pts {
		l := newFSLens(p.b)
		a1, e1, ok1 := c1.disk(&l, p.z, 1e-3, 1e-6, nil)
		a2, e2, ok2 := c2.disk(&l, p.z, 1e-3, 1e-10, nil)
		if !ok1 || !ok2 {
			t.Fatalf("%v ζ = %v: root solve failed", p.b, p.z)
		}
		maxn = max(maxn, len(c2.s))
		if math.Abs(a1-a2) > e1+e2 || e2 > 1e-10*math.Abs(a2) {
			bad++
			t.Errorf("%v ζ = %v: tol 1e-6 %.12g ± %.2g, tol 1e-10 %.12g ± %.2g (%d samples)", p.b, p.z, a1, e1, a2, e2, len(c2.s))
		}
	}
	t.Logf("%d disks: %d disagree; at most %d boundary samples at tol 1e-10", len(pts), bad, maxn)
}
