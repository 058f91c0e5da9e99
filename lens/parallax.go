package lens

// ParallaxOffsets fills dst with the annual-parallax offsets of the geocentric
// formalism of Gould (2004, ApJ 606, 319) for an event at right ascension raRad
// and declination decRad (J2000, radians), at the given times (Julian dates,
// see SunPosition for time scales) with reference epoch tref (t0,par):
//
//	Δs(t) = s(t) − s(tref) − (t − tref) ṡ(tref),
//
// where s is the Sun's position relative to the Earth projected on the sky, in
// AU, with north and east components (SunSky). Removing the position and
// velocity at tref makes t0, u0 and tE the geocentric values at tref, so
// Δs(tref) = 0 and dΔs/dt(tref) = 0. Model.At turns Δs into δτ = πE·Δs and
// δβ = πE,N ΔsE − πE,E ΔsN.
//
// NaN coordinates, times or tref give NaN offsets. It panics if dst and times
// differ in length.
func ParallaxOffsets(dst []Offset, times []float64, raRad, decRad, tref float64) {
	if len(dst) != len(times) {
		panic("lens: ParallaxOffsets slice lengths differ")
	}
	n, e := skyBasis(raRad, decRad)
	p0, v0 := SunPosition(tref), SunVelocity(tref)
	s0 := Offset{N: dot3(p0, n), E: dot3(p0, e)}
	v := Offset{N: dot3(v0, n), E: dot3(v0, e)}
	for i, t := range times {
		p := SunPosition(t)
		dt := t - tref
		dst[i] = Offset{
			N: dot3(p, n) - s0.N - dt*v.N,
			E: dot3(p, e) - s0.E - dt*v.E,
		}
	}
}
