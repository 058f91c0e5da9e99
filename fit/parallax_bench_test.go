package fit_test

import (
	"math"
	"math/rand/v2"
	"runtime"
	"testing"
	"time"

	"lensbook/fit"
	"lensbook/lens"
)

// benchParallaxEvent is a 2 × 10,000-point event at a bulge field with
// coordinates, spanning 400 days.
func benchParallaxEvent() *fit.Event {
	r := rand.New(rand.NewPCG(3, 5))
	ev := fit.NewEvent("bench")
	ev.Coords, ev.TRef = &fit.Coords{RA: 269.5, Dec: -29}, 2460800
	for k := 0; k < 2; k++ {
		d := &fit.Dataset{Name: "d", ZeroPoint: 28}
		for i := 0; i < 10000; i++ {
			t := 2460600 + 400*float64(i)/10000
			d.T = append(d.T, t)
			d.Flux = append(d.Flux, 1000+10*r.NormFloat64())
			d.Err = append(d.Err, 10)
		}
		ev.Datasets = append(ev.Datasets, d)
	}
	return ev
}

// BenchmarkChi2Parallax compares χ² with and without annual parallax on the
// same 20,000-point event (single lens and a planetary binary, point source).
// Each iteration evaluates the static model and then the parallax model,
// alternating, and the benchmark reports the ratio of their summed wall times
// and of their summed thread CPU times (the machine is shared; alternation
// exposes both to the same load). Offsets are cached after the first call,
// so the ratio is the cost of the shifted trajectory itself. Target ≤ 1.2.
// Thread CPU time is accounted in scheduler ticks, so for the ~0.5 ms
// single-lens call cpu-ratio is meaningless; read wall-ratio there.
func BenchmarkChi2Parallax(b *testing.B) {
	ev := benchParallaxEvent()
	for _, bc := range []struct {
		name string
		p    lens.Params
	}{
		{"single", lens.Params{T0: 2460800, U0: 0.2, TE: 90}},
		{"binary", lens.Params{T0: 2460800, U0: 0.2, TE: 90, S: 1.1, Q: 0.01, Alpha: 1}},
	} {
		b.Run(bc.name, func(b *testing.B) {
			runtime.LockOSThread()
			defer runtime.UnlockOSThread()
			ls, err := fit.NewLikelihood(ev)
			if err != nil {
				b.Fatal(err)
			}
			lp, _ := fit.NewLikelihood(ev)
			ps, pp := bc.p, bc.p
			pp.PiEN, pp.PiEE = 0.15, -0.05
			if _, err := lp.Chi2(&pp); err != nil { // computes and caches the offsets
				b.Fatal(err)
			}
			var wall, cpu [2]time.Duration
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				du := 1e-9 * float64(i%7)
				ps.U0, pp.U0 = bc.p.U0+du, bc.p.U0+du
				for j, l := range []*fit.Likelihood{ls, lp} {
					p := &ps
					if j == 1 {
						p = &pp
					}
					w0, c0 := time.Now(), gridThreadCPUTime()
					if _, err := l.Chi2(p); err != nil {
						b.Fatal(err)
					}
					cpu[j] += gridThreadCPUTime() - c0
					wall[j] += time.Since(w0)
				}
			}
			b.ReportMetric(float64(wall[1])/float64(wall[0]), "wall-ratio")
			if cpu[0] > 0 {
				b.ReportMetric(float64(cpu[1])/float64(cpu[0]), "cpu-ratio")
			}
			b.ReportMetric(float64(wall[0].Nanoseconds())/float64(b.N), "static-ns/op")
			b.ReportMetric(math.Round(float64(wall[1].Nanoseconds())/float64(b.N)), "parallax-ns/op")
		})
	}
}

// BenchmarkParallaxOffsets is the one-off cost the likelihood caches: the
// offsets of 20,000 epochs (per-point ephemeris evaluation).
func BenchmarkParallaxOffsets(b *testing.B) {
	ev := benchParallaxEvent()
	for i := 0; i < b.N; i++ {
		for _, d := range ev.Datasets {
			if _, err := ev.ParallaxOffsets(d.T, ev.TRef); err != nil {
				b.Fatal(err)
			}
		}
	}
}
