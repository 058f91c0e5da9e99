package lens

import (
	"fmt"
	"math"
)

// Solar ephemeris for annual parallax.
//
// The Sun's geometric position as seen from the Earth's centre comes from the
// VSOP87 planetary theory (Bretagnon & Francou 1988, A&A 202, 309), series D
// (heliocentric ecliptic coordinates L, B, R of the Earth referred to the
// ecliptic and equinox of date), truncated to its largest terms (down to
// 1e-6 rad in L0 and 2.6e-7 AU in R0; 115 terms) as tabulated in Meeus (1998,
// Astronomical Algorithms, 2nd ed., Appendix III; coefficients transcribed from
// memory and verified against ERFA, see below).
// The lunar terms of VSOP87 (arguments D, D ± M, F) are replaced by an explicit
// Earth–Moon-barycentre offset from a short lunar theory (moonPosition), which
// follows the monthly wobble of the Earth (3e-5 AU, 7e-6 AU/day) more closely.
//
// The ecliptic of date is turned into the mean equator of date with the mean
// obliquity of Meeus eq. 22.2, then rotated to the J2000 mean equator and
// equinox (within 0.02″ of the ICRS axes) with the IAU 1976 precession angles
// ζ, z, θ (Lieske et al. 1977, A&A 58, 1; Meeus eq. 21.3). The 0.09″ FK5
// correction of VSOP87 longitudes (Meeus ch. 32) is below 5e-7 AU and omitted.
//
// Against ERFA's epv00 (pyerfa 2.0.0.1, testdata/ephemeris, 2000–2040) the
// position is within 1e-5 AU and the velocity within 2e-7 AU/day; references
// for the trade put 1e-4 AU as ample for microlens parallax (references.md §12).
//
// Times are Julian dates. The theory wants TDB; UTC, TT or the HJD of the data
// shift the epoch by ≤ 70 s (time scales, ≈ 1e-5 AU of Earth motion) or ≤ 8.3 min
// (HJD − JD, ≤ 1e-4 AU in s(t), far less in the offsets of ParallaxOffsets,
// which remove the position and velocity at the reference epoch).

const deg = math.Pi / 180

// arcsec is one second of arc in radians.
const arcsec = deg / 3600

// vsopTerm is one periodic term A cos(B + C τ) of a VSOP87 series, A in 1e-8
// (rad or AU), B in rad, C in rad per Julian millennium.
type vsopTerm struct{ a, b, c float64 }

// VSOP87D Earth, truncated (see the file comment); lunar terms removed.
var (
	vsopL = [][]vsopTerm{
		{ // L0
			{175347046, 0, 0}, {3341656, 4.6692568, 6283.07585}, {34894, 4.6261, 12566.1517},
			{3497, 2.7441, 5753.3849}, {3418, 2.8289, 3.5231}, {2676, 4.4181, 7860.4194},
			{2343, 6.1352, 3930.2097}, {1324, 0.7425, 11506.7698}, {1273, 2.0371, 529.691},
			{1199, 1.1096, 1577.3435}, {990, 5.233, 5884.927}, {902, 2.045, 26.298},
			{857, 3.508, 398.149}, {780, 1.179, 5223.694}, {753, 2.533, 5507.553},
			{505, 4.583, 18849.228}, {492, 4.205, 775.523}, {357, 2.92, 0.067},
			{317, 5.849, 11790.629}, {284, 1.899, 796.298}, {271, 0.315, 10977.079},
			{243, 0.345, 5486.778}, {206, 4.806, 2544.314}, {205, 1.869, 5573.143},
			{202, 2.458, 6069.777}, {156, 0.833, 213.299}, {132, 3.411, 2942.463},
			{126, 1.083, 20.775}, {115, 0.645, 0.98}, {103, 0.636, 4694.003},
		},
		{ // L1
			{628331966747, 0, 0}, {206059, 2.678235, 6283.07585}, {4303, 2.6351, 12566.1517},
			{425, 1.59, 3.523}, {119, 5.796, 26.298}, {109, 2.966, 1577.344}, {93, 2.59, 18849.23},
			{72, 1.14, 529.69}, {68, 1.87, 398.15}, {67, 4.41, 5507.55}, {59, 2.89, 5223.69},
			{56, 2.17, 155.42}, {45, 0.4, 796.3}, {36, 0.47, 775.52},
		},
		{ // L2
			{52919, 0, 0}, {8720, 1.0721, 6283.0758}, {309, 0.867, 12566.152}, {27, 0.05, 3.52},
			{16, 5.19, 26.3}, {16, 3.68, 155.42}, {10, 0.76, 18849.23},
		},
		{{289, 5.844, 6283.076}, {35, 0, 0}, {17, 5.49, 12566.15}}, // L3
		{{114, 3.142, 0}}, // L4
	}
	vsopB = [][]vsopTerm{
		{{102, 5.422, 5507.553}, {80, 3.88, 5223.69}, {44, 3.7, 2352.87}, {32, 4, 1577.34}}, // B0
		{{9, 3.9, 5507.55}, {6, 1.73, 5223.69}},                                             // B1
	}
	vsopR = [][]vsopTerm{
		{ // R0
			{100013989, 0, 0}, {1670700, 3.0984635, 6283.07585}, {13956, 3.05525, 12566.1517},
			{1628, 1.1739, 5753.3849}, {1576, 2.8469, 7860.4194}, {925, 5.453, 11506.77},
			{542, 4.564, 3930.21}, {472, 3.661, 5884.927}, {346, 0.964, 5507.553},
			{329, 5.9, 5223.694}, {307, 0.299, 5573.143}, {243, 4.273, 11790.629},
			{212, 5.847, 1577.344}, {186, 5.022, 10977.079}, {175, 3.012, 18849.228},
			{110, 5.055, 5486.778}, {98, 0.89, 6069.78}, {86, 5.69, 15720.84},
			{65, 0.27, 17260.15}, {63, 0.92, 529.69}, {49, 3.25, 2544.31},
			{47, 2.58, 775.52}, {45, 5.54, 9437.76}, {43, 6.01, 6275.96},
			{39, 5.36, 4694}, {38, 2.39, 8827.39}, {37, 0.83, 19651.05},
			{37, 4.9, 12139.55}, {36, 1.67, 12036.46}, {35, 1.84, 2942.46},
			{33, 0.24, 7084.9}, {32, 0.18, 5088.63}, {32, 1.78, 398.15},
			{28, 1.21, 6286.6}, {28, 1.9, 6279.55}, {26, 4.59, 10447.39},
		},
		{ // R1
			{103019, 1.10749, 6283.07585}, {1721, 1.0644, 12566.1517}, {702, 3.142, 0},
			{32, 1.02, 18849.23}, {31, 2.84, 5507.55}, {25, 1.32, 5223.69}, {18, 1.42, 1577.34},
			{10, 5.91, 10977.08}, {9, 1.42, 6275.96}, {9, 0.27, 5486.78},
		},
		{{4359, 5.7846, 6283.0758}, {124, 5.579, 12566.152}, {12, 3.14, 0}, {6, 1.87, 5573.14}, {3, 5.47, 18849.23}}, // R2
		{{145, 4.273, 6283.076}, {7, 3.92, 12566.15}},                                                                // R3
		{{4, 2.56, 6283.08}}, // R4
	}
)

// vsopSum evaluates Σₖ τᵏ Σ A cos(B + Cτ) over the series of one coordinate
// directly; the tests compare it with the faster vsopLBR.
func vsopSum(series [][]vsopTerm, tau float64) float64 {
	var sum float64
	pow := 1.0
	for _, terms := range series {
		var s float64
		for _, x := range terms {
			s += x.a * math.Cos(x.b+x.c*tau)
		}
		sum += s * pow
		pow *= tau
	}
	return sum * 1e-8
}

// The tables regrouped for speed: each distinct frequency C gets one Sincos
// per evaluation, and A cos(B + Cτ) = (A cos B) cos Cτ − (A sin B) sin Cτ.
// Frequencies that agree to 0.01 rad per millennium are the same argument of
// the theory printed to different digits; they share the most precise value.
// That moves the phases of some small terms by ≤ 0.005|τ| rad, ≤ 1e-9 rad or AU
// in all for |τ| ≤ 0.1 (1900–2100), far below the truncation error.
type vsopFastTerm struct {
	acb, asb float64 // A cos B, A sin B (1e-8 units)
	freq     int     // index into vsopFreqs
	power    int     // power of τ
}

var (
	vsopFreqs                       []float64
	vsopFastL, vsopFastB, vsopFastR []vsopFastTerm
)

// maxVsopFreqs bounds len(vsopFreqs) so the per-call tables live on the stack.
const maxVsopFreqs = 64

func init() {
	idx := func(c float64) int {
		for i, f := range vsopFreqs {
			if math.Abs(f-c) < 0.01 {
				if len(fmt.Sprint(c)) > len(fmt.Sprint(f)) {
					vsopFreqs[i] = c
				}
				return i
			}
		}
		vsopFreqs = append(vsopFreqs, c)
		return len(vsopFreqs) - 1
	}
	build := func(series [][]vsopTerm) []vsopFastTerm {
		var out []vsopFastTerm
		for k, terms := range series {
			for _, x := range terms {
				sb, cb := math.Sincos(x.b)
				out = append(out, vsopFastTerm{x.a * cb, x.a * sb, idx(x.c), k})
			}
		}
		return out
	}
	vsopFastL, vsopFastB, vsopFastR = build(vsopL), build(vsopB), build(vsopR)
	if len(vsopFreqs) > maxVsopFreqs {
		panic("lens: VSOP87 frequency table too long")
	}
}

// vsopLBR returns the heliocentric ecliptic longitude, latitude (rad) and
// distance (AU) of the Earth–Moon barycentre of the truncated VSOP87 series at
// τ Julian millennia from J2000.0.
func vsopLBR(tau float64) (l, b, r float64) {
	var cs, sn [maxVsopFreqs]float64
	for i, c := range vsopFreqs {
		sn[i], cs[i] = math.Sincos(c * tau)
	}
	pow := [...]float64{1, tau, tau * tau, tau * tau * tau, tau * tau * tau * tau, 0}
	sum := func(terms []vsopFastTerm) float64 {
		var s float64
		for _, x := range terms {
			s += (x.acb*cs[x.freq] - x.asb*sn[x.freq]) * pow[x.power]
		}
		return s * 1e-8
	}
	return sum(vsopFastL), sum(vsopFastB), sum(vsopFastR)
}

// SunPosition returns the geocentric position of the Sun (AU) at Julian date jd,
// in equatorial axes of the J2000 mean equator and equinox (ICRS-aligned): x
// towards the equinox, z towards the north celestial pole. It is minus the
// Earth's heliocentric position. NaN in, NaN out.
func SunPosition(jd float64) [3]float64 {
	t := (jd - 2451545.0) / 36525 // Julian centuries from J2000.0
	tau := t / 10                 // Julian millennia, the VSOP87 time argument
	// Heliocentric Earth–Moon barycentre (VSOP87 without its lunar terms),
	// turned round into the geocentric Sun: longitude + π, latitude −B.
	l, b, r := vsopLBR(tau)
	lon, lat := l+math.Pi, -b
	sl, cl := math.Sincos(math.Mod(lon, 2*math.Pi))
	sb, cb := math.Sincos(lat)
	xe, ye, ze := r*cb*cl, r*cb*sl, r*sb
	// The Earth's offset from the barycentre: the Moon's geocentric position
	// times m_Moon/(m_Earth + m_Moon) moves the Sun as seen from the Earth by +.
	mx, my, mz := moonPosition(t)
	xe, ye, ze = xe+mx*moonFraction, ye+my*moonFraction, ze+mz*moonFraction

	// Ecliptic → mean equator of date, mean obliquity of Meeus eq. 22.2 (IAU 1976).
	eps := (84381.448 - t*(46.8150+t*(0.00059-t*0.001813))) * arcsec
	se, ce := math.Sincos(eps)
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
// tables 47.A–47.B; coefficients transcribed from memory). The omitted terms
// amount to a few tenths of a degree (estimate), ≲ 2e-7 AU once scaled by
// moonFraction; TestSunPositionERFA bounds the whole ephemeris.
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
