package lens

import (
	"bufio"
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"
)

// erfaRow is one epoch of testdata/ephemeris/*.csv: the Earth's heliocentric
// position (AU) and velocity (AU/day) in ICRS axes from pyerfa 2.0.0.1
// (ERFA 2.0.0) epv00, written by testdata/gen/ephemeris/gen.py.
type erfaRow struct {
	jd       float64
	pos, vel [3]float64
}

// readErfa reads a reference table, failing the test with file:line on any
// malformed row.
func readErfa(t *testing.T, name string) []erfaRow {
	t.Helper()
	path := "../testdata/ephemeris/" + name
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var rows []erfaRow
	sc := bufio.NewScanner(f)
	for line := 1; sc.Scan(); line++ {
		text := sc.Text()
		if text == "" || strings.HasPrefix(text, "#") || strings.HasPrefix(text, "jd") {
			continue
		}
		fields := strings.Split(text, ",")
		if len(fields) != 7 {
			t.Fatalf("%s:%d: %d fields, want 7", path, line, len(fields))
		}
		var v [7]float64
		for i, s := range fields {
			if v[i], err = strconv.ParseFloat(s, 64); err != nil {
				t.Fatalf("%s:%d: field %d: %v", path, line, i+1, err)
			}
		}
		rows = append(rows, erfaRow{v[0], [3]float64{v[1], v[2], v[3]}, [3]float64{v[4], v[5], v[6]}})
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	if len(rows) == 0 {
		t.Fatalf("%s: no rows", path)
	}
	return rows
}

func dist3(a, b [3]float64) float64 {
	return math.Sqrt((a[0]-b[0])*(a[0]-b[0]) + (a[1]-b[1])*(a[1]-b[1]) + (a[2]-b[2])*(a[2]-b[2]))
}

func neg3(a [3]float64) [3]float64 { return [3]float64{-a[0], -a[1], -a[2]} }

// TestSunPositionERFA compares the truncated-VSOP87 Sun with ERFA epv00 at 201
// epochs over 2000–2040. Budget: 2e-5 AU in position (measured 9.3e-6 AU;
// references.md §12 calls 1e-4 AU ample for parallax) and 5e-7 AU/day in
// velocity (measured 1.8e-7 AU/day, 1e-5 of the orbital speed).
func TestSunPositionERFA(t *testing.T) {
	var worstP, worstV float64
	for _, r := range readErfa(t, "earth_erfa.csv") {
		dp := dist3(SunPosition(r.jd), neg3(r.pos))
		dv := dist3(SunVelocity(r.jd), neg3(r.vel))
		worstP, worstV = math.Max(worstP, dp), math.Max(worstV, dv)
		if dp > 2e-5 || dv > 5e-7 || math.IsNaN(dp+dv) {
			t.Errorf("JD %.1f: position off by %.2g AU, velocity by %.2g AU/day", r.jd, dp, dv)
		}
	}
	t.Logf("2000–2040 vs ERFA epv00: max position error %.3g AU, max velocity error %.3g AU/day", worstP, worstV)
}

// Reference values of references.md §8 (pyerfa epv00 2.0.0.1), event at
// α = 270°, δ = −30°: the Sun-from-Earth projection (N, E) in AU and its rate
// in AU/day, and the Earth's heliocentric J2000 ecliptic longitude (degrees,
// obliquity 84381.406″).
var sunSkyTable = []struct {
	date       string
	jd         float64
	n, e       float64
	dn, de     float64
	earthLonJ2 float64
}{
	{"2026-03-20", 2461119.5, +0.001932293, +0.995603177, -0.001974086, +0.000570517, 179.025313},
	{"2026-06-21", 2461212.5, -0.116156446, +0.012440868, -0.000031226, -0.016925975, 269.298518},
	{"2026-09-23", 2461306.5, -0.000744500, -1.003556606, +0.001959348, +0.000170852, 359.625508},
	{"2026-12-02", 2461376.5, +0.105536446, -0.346417755, +0.000683609, +0.016385809, 69.431635},
}

func TestSunSkyReferences(t *testing.T) {
	ra, dec := 270*deg, -30*deg
	const eps2000 = 84381.406 * arcsec
	for _, c := range sunSkyTable {
		s, sdot := SunSky(c.jd, ra, dec)
		// Budgets as in TestSunPositionERFA.
		if d := math.Hypot(s.N-c.n, s.E-c.e); d > 2e-5 {
			t.Errorf("%s: s = (%.6f, %.6f) AU, ERFA (%.6f, %.6f): off by %.2g", c.date, s.N, s.E, c.n, c.e, d)
		}
		if d := math.Hypot(sdot.N-c.dn, sdot.E-c.de); d > 5e-7 {
			t.Errorf("%s: ṡ = (%.7f, %.7f) AU/day, ERFA (%.7f, %.7f): off by %.2g", c.date, sdot.N, sdot.E, c.dn, c.de, d)
		}
		// Earth's heliocentric longitude on the J2000 ecliptic, from −SunPosition.
		p := neg3(SunPosition(c.jd))
		y := p[1]*math.Cos(eps2000) + p[2]*math.Sin(eps2000)
		lon := math.Mod(math.Atan2(y, p[0])/deg+360, 360)
		if d := math.Abs(lon - c.earthLonJ2); d > 0.001 {
			t.Errorf("%s: Earth J2000 ecliptic longitude %.6f°, ERFA %.6f° (budget 0.001° ≈ 1.7e-5 AU)", c.date, lon, c.earthLonJ2)
		}
	}
}

// TestSunSkyBasis checks that (n̂_N, n̂_E, n̂) is orthonormal with the sky's
// orientation, and that projecting the Sun on it loses no length.
func TestSunSkyBasis(t *testing.T) {
	for _, rd := range [][2]float64{{0, 0}, {1, 0.3}, {4.7, -0.5}, {6, 1.2}} {
		n, e := skyBasis(rd[0], rd[1])
		sa, ca := math.Sincos(rd[0])
		sd, cd := math.Sincos(rd[1])
		los := [3]float64{cd * ca, cd * sa, sd}
		for _, pair := range [][2][3]float64{{n, e}, {n, los}, {e, los}} {
			if d := dot3(pair[0], pair[1]); math.Abs(d) > 1e-15 {
				t.Errorf("basis not orthogonal at %v: %g", rd, d)
			}
		}
		// Right-handed (N, E, line of sight) as seen from outside the sphere is
		// left-handed on the sky: n̂_N × n̂_E = −n̂ (east is to the left of north
		// when looking out, the usual sky orientation).
		cx := [3]float64{n[1]*e[2] - n[2]*e[1], n[2]*e[0] - n[0]*e[2], n[0]*e[1] - n[1]*e[0]}
		if dist3(cx, neg3(los)) > 1e-15 {
			t.Errorf("n̂_N × n̂_E = %v, want −n̂ = %v", cx, neg3(los))
		}
		jd := 2455000.5 + 100*rd[0]
		p := SunPosition(jd)
		s, _ := SunSky(jd, rd[0], rd[1])
		r := math.Sqrt(dot3(p, p))
		if got := math.Sqrt(s.N*s.N + s.E*s.E + dot3(p, los)*dot3(p, los)); math.Abs(got-r) > 1e-15 {
			t.Errorf("projection loses length: %g vs %g", got, r)
		}
	}
}

func TestSunSpecialCases(t *testing.T) {
	p := SunPosition(math.NaN())
	s, v := SunSky(2461000.5, math.NaN(), 0)
	for _, x := range []float64{p[0], p[1], p[2], s.N, s.E, v.N, v.E} {
		if !math.IsNaN(x) {
			t.Errorf("NaN input gave %v", x)
		}
	}
	// Distance within the Earth's orbit range, 0.983–1.017 AU (perihelion and
	// aphelion distances, common practice), over a century of daily epochs.
	for jd := 2440000.5; jd < 2476000.5; jd += 1.37 {
		p := SunPosition(jd)
		if r := math.Sqrt(dot3(p, p)); r < 0.983 || r > 1.0175 {
			t.Fatalf("JD %v: |s| = %v AU", jd, r)
		}
	}
}

func ExampleSunSky() {
	// Event towards the Galactic bulge, α = 270°, δ = −30°, on 2026-06-21 0h.
	s, sdot := SunSky(2461212.5, 270*math.Pi/180, -30*math.Pi/180)
	fmt.Printf("s = (%.3f, %.3f) AU, ds/dt = (%.1e, %.4f) AU/day\n", s.N, s.E, sdot.N, sdot.E)
	// Output:
	// s = (-0.116, 0.012) AU, ds/dt = (-3.1e-05, -0.0169) AU/day
}

// TestVsopGrouping: the frequency-grouped evaluation equals the direct sum of
// the VSOP87 terms (to the merging of equal arguments printed to different
// digits: Σ A·ΔC·|τ| ≈ 1e-9 rad or AU over 1900–2100).
func TestVsopGrouping(t *testing.T) {
	for tau := -0.1; tau <= 0.1; tau += 0.0013 {
		l, b, r := vsopLBR(tau)
		if d := math.Max(math.Abs(l-vsopSum(vsopL, tau)), math.Max(math.Abs(b-vsopSum(vsopB, tau)), math.Abs(r-vsopSum(vsopR, tau)))); d > 2e-9 {
			t.Errorf("τ=%g: grouped and direct VSOP87 sums differ by %g", tau, d)
		}
	}
}
