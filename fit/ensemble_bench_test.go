package fit

import (
	"context"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
	"time"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/samplemv"
)

type logProber LogDensity

func (f logProber) LogProb(x []float64) float64 { return f(x) }

// BenchmarkSampler10D compares the ensemble sampler with a baseline, gonum's
// random-walk Metropolis–Hastings with a Gaussian proposal of the target's own
// covariance scaled by 2.38²/d (the optimal scaling of Roberts, Gelman & Gilks
// 1997, Ann. Appl. Probab. 7, 110) — a baseline that is given the answer's
// shape, which the ensemble sampler has to discover. Both spend 240,000
// density evaluations on the correlated 10-D Gaussian of the tests; the metric
// is effective samples (smallest over parameters) per second and per 1000
// evaluations.
func BenchmarkSampler10D(b *testing.B) {
	_, cov, logp := gauss10()
	const evals = 240000
	b.Run("stretch", func(b *testing.B) {
		var ess float64
		var el time.Duration
		for b.Loop() {
			t0 := time.Now()
			c, err := RunEnsemble(context.Background(), EnsembleSettings{Walkers: 24, Steps: evals / 24, Seed: 1, ProgressEvery: evals},
				Target{LogDensity: logp}, Start{X: make([]float64, 10), Spread: slices.Repeat([]float64{1}, 10)}, nil)
			if err != nil {
				b.Fatal(err)
			}
			el += time.Since(t0)
			ess += slices.Min(c.Diagnostics.ESS)
		}
		b.ReportMetric(ess/el.Seconds(), "ESS/s")
		b.ReportMetric(ess/float64(b.N)/evals*1000, "ESS/kevals")
	})
	b.Run("gonum-mh", func(b *testing.B) {
		var ess float64
		var el time.Duration
		for b.Loop() {
			t0 := time.Now()
			var scaled mat.SymDense
			scaled.ScaleSym(2.38*2.38/10, cov)
			src := rand.NewPCG(1, 2)
			prop, ok := samplemv.NewProposalNormal(&scaled, src)
			if !ok {
				b.Fatal("proposal covariance not positive definite")
			}
			batch := mat.NewDense(evals, 10, nil)
			samplemv.MetropolisHastingser{Initial: make([]float64, 10), Target: logProber(logp), Proposal: prop, Src: src, BurnIn: 1000}.Sample(batch)
			el += time.Since(t0)
			minESS := math.Inf(1)
			for p := range 10 {
				e := IntegratedTime([][]float64{mat.Col(nil, p, batch)}, 0)
				minESS = min(minESS, evals/e.Tau)
			}
			ess += minESS
		}
		b.ReportMetric(ess/el.Seconds(), "ESS/s")
		b.ReportMetric(ess/float64(b.N)/evals*1000, "ESS/kevals")
	})
}

// BenchmarkStep measures the sampler's own cost per density evaluation on a
// trivial density (the overhead that adds to every likelihood call), against
// the bare loop of the same evaluations as baseline.
func BenchmarkStep(b *testing.B) {
	f := func(x []float64) float64 { return -(x[0]*x[0] + x[1]*x[1]) / 2 }
	b.Run("ensemble", func(b *testing.B) {
		for b.Loop() {
			RunEnsemble(context.Background(), EnsembleSettings{Walkers: 24, Steps: 1000, Seed: 1, ProgressEvery: 1 << 30},
				Target{LogDensity: f}, Start{X: []float64{0, 0}, Spread: []float64{1, 1}}, nil)
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/24000, "ns/eval")
	})
	b.Run("bare-loop", func(b *testing.B) {
		r := rand.New(rand.NewPCG(1, 1))
		x := []float64{0, 0}
		s := 0.0
		for b.Loop() {
			for range 24000 {
				x[0], x[1] = r.NormFloat64(), r.NormFloat64()
				s += f(x)
			}
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/24000, "ns/eval")
		sinkBench = s
	})
}

var sinkBench float64
