package fit

import (
	"context"
	"math"
	"math/cmplx"
	"testing"

	"lensbook/lens"
)

// chordParams gives the trajectory that lens.Model.At places at pin at tin and
// at pout at tout (the package's own geometry as the reference), and
// crossingsOf finds those two crossings again on the caustic path.
func TestChordParamsThroughCaustic(t *testing.T) {
	for _, sq := range [][2]float64{{1.35, 1e-3}, {1.05, 0.4}, {0.7, 0.01}} {
		b, _ := lens.NewBinary(sq[0], sq[1])
		paths := causticPaths(b, 128)
		if len(paths) == 0 {
			t.Fatalf("s=%v q=%v: no caustics", sq[0], sq[1])
		}
		path := &paths[len(paths)-1]
		c := lens.ReferencePoint(lens.CentralCaustic, sq[0], sq[1])
		lin, lout, tin, tout := 0.15, 0.6, 2460000.0, 2460003.5
		t0, u0, tE, al, ok := chordParams(c, path.at(lin), path.at(lout), tin, tout)
		if !ok {
			t.Fatal("chordParams failed")
		}
		m := lens.Model{Params: lens.Params{T0: t0, U0: u0, TE: tE, Alpha: al, S: sq[0], Q: sq[1]}, Ref: lens.CentralCaustic}
		for _, x := range []struct {
			t float64
			z complex128
		}{{tin, path.at(lin)}, {tout, path.at(lout)}} {
			if d := cmplx.Abs(m.At(x.t, lens.Offset{}).Zeta - x.z); d > 1e-9 {
				t.Errorf("s=%v q=%v: source %v from the caustic point at t=%v", sq[0], sq[1], d, x.t)
			}
		}
		var gotIn, gotOut bool
		for _, cr := range crossingsOf(path, c, m.Params) {
			if math.Abs(cr.t-tin) < 1e-6 && math.Abs(cr.l-lin) < 1e-6 {
				gotIn = true
			}
			if math.Abs(cr.t-tout) < 1e-6 && math.Abs(cr.l-lout) < 1e-6 {
				gotOut = true
			}
		}
		if !gotIn || !gotOut {
			t.Errorf("s=%v q=%v: crossingsOf %v misses the entry (%v) or exit (%v)", sq[0], sq[1], crossingsOf(path, c, m.Params), gotIn, gotOut)
		}
	}
}

// A step of 1 (flux units) with σ = 0.01 in otherwise smooth residuals is found
// at its time with its sign and a ramp width near the true one; a smooth bend
// of the same size is not a step.
func TestFindJumps(t *testing.T) {
	var res []Residual
	for i := range 2000 {
		tt := float64(i) * 0.01 // 20 days at 0.01 d
		y := 0.0
		switch { // a 0.2-day linear ramp up at t = 5, down at t = 12
		case tt >= 5.1 && tt < 12:
			y = 1
		case tt >= 4.9 && tt < 5.1:
			y = (tt - 4.9) / 0.2
		}
		y += 1 * math.Exp(-(tt-16)*(tt-16)/(2*1.5*1.5)) // smooth bump, width 1.5 d
		if tt >= 12 && tt < 12.2 {
			y += 1 - (tt-12)/0.2
		}
		res = append(res, Residual{T: tt, Flux: 10 + y, Model: 10, Sigma: 0.01})
	}
	js := FindJumps(res, 50, 0)
	if len(js) != 2 {
		t.Fatalf("jumps %+v, want the rise at 5 and the fall at 12.1", js)
	}
	up, down := js[0], js[1]
	if up.T > down.T {
		up, down = down, up
	}
	if math.Abs(up.T-5) > 0.15 || up.Sigma < 50 || math.Abs(down.T-12.1) > 0.15 || down.Sigma > -50 {
		t.Errorf("rise %+v, fall %+v", up, down)
	}
	for _, j := range js {
		// a linear ramp: the 20–80% time over 0.6 is the ramp's length
		if math.Abs(j.Width-0.2) > 0.05 {
			t.Errorf("jump at %v: width %v, want 0.2", j.T, j.Width)
		}
	}
	cr := findCrossing(js)
	if cr == nil || math.Abs(cr.TIn-up.T) > 1e-9 || math.Abs(cr.TOut-down.T) > 1e-9 || len(cr.Masked) != 2 {
		t.Fatalf("crossing %+v", cr)
	}
	// a fall before a rise is no crossing
	if c := findCrossing([]Jump{{T: 1, Sigma: -100}, {T: 2, Sigma: 100}}); c != nil {
		t.Errorf("fall then rise read as a crossing: %+v", c)
	}
}

// Levenberg–Marquardt on crossing coordinates finds the minimum of a
// least-squares problem with a known answer (a line through exact points).
func TestLMResiduals(t *testing.T) {
	xs := []float64{0, 1, 2, 3, 4}
	f := func(r, p []float64) float64 {
		s := 0.0
		for i, x := range xs {
			r[i] = p[0] + p[1]*x + 0.1*p[1]*p[1]*x*x - (3 - 2*x + 0.4*x*x)
			s += r[i] * r[i]
		}
		return s
	}
	p := []float64{0, 0}
	c, n, cancelled := lmResiduals(context.Background(), f, p, []float64{1e-6, 1e-6}, len(xs), 500, 1e-14)
	if cancelled || c > 1e-12 || math.Abs(p[0]-3) > 1e-5 || math.Abs(p[1]+2) > 1e-5 {
		t.Fatalf("χ² %v after %d calls at %v, want (3, −2)", c, n, p)
	}
}
