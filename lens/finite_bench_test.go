package lens

import (
	"math"
	"math/cmplx"
	"math/rand/v2"
	"os"
	"sort"
	"testing"
	"time"
)

// nearCausticPoints draws n source positions within 2ρ of a fold or cusp of
// the caustics of b (seeded).
func nearCausticPoints(b Binary, rho float64, n int, seed uint64) []complex128 {
	rng := rand.New(rand.NewPCG(seed, 11))
	const m = 720
	crit, caus := fsCriticalPoints(b, m)
	cs := fsCusps(crit, caus, m)
	pts := make([]complex128, n)
	for i := range pts {
		c := caus[rng.IntN(len(caus))]
		if i%4 == 3 {
			c = cs[rng.IntN(len(cs))]
		}
		pts[i] = c + cmplx.Rect(2*rho*rng.Float64(), 2*math.Pi*rng.Float64())
	}
	return pts
}

var benchSink float64

// BenchmarkFiniteNearCaustic: ρ = 1e-3, sources within 2ρ of a fold or cusp of
// a planetary (s = 1.2, q = 1e-3) and an equal-mass (s = 1, q = 1) lens, tol
// 1e-3. Reports the median time per point beside the mean.
func BenchmarkFiniteNearCaustic(b *testing.B) {
	for _, c := range []struct {
		name string
		bin  Binary
	}{{"planet", Binary{1.2, 1e-3}}, {"equal", Binary{1, 1}}} {
		pts := nearCausticPoints(c.bin, 1e-3, 256, 5)
		b.Run(c.name+"/finite", func(b *testing.B) {
			s := NewSolver(c.bin)
			per := make([]float64, 0, b.N)
			var ns []float64
			b.ReportAllocs()
			for i := 0; b.Loop(); i++ {
				t0 := time.Now()
				f, err := s.FiniteMag(pts[i%len(pts)], 1e-3, 0, 1e-3)
				per = append(per, float64(time.Since(t0).Nanoseconds()))
				if err != nil {
					b.Fatal(err)
				}
				benchSink += f.Mag
				ns = append(ns, float64(f.Samples))
			}
			sort.Float64s(per)
			sort.Float64s(ns)
			b.ReportMetric(per[len(per)/2]/1e3, "median-µs/pt")
			b.ReportMetric(ns[len(ns)/2], "median-samples")
		})
		b.Run(c.name+"/bruteforce", func(b *testing.B) {
			s := NewSolver(c.bin)
			mag := func(z complex128) float64 { a, _ := s.Mag(z); return a }
			for i := 0; b.Loop(); i++ {
				benchSink += gridDisk(mag, pts[i%len(pts)], 1e-3, 0, bruteBenchN)
			}
		})
	}
}

// bruteBenchN is the brute-force grid size of the benchmark baseline; see
// TestBenchAccuracy for its accuracy against the converged reference.
const bruteBenchN = 48

// TestBenchAccuracy measures, on the benchmark's points, the median and
// worst relative error of FiniteMag (tol 1e-3) and of the baseline grid of
// size bruteBenchN against the converged brute-force reference, so that the
// speed ratio of the benchmark is read at known accuracies.
func TestBenchAccuracy(t *testing.T) {
	if os.Getenv("LENSBOOK_FINITE_REF") == "" {
		t.Skip("brute-force reference is slow: set LENSBOOK_FINITE_REF")
	}
	for _, bin := range []Binary{{1.2, 1e-3}, {1, 1}} {
		pts := nearCausticPoints(bin, 1e-3, 256, 5)[:24]
		s := NewSolver(bin)
		mag := func(z complex128) float64 { a, _ := s.Mag(z); return a }
		var ef, eg []float64
		for _, p := range pts {
			ref := bruteBinaryDisk(t, s, p, 1e-3, 0, 1e-5)
			f, err := s.FiniteMag(p, 1e-3, 0, 1e-3)
			if err != nil {
				t.Fatal(err)
			}
			ef = append(ef, math.Abs(f.Mag/ref-1))
			eg = append(eg, math.Abs(gridDisk(mag, p, 1e-3, 0, bruteBenchN)/ref-1))
		}
		t.Logf("b = %v, %d points: FiniteMag median err %.2g max %.2g; grid n=%d median %.2g max %.2g",
			bin, len(ef), fsQuantile(ef, 0.5), fsQuantile(ef, 1), bruteBenchN, fsQuantile(eg, 0.5), fsQuantile(eg, 1))
	}
}

// planetaryEvent is a q = 1e-3, ρ = 1e-3 event whose trajectory crosses the
// caustic of s = 1.1 twice and passes a cusp (found by a seeded scan of
// trajectories against the sampled caustic), observed every 15 minutes for
// 104 days (9984 epochs).
func planetaryEvent() (*Model, []float64) {
	const s, q, rho = 1.1, 1e-3, 1e-3
	b := Binary{S: s, Q: q}
	crit, caus := fsCriticalPoints(b, 2000)
	cs := fsCusps(crit, caus, 2000)
	l := newFSLens(b)
	var r fsRoots
	m := &Model{Params: Params{T0: 2461000, TE: 20, Rho: rho, S: s, Q: q}}
	best := -1.0
	// Steep trajectories only (α from 45° up): a shallow one runs along the
	// elongated resonant caustic for days.
	for ia := 0; ia < 18; ia++ {
		alpha := math.Pi/4 + float64(ia)*math.Pi/72
		for iu := 0; iu < 40; iu++ {
			u0 := -0.2 + 0.01*float64(iu)
			// count caustic crossings (image-count changes) along τ ∈ [−2.6, 2.6]
			cross, prev := 0, -1
			sn, cn := math.Sincos(alpha)
			for k := 0; k <= 1300; k++ {
				tau := -2.6 + float64(k)*4e-3
				z := complex(tau*cn-u0*sn, tau*sn+u0*cn)
				if !l.solve(&r, z, nil) {
					continue
				}
				n := mpCount(&r)
				if prev >= 0 && n != prev {
					cross++
				}
				prev = n
			}
			if cross != 2 {
				continue
			}
			// closest approach to a cusp, in ρ
			dmin := math.Inf(1)
			for _, c := range cs {
				// distance from point c to the line
				d := math.Abs(-real(c)*sn+imag(c)*cn-u0) / rho
				dmin = math.Min(dmin, d)
			}
			if dmin > 2 && dmin < 10 && best < 0 {
				best = dmin
				m.Alpha, m.U0 = alpha, u0
			}
		}
	}
	times := make([]float64, 9984)
	for i := range times {
		times[i] = m.T0 - 52 + float64(i)/96
	}
	return m, times
}

// BenchmarkLightCurvePlanetary: the 10,000-point light curve of
// planetaryEvent through Evaluator.LightCurve at tol 1e-3, the same with
// orbital motion (ds/dt), and the point-source light curve of the same
// trajectory (ρ = 0) in the same run. The finite-source curves start from an
// empty cache of caustic maps, so the one map of the static curve (~1 ms) is
// counted as well.
func BenchmarkLightCurvePlanetary(b *testing.B) {
	m, times := planetaryEvent()
	dst := make([]float64, len(times))
	b.Run("finite", func(b *testing.B) {
		var e Evaluator
		for b.Loop() {
			clearCausticCache() // as in orbit below
			e.ResetCounts()
			if err := e.LightCurve(dst, m, times, nil); err != nil {
				b.Fatal(err)
			}
		}
		for k, n := range e.Counts {
			b.ReportMetric(float64(n), Method(k).String()+"-pts")
		}
	})
	b.Run("orbit", func(b *testing.B) {
		// The same event with orbital motion, ds/dt = 0.1 per year (s changes
		// by 0.028 over the 104 days, every epoch has its own s): the caustic
		// map of the method switch must not be rebuilt per epoch.
		// The cache of caustic maps is emptied before every curve, as for a
		// fit step that changes s or q: the builds are counted in full.
		mo := *m
		mo.DsDt = 0.1
		var e Evaluator
		n0 := causticBuilds.Load()
		for b.Loop() {
			clearCausticCache()
			e.ResetCounts()
			if err := e.LightCurve(dst, &mo, times, nil); err != nil {
				b.Fatal(err)
			}
		}
		for k, n := range e.Counts {
			b.ReportMetric(float64(n), Method(k).String()+"-pts")
		}
		b.ReportMetric(float64(causticBuilds.Load()-n0)/float64(b.N), "caustic-builds/op")
	})
	b.Run("pointsource", func(b *testing.B) {
		mp := *m
		mp.Rho = 0
		var e Evaluator
		for b.Loop() {
			if err := e.LightCurve(dst, &mp, times, nil); err != nil {
				b.Fatal(err)
			}
		}
	})
}

// clearCausticCache empties the cache of caustic maps (benchmarks).
func clearCausticCache() {
	causticCache.Lock()
	causticCache.maps = [len(causticCache.maps)]*causticMap{}
	causticCache.Unlock()
}

// TestBruteForceMatched compares FiniteMag (tol 1e-3) with brute force at
// equal accuracy on the points of BenchmarkImagePlane: the true errors
// against the converged reference (imagePlaneMag to finiteRefAcc) and the
// time per point of the source-plane polar grid (gridDisk, n × 2n points,
// doubling n) and of one image-plane quadtree walk at a range of η, so that
// the speed ratios can be read where a brute force's median error matches
// FiniteMag's. Slow (the converged reference and the large grids): set
// LENSBOOK_FINITE_REF.
func TestBruteForceMatched(t *testing.T) {
	if os.Getenv("LENSBOOK_FINITE_REF") == "" {
		t.Skip("brute-force reference is slow: set LENSBOOK_FINITE_REF")
	}
	bin := Binary{S: 1.2, Q: 1e-3}
	pts := nearCausticPoints(bin, 1e-3, 64, 5)
	ref := make([]float64, len(pts))
	for i, p := range pts {
		ref[i], _, _ = imagePlaneMag(binaryMasses(bin), p, 1e-3, 0, finiteRefAcc)
	}
	s := NewSolver(bin)
	var ef []float64
	t0 := time.Now()
	const reps = 20
	for k := 0; k < reps; k++ {
		for i, p := range pts {
			f, err := s.FiniteMag(p, 1e-3, 0, 1e-3)
			if err != nil {
				t.Fatal(err)
			}
			if k == 0 {
				ef = append(ef, math.Abs(f.Mag/ref[i]-1))
			}
		}
	}
	tf := time.Since(t0).Seconds() / float64(reps*len(pts))
	t.Logf("FiniteMag tol 1e-3: %.1f µs/point, true error median %.2g, max %.2g", tf*1e6, fsQuantile(ef, 0.5), fsQuantile(ef, 1))
	mag := func(z complex128) float64 { a, _ := s.Mag(z); return a }
	for _, n := range []int{48, 96, 192, 384} {
		var eg []float64
		t0 := time.Now()
		for i, p := range pts {
			eg = append(eg, math.Abs(gridDisk(mag, p, 1e-3, 0, n)/ref[i]-1))
		}
		tg := time.Since(t0).Seconds() / float64(len(pts))
		t.Logf("polar grid n = %-4d: %8.1f µs/point (%.0f× FiniteMag), true error median %.2g, max %.2g",
			n, tg*1e6, tg/tf, fsQuantile(eg, 0.5), fsQuantile(eg, 1))
	}
	for _, eta := range []float64{1e-3, 3e-3, 1e-2, 3e-2, 0.1} {
		var ew []float64
		t0 := time.Now()
		for i, p := range pts {
			w := ipWalk{lens: binaryMasses(bin), zeta: p, rho: 1e-3, eta: eta}
			ew = append(ew, math.Abs(w.run().Mag/ref[i]-1))
		}
		tw := time.Since(t0).Seconds() / float64(len(pts))
		t.Logf("walk η = %-5g: %8.1f µs/point (%.0f× FiniteMag), true error median %.2g, max %.2g",
			eta, tw*1e6, tw/tf, fsQuantile(ew, 0.5), fsQuantile(ew, 1))
	}
}
