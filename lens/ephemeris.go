package lens

import "math"

// Solar ephemeris for annual parallax.
//
// The Sun's geometric position as seen from the Earth's centre follows the
// "low accuracy" solar theory of Meeus (1998, Astronomical Algorithms, 2nd ed.,
// ch. 25: mean longitude, mean anomaly, equation of the centre and eccentricity
// as polynomials in Julian centuries), referred to the mean equator and equinox
// of date with the mean obliquity of Meeus eq. 22.2, then rotated to the J2000
// mean equator and equinox (within 0.02″ of the ICRS axes) with the IAU 1976
// precession angles ζ, z, θ (Lieske et al. 1977, A&A 58, 1; Meeus eq. 21.3).
// Against ERFA's epv00 (pyerfa 2.0.0.1) the position is within 1.6e-4 AU over
// 2000–2040 (see testdata/ephemeris and the tests): 0.01° ≈ 1.7e-4 AU is the
// accuracy Meeus gives for the theory, ample for microlens parallax, whose
// offsets are a fraction πE ≲ 1 of the Earth's orbit.
//
// Times are Julian dates. The theory wants TT; UTC, TDB or the HJD of the data
// shift the epoch by ≤ 70 s (time scales, ≈ 1e-5 AU of Earth motion) or ≤ 8.3 min
// (HJD − JD, ≤ 1e-4 AU in s(t), far less in the offsets of ParallaxOffsets,
// which remove the position and velocity at the reference epoch).

const deg = math.Pi / 180

// arcsec is one second of arc in radians.
const arcsec = deg / 3600

// SunPosition returns the geocentric position of the Sun (AU) at Julian date jd,
// in equatorial axes of the J2000 mean equator and equinox (ICRS-aligned): x
// towards the equinox, z towards the north celestial pole. It is minus the
// Earth's heliocentric position. NaN in, NaN out.
func SunPosition(jd float64) [3]float64 {
	t := (jd - 2451545.0) / 36525 // Julian centuries from J2000.0
	// Meeus (1998) eqs. 25.2–25.5, degrees.
	l0 := 280.46646 + t*(36000.76983+t*0.0003032)
	m := (357.52911 + t*(35999.05029-t*0.0001537))
	e := 0.016708634 - t*(0.000042037+t*0.0000001267)
	sm, cm := math.Sincos(math.Mod(m, 360) * deg)
	s2m := 2 * sm * cm
	s3m := sm * (3 - 4*sm*sm)
	c := (1.914602-t*(0.004817+t*0.000014))*sm + (0.019993-t*0.000101)*s2m + 0.000289*s3m
	lon := math.Mod(l0+c, 360) * deg // true geometric longitude, mean equinox of date
	nu := math.Mod(m+c, 360) * deg   // true anomaly
	r := 1.000001018 * (1 - e*e) / (1 + e*math.Cos(nu))

	// Mean obliquity of date, Meeus eq. 22.2 (IAU 1976).
	eps := (84381.448 - t*(46.8150+t*(0.00059-t*0.001813))) * arcsec
	sl, cl := math.Sincos(lon)
	se, ce := math.Sincos(eps)
	// Ecliptic of date: the Sun from the Earth–Moon barycentre, plus the
	// Earth's offset from that barycentre, the Moon's geocentric position times
	// m_Moon/(m_Earth + m_Moon) (the monthly wobble: 3e-5 AU, 7e-6 AU/day).
	xe, ye, ze := r*cl, r*sl, 0.0
	mx, my, mz := moonPosition(t)
	xe, ye, ze = xe+mx*moonFraction, ye+my*moonFraction, ze+mz*moonFraction
	x, y, z := xe, ye*ce-ze*se, ye*se+ze*ce

	// Mean equator of date → J2000: r₂₀₀₀ = R3(ζ) R2(−θ) R3(z) r_date, the
	// transpose of the IAU 1976 precession matrix R3(−z) R2(θ) R3(−ζ).
	zeta := t * (2306.2181 + t*(0.30188+t*0.017998)) * arcsec
	zz := t * (2306.2181 + t*(1.09468+t*0.018203)) * arcsec
	theta := t * (2004.3109 - t*(0.42665+t*0.041833)) * arcsec
	sz, cz := math.Sincos(zz)
	x, y = cz*x+sz*y, -sz*x+cz*y
	st, ct := math.Sincos(theta)
	x, z = ct*x+st*z, -st*x+ct*z
	sk, ck := math.Sincos(zeta)
	x, y = ck*x+sk*y, -sk*x+ck*y
	return [3]float64{x, y, z}
}

// moonFraction is m_Moon/(m_Earth + m_Moon) for the Earth/Moon mass ratio
// 81.3006 (IAU 1976 system of constants, from memory).
const moonFraction = 1 / 82.3006

// auKm is the astronomical unit in km (IAU 2012 exact definition).
const auKm = 149597870.7

// moonPosition returns the geocentric Moon (AU) in the ecliptic and mean
// equinox of date, t in Julian centuries from J2000.0, from the largest terms of
// the lunar theory in Meeus (1998, ch. 47: mean elements eqs. 47.1–47.5, and the
// terms above 0.1° in longitude, 0.2° in latitude and 500 km in distance of
// tables 47.A–47.B). That keeps its error near 0.3°, i.e. below 2e-7 AU once
// scaled by moonFraction.
func moonPosition(t float64) (x, y, z float64) {
	lp := 218.3164477 + 481267.88123421*t // mean longitude
	d := (297.8501921 + 445267.1114034*t) * deg
	m := (357.5291092 + 35999.0502909*t) * deg
	mp := (134.9633964 + 477198.8675055*t) * deg
	f := (93.2720950 + 483202.0175233*t) * deg
	lon := (lp + 6.288774*math.Sin(mp) + 1.274027*math.Sin(2*d-mp) + 0.658314*math.Sin(2*d) +
		0.213618*math.Sin(2*mp) - 0.185116*math.Sin(m) - 0.114332*math.Sin(2*f)) * deg
	lat := (5.128122*math.Sin(f) + 0.280602*math.Sin(mp+f) + 0.277693*math.Sin(mp-f)) * deg
	dist := (385000.56 - 20905.355*math.Cos(mp) - 3699.111*math.Cos(2*d-mp) -
		2955.968*math.Cos(2*d) - 569.925*math.Cos(2*mp)) / auKm
	sl, cl := math.Sincos(math.Mod(lon, 2*math.Pi))
	sb, cb := math.Sincos(lat)
	return dist * cb * cl, dist * cb * sl, dist * sb
}

// sunVelocityStep is the half-step (days) of the central difference in
// SunVelocity: truncation h²|s‴|/6 ≈ 1e-10 AU/day, round-off ≈ 1e-13 AU/day.
const sunVelocityStep = 0.01

// SunVelocity returns the rate of change of SunPosition (AU/day) at jd, by a
// central difference of SunPosition (so it is exactly the derivative of the
// model whose positions ParallaxOffsets uses). It is minus the Earth's
// heliocentric velocity.
func SunVelocity(jd float64) [3]float64 {
	const h = sunVelocityStep
	p := SunPosition(jd + h)
	q := SunPosition(jd - h)
	return [3]float64{(p[0] - q[0]) / (2 * h), (p[1] - q[1]) / (2 * h), (p[2] - q[2]) / (2 * h)}
}

// skyBasis returns the unit vectors towards north and east on the sky at
// right ascension ra and declination dec (radians), in the axes of SunPosition:
// n̂_N = (−sinδ cosα, −sinδ sinα, cosδ), n̂_E = (−sinα, cosα, 0).
func skyBasis(ra, dec float64) (north, east [3]float64) {
	sa, ca := math.Sincos(ra)
	sd, cd := math.Sincos(dec)
	return [3]float64{-sd * ca, -sd * sa, cd}, [3]float64{-sa, ca, 0}
}

func dot3(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }

// SunSky returns the Sun's geocentric position projected on the sky plane at
// (ra, dec) (radians), as north and east components in AU, and the rate of
// change of that projection in AU/day: the vector s(t) and ṡ(t) of the
// geocentric parallax formalism (Gould 2004, ApJ 606, 319).
func SunSky(jd, ra, dec float64) (s, sdot Offset) {
	n, e := skyBasis(ra, dec)
	p, v := SunPosition(jd), SunVelocity(jd)
	return Offset{N: dot3(p, n), E: dot3(p, e)}, Offset{N: dot3(v, n), E: dot3(v, e)}
}
