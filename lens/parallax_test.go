package lens

import (
	"fmt"
	"math"
	"math/cmplx"
	"testing"
)

// TestParallaxOffsetsERFA compares the offsets Δs(t) over event-length windows
// with the same construction from ERFA epv00 positions and velocities
// (testdata/ephemeris/earth_erfa_2026.csv, daily through 2026). Δs removes the
// position and velocity at tref, so only the curvature of the ephemeris error
// remains. Measured: ≤ 4e-7 AU within ±10 days, ≤ 1.2e-5 AU within ±100 days,
// ≤ 1.4e-5 AU within ±180 days. Budgets 2e-6, 3e-5 and 3e-5 AU; times πE ≲ 1
// these are ≲ 3e-5 θE, far below what light curves constrain.
func TestParallaxOffsetsERFA(t *testing.T) {
	rows := readErfa(t, "earth_erfa_2026.csv")
	ra, dec := 270*deg, -30*deg
	n, e := skyBasis(ra, dec)
	proj := func(v [3]float64) Offset { return Offset{N: -dot3(v, n), E: -dot3(v, e)} } // Sun = −Earth
	times := make([]float64, len(rows))
	for i, r := range rows {
		times[i] = r.jd
	}
	got := make([]Offset, len(rows))
	for _, iref := range []int{60, 171, 265} { // 2026-03-02, 06-21, 09-23
		ref := rows[iref]
		tref := ref.jd
		ParallaxOffsets(got, times, ra, dec, tref)
		s0, v0 := proj(ref.pos), proj(ref.vel)
		var worst10, worst100, worst180 float64
		for i, r := range rows {
			dt := r.jd - tref
			s := proj(r.pos)
			want := Offset{N: s.N - s0.N - dt*v0.N, E: s.E - s0.E - dt*v0.E}
			d := math.Hypot(got[i].N-want.N, got[i].E-want.E)
			if math.Abs(dt) <= 10 {
				worst10 = math.Max(worst10, d)
			}
			if math.Abs(dt) <= 100 {
				worst100 = math.Max(worst100, d)
			}
			if math.Abs(dt) <= 180 {
				worst180 = math.Max(worst180, d)
			}
		}
		t.Logf("tref JD %.1f: max |Δs − Δs_ERFA| = %.3g, %.3g, %.3g AU within ±10, ±100, ±180 d", tref, worst10, worst100, worst180)
		if !(worst10 <= 2e-6 && worst100 <= 3e-5 && worst180 <= 3e-5) {
			t.Errorf("tref JD %.1f: offsets differ from ERFA by %.3g (±10 d), %.3g (±100 d), %.3g (±180 d) AU", tref, worst10, worst100, worst180)
		}
	}
}

// TestParallaxOffsetsDefinition: Δs(tref) = 0 and dΔs/dt(tref) = 0 by
// construction (Gould 2004), and Δs is s − s(tref) − (t − tref)ṡ(tref) with s
// and ṡ from SunSky.
func TestParallaxOffsetsDefinition(t *testing.T) {
	ra, dec, tref := 1.2, 0.4, 2458000.3
	times := []float64{tref - 0.5, tref, tref + 0.5, tref + 40, tref - 200}
	off := make([]Offset, len(times))
	ParallaxOffsets(off, times, ra, dec, tref)
	if off[1] != (Offset{}) {
		t.Errorf("Δs(tref) = %v, want exactly zero", off[1])
	}
	// Central difference of Δs at tref: zero up to h²Δs‴/6 ≈ 1e-7 AU/day at h = 0.5 d.
	dn := (off[2].N - off[0].N) / 1
	de := (off[2].E - off[0].E) / 1
	if math.Hypot(dn, de) > 2e-7 {
		t.Errorf("dΔs/dt(tref) = (%g, %g) AU/day, want ≈ 0", dn, de)
	}
	s0, v0 := SunSky(tref, ra, dec)
	for i, tt := range times {
		s, _ := SunSky(tt, ra, dec)
		dt := tt - tref
		want := Offset{N: s.N - s0.N - dt*v0.N, E: s.E - s0.E - dt*v0.E}
		if math.Hypot(off[i].N-want.N, off[i].E-want.E) > 1e-15 {
			t.Errorf("t=%v: Δs = %v, want %v", tt, off[i], want)
		}
	}
	// Curvature: over ±200 days Δs reaches a good fraction of an AU.
	if r := math.Hypot(off[4].N, off[4].E); r < 0.1 || r > 2.5 {
		t.Errorf("|Δs(tref − 200 d)| = %g AU", r)
	}
}

func TestParallaxOffsetsBadInput(t *testing.T) {
	off := make([]Offset, 2)
	ParallaxOffsets(off, []float64{2458000, math.NaN()}, 1, 0.2, 2458000)
	if math.IsNaN(off[0].N) || !math.IsNaN(off[1].N) || !math.IsNaN(off[1].E) {
		t.Errorf("NaN time: got %v", off)
	}
	ParallaxOffsets(off, []float64{2458000, 2458001}, math.NaN(), 0.2, 2458000)
	if !math.IsNaN(off[1].N) {
		t.Errorf("NaN right ascension: got %v", off)
	}
	defer func() {
		if recover() == nil {
			t.Error("no panic for slices of different length")
		}
	}()
	ParallaxOffsets(make([]Offset, 1), []float64{1, 2}, 0, 0, 0)
}

// TestParallaxGeometry builds a microlensing event from its physical geometry
// and checks that ParallaxOffsets with Model.At reproduce it. The source
// position relative to the lens, in Einstein radii and (north, east) sky
// components, is u(t) = u_h(t) + πE·d(t): an observer displaced by d (AU, on the
// sky) sees an object at distance D shifted by −d/D, so θ_S − θ_L moves by
// d(1/D_L − 1/D_S) = d·π_rel (Gould 2004; d = −s, the Earth seen from the Sun).
// u_h is linear in time; writing it about tref in the geocentric frame gives
// u(t) = u(tref) + (t − tref)·v − πE·Δs(t) with v the geocentric rate. The
// parallax vector points along the lens–source relative proper motion
// μ_rel = μ_L − μ_S, i.e. along −v. The model frame has x = north, y = east,
// α measured from north through east, so that ζ(t) must equal u(t) as a vector.
// This pins the sign of Model.At's δβ = πE,N ΔsE − πE,E ΔsN: u0 > 0 when the
// source passes the lens on the side reached by turning the direction of
// motion from north towards east.
func TestParallaxGeometry(t *testing.T) {
	ra, dec := 268.5*deg, -29*deg
	tref := 2461212.5
	for _, c := range []struct {
		piE  float64
		v    Offset // geocentric d(θ_S − θ_L)/dt at tref, θE/day
		uref Offset // θ_S − θ_L at tref, θE
	}{
		{0.3, Offset{0.02, -0.015}, Offset{0.1, 0.05}},
		{0.8, Offset{-0.004, 0.006}, Offset{-0.2, 0.1}},
		{0.05, Offset{0.001, 0.01}, Offset{0.02, -0.01}},
	} {
		speed := math.Hypot(c.v.N, c.v.E)
		vhat := Offset{c.v.N / speed, c.v.E / speed}
		bhat := Offset{-vhat.E, vhat.N}                              // +90° from north towards east
		tmin := tref - (c.uref.N*c.v.N+c.uref.E*c.v.E)/(speed*speed) // closest approach, linear part
		m := Model{Params: Params{
			T0:    tmin,
			U0:    (c.uref.N+(tmin-tref)*c.v.N)*bhat.N + (c.uref.E+(tmin-tref)*c.v.E)*bhat.E,
			TE:    1 / speed,
			Alpha: math.Atan2(vhat.E, vhat.N),
			PiEN:  -c.piE * vhat.N,
			PiEE:  -c.piE * vhat.E,
		}, TRef: tref}
		times := make([]float64, 0, 400)
		for tt := tref - 200; tt <= tref+200; tt += 1.01 {
			times = append(times, tt)
		}
		off := make([]Offset, len(times))
		ParallaxOffsets(off, times, ra, dec, tref)
		for i, tt := range times {
			dt := tt - tref
			u := complex(c.uref.N+dt*c.v.N-c.piE*off[i].N, c.uref.E+dt*c.v.E-c.piE*off[i].E)
			z := m.At(tt, off[i]).Zeta
			if cmplx.Abs(z-u) > 1e-12*(1+cmplx.Abs(u)) {
				t.Fatalf("πE=%g t=%v: model ζ = %v, geometry u = %v", c.piE, tt, z, u)
			}
		}
		// The check has teeth: with the opposite δβ sign the distance to the
		// lens, which no choice of frame changes, would differ.
		var most float64
		for i, tt := range times {
			tau := (tt-m.T0)/m.TE + m.PiEN*off[i].N + m.PiEE*off[i].E
			beta := m.U0 - (m.PiEN*off[i].E - m.PiEE*off[i].N)
			most = math.Max(most, math.Abs(math.Hypot(tau, beta)-cmplx.Abs(m.At(tt, off[i]).Zeta)))
		}
		if most < 1e-6 {
			t.Errorf("πE=%g: test cannot tell the δβ sign apart (|ζ| differs by at most %g)", c.piE, most)
		}
	}
}

// TestParallaxZero: πE = 0 with any offsets gives exactly the static trajectory.
func TestParallaxZero(t *testing.T) {
	m := Model{Params: Params{T0: 2461200, U0: 0.1, TE: 30}}
	times := []float64{2461150, 2461200.5, 2461290}
	off := make([]Offset, len(times))
	ParallaxOffsets(off, times, 4.7, -0.5, m.T0)
	for i, tt := range times {
		if a, b := m.At(tt, off[i]), m.At(tt, Offset{}); a != b {
			t.Errorf("t=%v: %v with offsets, %v without", tt, a, b)
		}
	}
}

func ExampleParallaxOffsets() {
	// Offsets 30 days either side of t0,par for an event at α = 270°, δ = −30°.
	times := []float64{2461182.5, 2461212.5, 2461242.5}
	off := make([]Offset, len(times))
	ParallaxOffsets(off, times, 270*math.Pi/180, -30*math.Pi/180, 2461212.5)
	for i, o := range off {
		fmt.Printf("t − t0,par = %+3.0f d: Δs = (%+.4f, %+.4f) AU\n", times[i]-2461212.5, o.N, o.E)
	}
	// Output:
	// t − t0,par = -30 d: Δs = (+0.0144, -0.0229) AU
	// t − t0,par =  +0 d: Δs = (+0.0000, +0.0000) AU
	// t − t0,par = +30 d: Δs = (+0.0145, +0.0197) AU
}

// sinkParallax keeps benchmark results alive.
var sinkParallax float64

// BenchmarkParallaxOffsets measures the offsets per point (1000 epochs over a
// season), against the baseline of a plain point-lens light curve of the same
// length (the cheapest light curve there is). The offsets depend only on the
// event coordinates and t0,par, so a fit computes them once per dataset.
func BenchmarkParallaxOffsets(b *testing.B) {
	const n = 1000
	times := make([]float64, n)
	for i := range times {
		times[i] = 2461150 + 0.15*float64(i)
	}
	off := make([]Offset, n)
	mag := make([]float64, n)
	m := Model{Params: Params{T0: 2461200, U0: 0.1, TE: 30, PiEN: 0.2, PiEE: -0.1}}
	b.Run("offsets", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			ParallaxOffsets(off, times, 4.7, -0.5, 2461200)
		}
		sinkParallax = off[n/2].N
	})
	ParallaxOffsets(off, times, 4.7, -0.5, 2461200)
	b.Run("baseline-pointmag-lightcurve", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			for i, tt := range times {
				mag[i] = PointMag(cmplx.Abs(m.At(tt, Offset{}).Zeta))
			}
		}
		sinkParallax = mag[n/2]
	})
	b.Run("pointmag-lightcurve-with-offsets", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			for i, tt := range times {
				mag[i] = PointMag(cmplx.Abs(m.At(tt, off[i]).Zeta))
			}
		}
		sinkParallax = mag[n/2]
	})
}
