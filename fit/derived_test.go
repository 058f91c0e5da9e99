package fit

import (
	"bytes"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/floats/scalar"
)

func expectRel(t *testing.T, name string, got, want, tol float64) {
	t.Helper()
	if !scalar.EqualWithinRel(got, want, tol) {
		t.Errorf("%s = %.10g, want %.10g (rel tol %g)", name, got, want, tol)
	}
}

func TestKappa(t *testing.T) {
	// references.md §10: κ = 4G/(c² AU) = 8.143853 mas/M☉ (7 digits given).
	expectRel(t, "κ", Kappa, 8.143853, 1e-7)
}

// TestWorkedExample checks the formulas against the worked example of
// references.md §10: θ* = 6 µas, ρ = 0.005, tE = 30 d, πE = 0.1, D_S = 8 kpc.
func TestWorkedExample(t *testing.T) {
	thE := ThetaE(6.0/1000, 0.005)
	expectRel(t, "θE (mas)", thE, 1.2, 1e-14)
	expectRel(t, "μrel (mas/yr)", MuRel(thE, 30), 14.610, 1e-14)
	expectRel(t, "M (M☉)", LensMass(thE, 0.1), 1.47350, 3.4e-6) // 6 digits given
	expectRel(t, "πrel (mas)", PiRel(thE, 0.1), 0.12, 1e-14)
	expectRel(t, "D_L (kpc)", LensDistance(0.12, 8), 4.08163, 1.3e-6) // 6 digits given

	// The same numbers through the posterior machinery with exact inputs.
	n := 5
	in := PhysicalInput{TE: slices.Repeat([]float64{30}, n), Rho: slices.Repeat([]float64{0.005}, n),
		PiEN: slices.Repeat([]float64{0.06}, n), PiEE: slices.Repeat([]float64{0.08}, n),
		S: slices.Repeat([]float64{1.1}, n), Q: slices.Repeat([]float64{0.001}, n)}
	p, err := DeriveQuantities(in, PhysicalSettings{ThetaStar: 6, DS: 8})
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name      string
		want, tol float64
	}{
		{"thetaE", 1.2, 1e-14}, {"muRel", 14.610, 1e-14}, {"M", 1.47350, 3.4e-6}, {"piRel", 0.12, 1e-14},
		{"DL", 4.08163, 1.3e-6},
		// Derived from the rows above with the stated conventions:
		{"M1", 1.47350 / 1.001, 3.4e-6}, {"M2", 1.47350 * 0.001 / 1.001, 3.4e-6},
		{"aPerp", 1.1 * 1.2 * 4.08163, 1.3e-6},
	} {
		q := p.Get(c.name)
		if q == nil {
			t.Fatalf("no quantity %q", c.name)
		}
		expectRel(t, c.name+" median", q.Median, c.want, c.tol)
		if q.Lower != q.Median || q.Upper != q.Median {
			t.Errorf("%s: exact inputs gave a spread [%v, %v]", c.name, q.Lower, q.Upper)
		}
	}
	if len(p.Assumptions) < 4 || !strings.Contains(strings.Join(p.Assumptions, "\n"), "M2 = qM/(1+q)") {
		t.Errorf("assumptions do not state the mass split: %q", p.Assumptions)
	}
}

func TestDerivedPropagation(t *testing.T) {
	// ρ log-normal around 0.005: θE = θ*/ρ is monotone in ρ, so with exact θ*
	// the median of θE is θ*/median(ρ) exactly for an odd sample count (both
	// are order statistics), and the 16/84 % quantiles swap.
	r := rand.New(rand.NewPCG(1, 1))
	n := 10001
	rho := make([]float64, n)
	for i := range rho {
		rho[i] = 0.005 * math.Exp(0.1*r.NormFloat64())
	}
	p, err := DeriveQuantities(PhysicalInput{TE: slices.Repeat([]float64{30}, n), Rho: rho}, PhysicalSettings{ThetaStar: 6})
	if err != nil {
		t.Fatal(err)
	}
	sorted := slices.Sorted(slices.Values(rho))
	thE := p.Get("thetaE")
	expectRel(t, "median θE", thE.Median, 0.006/sortedQuantile(sorted, 0.5), 1e-15)
	if p.Get("M") != nil {
		t.Error("mass computed without parallax")
	}
	// θ* uncertainty widens the θE interval: relative widths add in quadrature
	// for log-normal-like spreads (0.1 from ρ, 0.05 from θ*), within 5 %.
	p2, err := DeriveQuantities(PhysicalInput{TE: slices.Repeat([]float64{30}, n), Rho: rho}, PhysicalSettings{ThetaStar: 6, ThetaStarErr: 0.3, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	q := p2.Get("thetaE")
	w := math.Log(q.Upper/q.Lower) / 2
	expectRel(t, "θE log half-width", w, math.Hypot(0.1, 0.05), 0.05)
}

func TestKervella(t *testing.T) {
	// references.md §10 [K04] sanity check: the Sun (V−K ≈ 1.56, M_K ≈ 3.27,
	// from memory) at 10 pc gives θ_LD = 0.957 mas (3 digits given).
	expectRel(t, "θ_LD", KervellaThetaLD(1.56, 3.27), 0.957, 6e-4)
	in := PhysicalInput{TE: []float64{30, 30, 30}, Rho: []float64{0.005, 0.005, 0.005}}
	p, err := DeriveQuantities(in, PhysicalSettings{CSB: &ColourSB{VK0: 1.56, K0: 3.27, Class: ClassGiant}})
	if err != nil {
		t.Fatal(err)
	}
	// θ* = θ_LD/2 in µas, within the drawn 1 % scatter (3 samples, 4σ).
	expectRel(t, "θ* (µas)", p.Get("thetaStar").Median, 0.957e3/2, 0.04)
	if len(p.Warnings) == 0 || !strings.Contains(p.Warnings[0], "giant") {
		t.Errorf("no calibration warning for a giant source: %q", p.Warnings)
	}
}

func TestDerivedBadInput(t *testing.T) {
	ok := PhysicalInput{TE: []float64{30}, Rho: []float64{0.01}}
	for _, c := range []struct {
		name string
		in   PhysicalInput
		set  PhysicalSettings
		want string
	}{
		{"no theta", ok, PhysicalSettings{}, "either θ*"},
		{"both theta", ok, PhysicalSettings{ThetaStar: 1, CSB: &ColourSB{}}, "either θ*"},
		{"length", PhysicalInput{TE: []float64{30, 1}, Rho: []float64{0.01}}, PhysicalSettings{ThetaStar: 1}, "tE"},
		{"half parallax", PhysicalInput{TE: []float64{30}, Rho: []float64{0.01}, PiEN: []float64{0.1}}, PhysicalSettings{ThetaStar: 1}, "both"},
		{"negative DS", ok, PhysicalSettings{ThetaStar: 1, DS: -1}, "D_S"},
	} {
		if _, err := DeriveQuantities(c.in, c.set); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want one mentioning %q", c.name, err, c.want)
		}
	}
}

func TestPhysicalTableECSV(t *testing.T) {
	n := 3
	in := PhysicalInput{TE: slices.Repeat([]float64{30}, n), Rho: slices.Repeat([]float64{0.005}, n),
		PiEN: slices.Repeat([]float64{0.1}, n), PiEE: slices.Repeat([]float64{0}, n)}
	p, err := DeriveQuantities(in, PhysicalSettings{ThetaStar: 6, DS: 8})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := WriteECSV(&buf, PhysicalTable(testInfo(), p)); err != nil {
		t.Fatal(err)
	}
	tab, err := ReadECSV(&buf)
	if err != nil {
		t.Fatal(err)
	}
	var assumptions []string
	for _, m := range tab.Meta {
		if strings.HasPrefix(m.Key, "assumption_") {
			assumptions = append(assumptions, m.Value)
		}
	}
	if !slices.Equal(assumptions, p.Assumptions) {
		t.Errorf("assumptions read back %q, want %q", assumptions, p.Assumptions)
	}
	if tab.Columns[0].String[1] != "thetaE" || !sameBits(tab.Columns[2].Float[1], p.Get("thetaE").Median) {
		t.Errorf("table %+v", tab.Columns[:3])
	}
}
