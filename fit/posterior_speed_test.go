//go:build !js

package fit_test

import (
	"context"
	"os"
	"slices"
	"syscall"
	"testing"
	"time"

	"lensbook/fit"
	"lensbook/fit/problems"
)

// cpuTime is the CPU time (user + system) used by this process so far. The
// speed check uses it rather than wall time because the machine it runs on is
// shared; with Concurrent = 1 the sampler uses one core.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// TestPosteriorDemoSpeed samples the demo planetary event (about 2,900 points,
// six parameters) on one core until every parameter has 1,000 effective
// samples and the chain passes the convergence checks, and reports effective
// samples per CPU second. The budget is 5 minutes. Run it with
//
//	LENSBOOK_SPEED=1 go test -run TestPosteriorDemoSpeed -timeout 30m -v ./fit/
func TestPosteriorDemoSpeed(t *testing.T) {
	if os.Getenv("LENSBOOK_SPEED") == "" {
		t.Skip("set LENSBOOK_SPEED=1 to run the demo-event speed check")
	}
	ev, sol := refined(t, problems.Demo(), 1)
	wall, cpu := time.Now(), cpuTime()
	res, err := fit.SamplePosterior(context.Background(), ev, []*fit.Solution{sol},
		fit.PosteriorSettings{Ensemble: fit.EnsembleSettings{Steps: 40000, TargetESS: 1000, Seed: 1, ProgressEvery: 100}},
		func(p fit.Progress) {
			if p.Step%1000 == 0 {
				t.Logf("step %d: acceptance %.3f, τ %.3g, ESS %.0f (cpu %v)", p.Step, p.Acceptance, p.Tau, p.ESS, (cpuTime() - cpu).Round(time.Second))
			}
		})
	if err != nil {
		t.Fatal(err)
	}
	el, elWall := cpuTime()-cpu, time.Since(wall)
	c := res.Modes[0].Chain
	d := c.Diagnostics
	ess := slices.Min(d.ESS)
	t.Logf("demo event: %d points, %d walkers × %d steps = %d likelihood calls; τ = %.3g steps; min ESS %.0f; converged %v %q",
		res.NData, c.Walkers, c.Steps, c.Evals, d.Tau, ess, d.Converged, d.Reasons)
	t.Logf("CPU time %v (wall %v on a shared machine): %.2f effective samples per CPU second, %.2f ms per likelihood call",
		el.Round(time.Second), elWall.Round(time.Second), ess/el.Seconds(), el.Seconds()*1000/float64(c.Evals))
	if ess < 1000 || !d.Converged {
		t.Errorf("only %.0f effective samples (converged %v) after %d steps", ess, d.Converged, c.Steps)
	}
	if el > 5*time.Minute {
		t.Errorf("took %v of CPU, budget 5 min", el)
	}
}
