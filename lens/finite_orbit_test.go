package lens

import (
	"math"
	"testing"
)

// TestOrbitCausticMaps: with orbital motion every epoch has its own s, and the
// method switch reads the caustic distance from maps built at nearby s
// (causticFor, causticDistance). Along the planetary event of the benchmark
// with ds/dt = 0.3 per year (s changes by 0.085), every epoch within 20ρ of
// the caustics (exact map at its own s) must be within tol of the contour
// at tol 1e-5, and the curve must build few maps.
func TestOrbitCausticMaps(t *testing.T) {
	m, times := planetaryEvent()
	m.DsDt = 0.3
	clearCausticCache()
	n0 := causticBuilds.Load()
	dst := make([]float64, len(times))
	if err := LightCurve(dst, m, times, nil); err != nil {
		t.Fatal(err)
	}
	builds := causticBuilds.Load() - n0
	checked, worst := 0, 0.0
	for i, tt := range times {
		g := m.At(tt, Offset{})
		b := Binary{S: g.S, Q: g.Q}
		// A map from the cache gives a lower bound of the distance: only
		// epochs it puts within 20ρ need the exact map.
		if causticFor(b, 0.05).distance(b, g.Zeta, 20*m.Rho) >= 20*m.Rho {
			continue
		}
		var exact causticMap
		exact.build(b)
		if exact.distance(b, g.Zeta, 20*m.Rho) >= 20*m.Rho {
			continue
		}
		l := newFSLens(b)
		var w finiteWork
		ref, ok := w.uniform(&l, g.Zeta, m.Rho, 1e-5, nil)
		if !ok {
			t.Fatalf("t=%v: contour failed", tt)
		}
		e := math.Abs(dst[i]/ref.Mag - 1)
		worst = math.Max(worst, e)
		if e > 1e-3 {
			t.Errorf("t=%v s=%v: light curve %.8g, contour %.8g (rel %.2g)", tt, g.S, dst[i], ref.Mag, e)
		}
		checked++
	}
	t.Logf("%d epochs within 20ρ of the caustics, worst rel err %.2g; %d caustic maps built for %d epochs", checked, worst, builds, len(times))
	if checked < 50 {
		t.Errorf("only %d epochs near the caustics: the test does not test", checked)
	}
	if builds > 20 {
		t.Errorf("%d caustic maps built for one curve", builds)
	}
}
