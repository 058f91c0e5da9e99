package problems_test

import (
	"math"
	"math/cmplx"
	"sort"
	"testing"

	"lensbook/fit/problems"
	"lensbook/lens"
)

// crossing is where the straight source trajectory of a static binary model
// crosses one of its caustics: the time (full JD) and the time the source disk
// takes to pass the caustic line, 2ρ·tE/sin θ with θ the angle between the
// trajectory and the caustic there (geometry).
type crossing struct {
	t, dur float64
}

// crossings intersects the trajectory of m with every caustic segment of
// lens.Caustics, in the frame where the trajectory is the line y = u0.
func crossings(m lens.Model) []crossing {
	b, err := lens.NewBinary(m.S, m.Q)
	if err != nil {
		return nil
	}
	c := lens.ReferencePoint(m.Ref, m.S, m.Q)
	rot := cmplx.Exp(complex(0, -m.Alpha))
	var out []crossing
	for _, cv := range b.Caustics(2048) {
		n := len(cv.Caustic)
		for i := range n {
			w1, w2 := (cv.Caustic[i]-c)*rot, (cv.Caustic[(i+1)%n]-c)*rot
			y1, y2 := imag(w1)-m.U0, imag(w2)-m.U0
			if y1*y2 > 0 || y1 == y2 {
				continue
			}
			f := y1 / (y1 - y2)
			tau := real(w1) + f*(real(w2)-real(w1))
			sin := math.Abs(y2-y1) / cmplx.Abs(w2-w1)
			out = append(out, crossing{t: m.T0 + tau*m.TE, dur: 2 * m.Rho * m.TE / math.Max(sin, 1e-3)})
		}
	}
	sort.Slice(out, func(i, j int) bool { return out[i].t < out[j].t })
	return out
}

// The caustic-crossing problems must cross a caustic of their truth (entry and
// exit) and have each jump in the data: at least 5 points while the source disk
// passes the caustic line (first to last contact), whose truth fluxes span more
// than 20σ. The central-caustic problems must not cross (they test an
// approach).
func TestCausticCrossingsObserved(t *testing.T) {
	for _, tc := range []struct {
		s     *problems.Spec
		cross bool
	}{{problems.PlanetaryCaustic(), true}, {problems.ResonantBinary(), true}, {problems.PlanetCentral(), false}, {problems.Demo(), false}} {
		m := tc.s.Truth
		cs := crossings(m)
		if !tc.cross {
			if len(cs) != 0 {
				t.Errorf("%s: trajectory crosses a caustic at %v, the problem promises an approach only", tc.s.Name, cs)
			}
			continue
		}
		if len(cs) < 2 || len(cs)%2 != 0 {
			t.Fatalf("%s: %d caustic crossings, want entry/exit pairs", tc.s.Name, len(cs))
		}
		ev, err := tc.s.Simulate(20240601)
		if err != nil {
			t.Fatal(err)
		}
		for _, c := range cs {
			var ts []float64
			var sig []float64
			var fs []float64
			for k, d := range ev.Datasets {
				site := tc.s.Sites[k]
				for i, tt := range d.T {
					if math.Abs(tt-c.t) <= c.dur/2 {
						ts = append(ts, tt)
						sig = append(sig, d.Err[i])
						fs = append(fs, site.Fs)
					}
				}
			}
			a := make([]float64, len(ts))
			mm := m
			mm.LD = 0.55
			if len(ts) > 0 {
				if err := lens.LightCurve(a, &mm, ts, nil); err != nil {
					t.Fatal(err)
				}
			}
			// the largest change of the source flux across the window, in σ
			span := 0.0
			for i := range a {
				for j := range a {
					span = math.Max(span, (a[i]-a[j])*fs[i]/math.Max(sig[i], sig[j]))
				}
			}
			t.Logf("%s: crossing at t0 %+.3f d (disk passage %.3f d): %d points, jump %.0fσ", tc.s.Name, c.t-m.T0, c.dur, len(ts), span)
			if len(ts) < 5 || span < 20 {
				t.Errorf("%s: the crossing at t0 %+.3f d is not in the data (%d points, %.1fσ)", tc.s.Name, c.t-m.T0, len(ts), span)
			}
		}
	}
}
