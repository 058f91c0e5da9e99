package fit

import (
	"math"
	"strings"
	"testing"

	"lensbook/lens"
)

// Cubic positions are interpolated exactly (4-point Lagrange, unequal steps).
func TestObserverTableCubicExact(t *testing.T) {
	f := func(t float64) float64 { x := t - 2460000; return 0.1 + 0.01*x - 2e-4*x*x + 3e-6*x*x*x }
	o := &ObserverTable{Name: "probe"}
	for _, tt := range []float64{2460000, 2460001.5, 2460003, 2460005, 2460006, 2460009} {
		o.T = append(o.T, tt)
		o.X = append(o.X, f(tt))
		o.Y = append(o.Y, -f(tt))
		o.Z = append(o.Z, 2*f(tt))
	}
	if err := o.Validate(); err != nil {
		t.Fatal(err)
	}
	for tt := 2460000.0; tt <= 2460009; tt += 0.37 {
		r, err := o.Position(tt)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(r[0]-f(tt)) > 1e-12 || math.Abs(r[1]+f(tt)) > 1e-12 || math.Abs(r[2]-2*f(tt)) > 1e-12 {
			t.Fatalf("t=%v: %v, want x=%v", tt, r, f(tt))
		}
	}
	if _, err := o.Position(2460010); err == nil || !strings.Contains(err.Error(), "outside") {
		t.Errorf("outside the table: %v", err)
	}
	bad := *o
	bad.T = append([]float64(nil), o.T...)
	bad.T[3] = bad.T[2]
	if err := bad.Validate(); err == nil || !strings.Contains(err.Error(), "row 4") {
		t.Errorf("repeated time: %v", err)
	}
}

// The sign and frame of the observatory term: an "observatory" placed where
// the Earth will be Δ days later, r(t) = E(t+Δ) − E(t) with E = −SunPosition
// the Earth's heliocentric position, sees the Sun where the Earth sees it at
// t+Δ. Its offsets must be s(t+Δ) − s(t0,par) − (t − t0,par)·ṡ(t0,par) with s
// the Sun's sky projection (lens.SunSky) — the geocentric definition
// (Gould 2004) evaluated independently of DatasetOffsets.
func TestObserverOffsetsTimeShiftedEarth(t *testing.T) {
	c := Coords{RA: 268.9, Dec: -30.2}
	ra, dec := c.Radians()
	const delta, tref = 40.0, 2460850.0
	o := &ObserverTable{Name: "earth+40d"}
	for tt := tref - 100; tt <= tref+100; tt++ {
		e1, e0 := lens.SunPosition(tt+delta), lens.SunPosition(tt)
		o.T = append(o.T, tt)
		o.X = append(o.X, -e1[0]+e0[0])
		o.Y = append(o.Y, -e1[1]+e0[1])
		o.Z = append(o.Z, -e1[2]+e0[2])
	}
	ev := &Event{Coords: &c, Datasets: []*Dataset{{}, {}}, Observers: []*ObserverTable{nil, o}}
	times := []float64{tref - 90.3, tref - 10.7, tref, tref + 33.3, tref + 99}
	off, err := ev.DatasetOffsets(1, times, tref)
	if err != nil {
		t.Fatal(err)
	}
	s0, v0 := lens.SunSky(tref, ra, dec)
	for i, tt := range times {
		s, _ := lens.SunSky(tt+delta, ra, dec)
		want := lens.Offset{N: s.N - s0.N - (tt-tref)*v0.N, E: s.E - s0.E - (tt-tref)*v0.E}
		if math.Abs(off[i].N-want.N) > 1e-8 || math.Abs(off[i].E-want.E) > 1e-8 {
			t.Errorf("t=%v: offset %+v, want %+v", tt, off[i], want)
		}
	}
	// The ground-based dataset keeps the Earth's offsets.
	g, _ := ev.DatasetOffsets(0, times, tref)
	e, _ := ev.ParallaxOffsets(times, tref)
	for i := range g {
		if g[i] != e[i] {
			t.Fatalf("ground dataset offsets changed")
		}
	}
	// In the likelihood: a time outside the table is an error naming the observatory.
	ev2 := pxEvent(&c, tref)
	ev2.Observers = []*ObserverTable{nil, o}
	l, _ := NewLikelihood(ev2)
	p := lens.Params{T0: 2460800, U0: 0.2, TE: 90, PiEN: 0.1}
	if _, err := l.Chi2(&p); err == nil || !strings.Contains(err.Error(), "earth+40d") {
		t.Errorf("data outside the observatory table: %v", err)
	}
}
