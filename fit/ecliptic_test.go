package fit

import (
	"math"
	"testing"

	"lensbook/lens"
)

const arcsecRad = math.Pi / 180 / 3600

// Reference: /work/shared/references.md §8 [G04] tables (pyerfa epv00 2.0.0.1):
// ERFA Earth heliocentric positions (ICRS, AU) and their J2000-ecliptic
// longitude and latitude (obliquity 84381.406″).
var erfaEarth = []struct {
	jd       float64
	x        [3]float64
	lon, lat float64 // degrees
}{
	{2461119.5, [3]float64{-0.995603177, +0.015539419, +0.006740468}, 179.025313, +0.000175},
	{2461212.5, [3]float64{-0.012440868, -0.932274867, -0.404123234}, 269.298518, +0.003474},
	{2461306.5, [3]float64{+1.003556606, -0.006016194, -0.002613777}, 359.625508, -0.000285},
	{2461376.5, [3]float64{+0.346417755, +0.847021459, +0.367165076}, 69.431635, -0.003383},
}

func coordsOfVector(x [3]float64) Coords {
	ra := math.Atan2(x[1], x[0]) * 180 / math.Pi
	if ra < 0 {
		ra += 360
	}
	return Coords{RA: ra, Dec: math.Asin(x[2]/math.Sqrt(dot3(x, x))) * 180 / math.Pi}
}

// EclipticOf with the J2000 pole reproduces the ERFA J2000-ecliptic longitudes
// and latitudes of references.md §8 to the 1e-6° they are quoted to.
func TestEclipticOfJ2000Reference(t *testing.T) {
	for _, r := range erfaEarth {
		lon, lat := EclipticOf(coordsOfVector(r.x), EclipticPoleJ2000())
		if d := math.Abs(lon*180/math.Pi - r.lon); d > 2e-6 {
			t.Errorf("JD %v: longitude %.7f°, want %.6f° (references.md §8)", r.jd, lon*180/math.Pi, r.lon)
		}
		if d := math.Abs(lat*180/math.Pi - r.lat); d > 2e-6 {
			t.Errorf("JD %v: latitude %.7f°, want %.6f° (references.md §8)", r.jd, lat*180/math.Pi, r.lat)
		}
		back := CoordsFromEcliptic(lon, lat, EclipticPoleJ2000())
		c := coordsOfVector(r.x)
		if math.Abs(back.RA-c.RA) > 1e-9 || math.Abs(back.Dec-c.Dec) > 1e-9 {
			t.Errorf("round trip %+v → %+v", c, back)
		}
	}
}

// The ephemeris pole at J2000.0 is the J2000 ecliptic pole: RA 270°, Dec
// 90° − ε0 with ε0 = 84381.406″ (references.md §8), within 1″ (frame bias
// 0.02″, truncated ephemeris and residual lunar wobble well below).
func TestEclipticPoleJ2000(t *testing.T) {
	p := EclipticPole(2451545.0)
	q := EclipticPoleJ2000()
	ang := math.Acos(math.Min(1, dot3(p, q))) / arcsecRad
	if ang > 1 {
		t.Errorf("ephemeris pole at J2000.0 is %.3f″ from the J2000 ecliptic pole, want < 1″", ang)
	}
	t.Logf("pole at J2000.0: %.3f″ from (0, −sin ε0, cos ε0)", ang)
}

// In 2026 the ERFA Earth positions of references.md §8 lie up to 12.5″ off the
// J2000 ecliptic (their latitude column) but within 1″ of the mean orbital
// plane of date that EclipticPole measures; this is why the partner uses it.
func TestEclipticPoleOfDate(t *testing.T) {
	pole := EclipticPole(2461250)
	worstJ2000 := 0.0
	for _, r := range erfaEarth {
		_, lat := EclipticOf(coordsOfVector(r.x), pole)
		if math.Abs(lat)/arcsecRad > 1 {
			t.Errorf("JD %v: ERFA Earth %.3f″ off the plane of date, want < 1″", r.jd, lat/arcsecRad)
		}
		worstJ2000 = math.Max(worstJ2000, math.Abs(r.lat)*3600)
	}
	if worstJ2000 < 10 {
		t.Fatalf("reference latitudes too small (%.1f″) for the test to tell the planes apart", worstJ2000)
	}
}

// At the equinox (RA 0, Dec 0) the ecliptic crosses the equator at the
// obliquity ε0, rising towards north as longitude grows eastwards, so
// ê = (sin ε0, cos ε0) in (N, E) (spherical geometry); at a bulge field ê is a
// unit vector within 7° of east.
func TestEclipticDirection(t *testing.T) {
	pole := EclipticPoleJ2000()
	e := EclipticDirection(Coords{RA: 0, Dec: 0}, pole)
	wantN, wantE := math.Sin(obliquityJ2000), math.Cos(obliquityJ2000)
	if math.Abs(e.N-wantN) > 1e-12 || math.Abs(e.E-wantE) > 1e-12 {
		t.Errorf("ê at the equinox = %+v, want (sin ε0, cos ε0) = (%v, %v)", e, wantN, wantE)
	}
	e = EclipticDirection(Coords{RA: 270, Dec: -30}, pole)
	if math.Abs(math.Hypot(e.N, e.E)-1) > 1e-12 || e.E < math.Cos(7*math.Pi/180) {
		t.Errorf("ê at (270°, −30°) = %+v, want a unit vector within 7° of east", e)
	}
}

// The sign mapping against our frame convention: with offsets Δs(t) lying
// exactly along the ecliptic direction ê (what the geometry gives for an
// event on the ecliptic) the partner's light curve is the original's to
// round-off, for a pure-parallax single lens and for a binary lens with
// parallax and orbital motion. Offsets with a component across ê (an event
// 6° off the ecliptic) break it, so the test can fail.
func TestEclipticPartnerExactAlongEcliptic(t *testing.T) {
	tref := 2460800.0
	pole := EclipticPole(tref)
	on := CoordsFromEcliptic(268*math.Pi/180, 0, pole)
	offEcl := CoordsFromEcliptic(268*math.Pi/180, -6*math.Pi/180, pole)
	times := make([]float64, 400)
	for i := range times {
		times[i] = tref - 300 + 1.5*float64(i)
	}
	offsets := func(c Coords, project bool) []lens.Offset {
		ra, dec := c.Radians()
		o := make([]lens.Offset, len(times))
		lens.ParallaxOffsets(o, times, ra, dec, tref)
		if project {
			e := EclipticDirection(c, pole)
			for i := range o {
				d := o[i].N*e.N + o[i].E*e.E
				o[i] = lens.Offset{N: d * e.N, E: d * e.E}
			}
		}
		return o
	}
	models := []lens.Params{
		{T0: tref + 3, U0: 0.12, TE: 100, PiEN: 0.2, PiEE: -0.1},
		{T0: tref + 3, U0: 0.05, TE: 60, S: 1.3, Q: 0.3, Alpha: 0.7, PiEN: 0.3, PiEE: 0.15, DsDt: 0.2, DAlphaDt: 0.4},
	}
	for _, p := range models {
		diff := func(c Coords, off []lens.Offset) float64 {
			q, err := EclipticPartnerStart(p, c, tref)
			if err != nil {
				t.Fatal(err)
			}
			a, b := make([]float64, len(times)), make([]float64, len(times))
			m1 := lens.Model{Params: p, Ref: lens.CentralCaustic, TRef: tref}
			m2 := lens.Model{Params: q, Ref: lens.CentralCaustic, TRef: tref}
			if err := lens.LightCurve(a, &m1, times, off); err != nil {
				t.Fatal(err)
			}
			if err := lens.LightCurve(b, &m2, times, off); err != nil {
				t.Fatal(err)
			}
			worst := 0.0
			for i := range a {
				worst = math.Max(worst, math.Abs(b[i]/a[i]-1))
			}
			return worst
		}
		exact, real, away := diff(on, offsets(on, true)), diff(on, offsets(on, false)), diff(offEcl, offsets(offEcl, false))
		t.Logf("q=%v: max |A'/A − 1|: Δs along ê %.1e; real offsets on the ecliptic %.1e; 6° off %.1e", p.Q, exact, real, away)
		if exact > 1e-9 {
			t.Errorf("q=%v: partner with Δs ∥ ê differs by %.2e, want round-off", p.Q, exact)
		}
		if away < 1e-3 {
			t.Errorf("q=%v: partner 6° off the ecliptic differs by only %.2e: the test cannot tell", p.Q, away)
		}
	}
}

// The map is an involution: applying it twice returns the model.
func TestEclipticPartnerInvolution(t *testing.T) {
	c := Coords{RA: 269.76, Dec: -29.05}
	p := lens.Params{T0: 2460800, U0: 0.1, TE: 80, S: 0.9, Q: 0.01, Alpha: 2, PiEN: 0.25, PiEE: -0.4, DAlphaDt: 0.3}
	q, _ := EclipticPartnerStart(p, c, p.T0)
	r, _ := EclipticPartnerStart(q, c, p.T0)
	if math.Abs(r.PiEN-p.PiEN) > 1e-14 || math.Abs(r.PiEE-p.PiEE) > 1e-14 || r.U0 != p.U0 ||
		math.Abs(WrapAlpha(r.Alpha-p.Alpha+1)-1) > 1e-14 || r.DAlphaDt != p.DAlphaDt {
		t.Errorf("twice: %+v, want %+v", r, p)
	}
	if math.Abs(math.Hypot(q.PiEN, q.PiEE)-math.Hypot(p.PiEN, p.PiEE)) > 1e-14 {
		t.Errorf("|πE| changed: %v → %v", math.Hypot(p.PiEN, p.PiEE), math.Hypot(q.PiEN, q.PiEE))
	}
	if _, err := EclipticPartnerStart(p, Coords{RA: 400}, p.T0); err == nil {
		t.Error("out-of-range coordinates accepted")
	}
}
