package fit

import (
	"context"
	"fmt"
	"math"

	"lensbook/lens"
)

// The ecliptic degeneracy of annual parallax.
//
// For an event on the ecliptic the Sun's projected offset Δs(t) of the
// geocentric formalism (Gould 2004, ApJ 606, 319) lies along one line on the
// sky, the direction ê of increasing ecliptic longitude: both the Sun and the
// line of sight lie in the ecliptic plane, so the projection of the Sun's
// position on the sky keeps no component across it. Let R be the reflection
// of the sky about ê. Then RΔs = Δs, and for the reflected parallax
// πE' = R πE:
//
//	δτ' = RπE·Δs = πE·RΔs = δτ,     δβ' = RπE × Δs = det(R) πE × RΔs = −δβ,
//
// so with u0' = −u0 the trajectory coordinates become (τ, −β). In the lens
// frame of package lens, ζ = c + e^{iα}(τ + iβ); taking α' = −α gives
// ζ' = c + e^{−iα}(τ − iβ) = conj(ζ) (c is real), and the binary lens is
// symmetric about its axis, so the magnification is unchanged at every epoch.
// Linear orbital motion keeps this when dα/dt' = −dα/dt (s(t) is unchanged).
// In our (N, E) frame, with ê = (êN, êE), the map is
//
//	u0 → −u0, α → −α, dα/dt → −dα/dt, πE → 2(πE·ê)ê − πE,
//
// which is the textbook (πE,N → −πE,N) when ê points east; at bulge fields ê
// is inclined to east by up to ~6°, so we reflect about ê itself. Off the
// ecliptic Δs has a small component across ê (∝ sin of the ecliptic latitude)
// and the map is an approximate degeneracy, the one discussed by Jiang et al.
// (2004, ApJ 617, 1307) and Skowron et al. (2011, ApJ 738, 87) (both from
// memory); the partner's start is therefore refined. Even on the ecliptic the
// real offsets are not exactly along ê: the geocentric frame moves with the
// Earth's velocity at t0,par, whose monthly lunar wobble has a ~6e-7 AU/day
// component across the ecliptic, so Δs gains a component across ê growing
// linearly with t − t0,par (1.3e-4 AU after 300 days; measured in
// TestEclipticPartnerExactAlongEcliptic: light curves then differ by ≤ 1e-4
// before refinement, round-off with Δs projected on ê).
//
// The ecliptic used is the mean plane of the Earth's orbit around the epoch,
// measured from the same solar ephemeris the offsets use (EclipticPole),
// because the J2000 ecliptic drifts from the ecliptic of date by ~47″ per
// century (12″ by 2026, enough to spoil the exact symmetry at the 1e-4 level).

// obliquityJ2000 is the mean obliquity of the J2000 ecliptic, 84381.406″
// (IAU 2006; /work/shared/references.md §8 uses the same value).
const obliquityJ2000 = 84381.406 / 3600 * math.Pi / 180

// EclipticPoleJ2000 is the pole of the J2000 mean ecliptic in ICRS axes,
// (0, −sin ε0, cos ε0).
func EclipticPoleJ2000() [3]float64 {
	s, c := math.Sincos(obliquityJ2000)
	return [3]float64{0, -s, c}
}

// EclipticPole returns the unit normal of the Earth's mean orbital plane over
// the Julian year centred on jd (ICRS axes, in the sense of the orbital
// angular momentum): the sum of p(t_i) × p(t_{i+1}) over daily positions of the
// Sun relative to the Earth (lens.SunPosition), which averages the monthly
// lunar wobble of the Earth away. Cost: 367 ephemeris evaluations (~2 ms).
func EclipticPole(jd float64) [3]float64 {
	const n = 366
	var h [3]float64
	prev := lens.SunPosition(jd - julianYearD/2)
	for i := 1; i <= n; i++ {
		p := lens.SunPosition(jd - julianYearD/2 + float64(i)*julianYearD/n)
		c := cross3(prev, p)
		h[0] += c[0]
		h[1] += c[1]
		h[2] += c[2]
		prev = p
	}
	return unit3(h)
}

// EclipticOf returns the ecliptic longitude and latitude (radians) of c with
// respect to the plane with the given pole (from EclipticPole or
// EclipticPoleJ2000); longitude is counted from the ascending node of the
// plane on the ICRS equator (the equinox) towards the pole's right-hand sense.
func EclipticOf(c Coords, pole [3]float64) (lon, lat float64) {
	n := direction(c)
	x, y := eclipticAxes(pole)
	lat = math.Asin(math.Max(-1, math.Min(1, dot3(n, pole))))
	lon = math.Atan2(dot3(n, y), dot3(n, x))
	if lon < 0 {
		lon += 2 * math.Pi
	}
	return lon, lat
}

// CoordsFromEcliptic is the inverse of EclipticOf.
func CoordsFromEcliptic(lon, lat float64, pole [3]float64) Coords {
	x, y := eclipticAxes(pole)
	cl, sl := math.Cos(lat), math.Sin(lat)
	var n [3]float64
	for i := range n {
		n[i] = cl*math.Cos(lon)*x[i] + cl*math.Sin(lon)*y[i] + sl*pole[i]
	}
	ra := math.Atan2(n[1], n[0]) * 180 / math.Pi
	if ra < 0 {
		ra += 360
	}
	if ra >= 360 {
		ra -= 360
	}
	dec := math.Asin(math.Max(-1, math.Min(1, n[2]))) * 180 / math.Pi
	return Coords{RA: ra, Dec: dec}
}

// EclipticDirection returns the unit vector ê of increasing ecliptic longitude
// at c, in the (N, E) sky components of the parallax offsets (lens.Offset).
func EclipticDirection(c Coords, pole [3]float64) lens.Offset {
	n := direction(c)
	north, east := skyAxes(c)
	e := unit3(cross3(pole, n))
	return lens.Offset{N: dot3(e, north), E: dot3(e, east)}
}

// EclipticPartnerStart returns the ecliptic-degeneracy partner of p for an
// event at c with t0,par = tref: u0, α and dα/dt change sign and πE is
// reflected about the ecliptic direction at c (see the file comment). It is
// exact for an event on the ecliptic and a starting point to refine elsewhere.
func EclipticPartnerStart(p lens.Params, c Coords, tref float64) (lens.Params, error) {
	if err := c.Validate(); err != nil {
		return p, err
	}
	if !isFinite(tref) {
		return p, fmt.Errorf("fit: ecliptic partner: t0,par = %v is not finite", tref)
	}
	e := EclipticDirection(c, EclipticPole(tref))
	q := p
	q.U0 = -p.U0
	q.Alpha = WrapAlpha(-p.Alpha)
	q.DAlphaDt = -p.DAlphaDt
	d := p.PiEN*e.N + p.PiEE*e.E
	q.PiEN = 2*d*e.N - p.PiEN
	q.PiEE = 2*d*e.E - p.PiEE
	return q, nil
}

// direction is the ICRS unit vector towards c.
func direction(c Coords) [3]float64 {
	ra, dec := c.Radians()
	sa, ca := math.Sincos(ra)
	sd, cd := math.Sincos(dec)
	return [3]float64{cd * ca, cd * sa, sd}
}

// skyAxes returns the unit vectors towards north and east on the sky at c
// (/work/shared/references.md §8; the same as lens.ParallaxOffsets uses).
func skyAxes(c Coords) (north, east [3]float64) {
	ra, dec := c.Radians()
	sa, ca := math.Sincos(ra)
	sd, cd := math.Sincos(dec)
	return [3]float64{-sd * ca, -sd * sa, cd}, [3]float64{-sa, ca, 0}
}

// eclipticAxes returns the equinox direction x (node of the plane on the
// equator) and y = pole × x.
func eclipticAxes(pole [3]float64) (x, y [3]float64) {
	x = unit3(cross3([3]float64{0, 0, 1}, pole))
	return x, cross3(pole, x)
}

func cross3(a, b [3]float64) [3]float64 {
	return [3]float64{a[1]*b[2] - a[2]*b[1], a[2]*b[0] - a[0]*b[2], a[0]*b[1] - a[1]*b[0]}
}

func dot3(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }

func unit3(a [3]float64) [3]float64 {
	n := math.Sqrt(dot3(a, a))
	return [3]float64{a[0] / n, a[1] / n, a[2] / n}
}

// eclipticPartner refines the ecliptic partner of sol when sol has parallax
// and the event has coordinates; nil otherwise. The partner is fitted with the
// same t0,par as sol (the likelihood's, fixed).
func eclipticPartner(ctx context.Context, l *Likelihood, sol *Solution, set RefineSettings) (*Partner, error) {
	ev := l.Event()
	if !HasParallax(&sol.Params) || ev.Coords == nil {
		return nil, nil
	}
	tref := l.TRef()
	if tref == 0 {
		tref = sol.TRef
		if tref == 0 {
			tref = ev.TRef
		}
		if err := l.SetTRef(tref); err != nil {
			return nil, fmt.Errorf("fit: ecliptic partner: %w", err)
		}
	} else if sol.TRef != 0 && sol.TRef != tref {
		return nil, fmt.Errorf("fit: ecliptic partner: solution was fitted with t0,par = %v, the likelihood uses %v", sol.TRef, tref)
	}
	st, err := EclipticPartnerStart(sol.Params, *ev.Coords, tref)
	if err != nil {
		return nil, err
	}
	ps, err := Refine(ctx, l, st, set)
	if ps == nil {
		return nil, err
	}
	ps.Label = partnerLabel(sol.Label, Ecliptic, 0)
	return &Partner{Kind: Ecliptic, Solution: ps, DeltaChi2: ps.Chi2 - sol.Chi2}, nil
}
