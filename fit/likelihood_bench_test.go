package fit_test

import (
	"context"
	"math"
	"runtime"
	"sync"
	"testing"
	"time"

	"gonum.org/v1/gonum/mat"

	"lensbook/fit"
	"lensbook/fit/problems"
	"lensbook/lens"
)

// dense10k is the demo event observed ~3.45 times more often: 3 datasets with
// about 10,000 points in all.
func dense10k(tb testing.TB, rho float64) (*problems.Spec, *fit.Event) {
	s := problems.Demo()
	s.Truth.Rho = rho
	for i := range s.Sites {
		for j := range s.Sites[i].Windows {
			s.Sites[i].Windows[j].Cadence /= 3.45
		}
	}
	ev, err := s.Simulate(5)
	if err != nil {
		tb.Fatal(err)
	}
	return s, ev
}

// naiveChi2 is the baseline: what a first implementation does — a fresh
// evaluator and fresh slices per call, the flux solved by gonum's QR on the
// weighted design matrix.
func naiveChi2(ev *fit.Event, m lens.Model) float64 {
	total := 0.0
	for _, d := range ev.Datasets {
		a := make([]float64, d.Len())
		mm := m
		mm.LD = d.LD
		if err := lens.LightCurve(a, &mm, d.T, nil); err != nil {
			return math.Inf(1)
		}
		X := mat.NewDense(d.Len(), 2, nil)
		y := mat.NewDense(d.Len(), 1, nil)
		for i := range a {
			w := 1 / d.Sigma(i)
			X.Set(i, 0, w*a[i])
			X.Set(i, 1, w)
			y.Set(i, 0, w*d.Flux[i])
		}
		var qr mat.QR
		qr.Factorize(X)
		var b mat.Dense
		if err := qr.SolveTo(&b, false, y); err != nil {
			return math.Inf(1)
		}
		fs, fb := b.At(0, 0), b.At(1, 0)
		for i := range a {
			r := (d.Flux[i] - fs*a[i] - fb) / d.Sigma(i)
			total += r * r
		}
	}
	return total
}

var sinkChi2 float64

func benchChi2(b *testing.B, rho float64, single bool) {
	s, ev := dense10k(b, rho)
	p := s.Truth.Params
	if single {
		p.S, p.Q, p.Alpha = 0, 0, 0
	}
	l, err := fit.NewLikelihood(ev)
	if err != nil {
		b.Fatal(err)
	}
	if l.N() < 9500 || l.N() > 10500 {
		b.Fatalf("%d points, want about 10,000", l.N())
	}
	b.Run("lensbook", func(b *testing.B) {
		b.ReportAllocs()
		c0 := gridCPUTime()
		for b.Loop() {
			c, err := l.Chi2(&p)
			if err != nil {
				b.Fatal(err)
			}
			sinkChi2 = c
		}
		b.ReportMetric(float64(gridCPUTime()-c0)/1e6/float64(b.N), "cpu-ms/op")
	})
	b.Run("naive", func(b *testing.B) {
		b.ReportAllocs()
		m := lens.Model{Params: p, Ref: ev.Ref, Tol: ev.Tol}
		c0 := gridCPUTime()
		for b.Loop() {
			sinkChi2 = naiveChi2(ev, m)
		}
		b.ReportMetric(float64(gridCPUTime()-c0)/1e6/float64(b.N), "cpu-ms/op")
	})
}

// BenchmarkChi2 measures χ² with the flux solution for 3 datasets totalling
// ~10,000 points (the demo event, denser), against the naive baseline.
func BenchmarkChi2(b *testing.B) {
	b.Run("binary-point-source", func(b *testing.B) { benchChi2(b, 0, false) })
	b.Run("single-point-source", func(b *testing.B) { benchChi2(b, 0, true) })
	b.Run("single-finite-source", func(b *testing.B) { benchChi2(b, 0.01, true) })
	b.Run("binary-finite-source", func(b *testing.B) {
		if !finiteBinaryReady() {
			b.Skip("lens: finite-source binary not available yet")
		}
		benchChi2(b, 1e-3, false)
	})
}

// The naive baseline and the likelihood agree (so the benchmark compares equals).
func TestNaiveChi2Agrees(t *testing.T) {
	s := problems.PlanetCentral()
	ev := simulate(t, s, 1)
	l := mustLikelihood(t, ev)
	p := s.Truth.Params
	c, _ := l.Chi2(&p)
	if n := naiveChi2(ev, s.Truth); math.Abs(n-c) > 1e-8*c {
		t.Fatalf("naive %v vs likelihood %v", n, c)
	}
}

// demoGrid returns the demo event and the seed of its grid (the single-lens
// fit without the anomaly).
func demoGrid(b *testing.B) (*fit.Event, lens.Params) {
	s := problems.Demo()
	ev, err := s.Simulate(20240601)
	if err != nil {
		b.Fatal(err)
	}
	r, err := fit.FitSingle(context.Background(), ev, fit.SingleSettings{NoFinite: true})
	if err != nil {
		b.Fatal(err)
	}
	return ev, r.GridStart()
}

// BenchmarkGridDemo is the full default grid (31×31 nodes, 8 α seeds) on the
// ~2900-point demo event, in one chunk on one goroutine.
func BenchmarkGridDemo(b *testing.B) {
	ev, start := demoGrid(b)
	c0 := gridCPUTime()
	for b.Loop() {
		g, err := fit.RunGrid(context.Background(), ev, start, fit.GridSettings{}, nil)
		if err != nil {
			b.Fatal(err)
		}
		b.ReportMetric(float64(g.Evals), "evals")
	}
	b.ReportMetric(float64(gridCPUTime()-c0)/1e9/float64(b.N), "cpu-s/op")
}

// BenchmarkGridDemoTwoChunks runs the same grid as two chunks on two
// goroutines (each locked to its OS thread) and merges them. Besides wall and
// total CPU time it reports each chunk's thread CPU time: on two free cores
// the wall time would be the larger of the two.
func BenchmarkGridDemoTwoChunks(b *testing.B) {
	ev, start := demoGrid(b)
	c0 := gridCPUTime()
	var chunkCPU [2]time.Duration
	defer func() {
		b.ReportMetric(float64(gridCPUTime()-c0)/1e9/float64(b.N), "cpu-s/op")
		b.ReportMetric(chunkCPU[0].Seconds()/float64(b.N), "chunk0-cpu-s/op")
		b.ReportMetric(chunkCPU[1].Seconds()/float64(b.N), "chunk1-cpu-s/op")
	}()
	for b.Loop() {
		parts := make([]*fit.GridResult, 2)
		var wg sync.WaitGroup
		for c := range parts {
			wg.Add(1)
			go func() {
				defer wg.Done()
				runtime.LockOSThread()
				defer runtime.UnlockOSThread()
				t0 := gridThreadCPUTime()
				defer func() { chunkCPU[c] += gridThreadCPUTime() - t0 }()
				g, err := fit.RunGridChunk(context.Background(), ev, start, fit.GridSettings{}, c, 2, nil)
				if err != nil {
					b.Error(err)
				}
				parts[c] = g
			}()
		}
		wg.Wait()
		if _, err := fit.MergeGrid(parts...); err != nil {
			b.Fatal(err)
		}
	}
}
