package fit

import (
	"math"
	"strings"
	"testing"

	"lensbook/lens"
)

// kepler builds the microlensing parameters of a physical binary: total mass
// M (M☉), lens and source distances (kpc), true separation a (AU) seen
// face-on, and a relative velocity with radial and tangential sky components
// vr, vt (AU/yr). θE² = κ M πrel (references.md §10).
func kepler(M, dL, dS, a, vr, vt float64) (p lens.Params, thetaE, piS float64) {
	piRel := 1/dL - 1/dS
	thetaE = math.Sqrt(Kappa * M * piRel)
	piE := piRel / thetaE
	s := a / (thetaE * dL)
	p = lens.Params{S: s, Q: 0.5, PiEN: piE * 0.6, PiEE: piE * 0.8,
		DsDt: vr / (thetaE * dL), DAlphaDt: vt / a}
	return p, thetaE, 1 / dS
}

// Reference: Kepler's third law with G M☉ = 4π² AU³/yr² and the virial
// theorem. A circular orbit seen face-on has KE/PE = 1/2 exactly; an orbit at
// escape speed has 1; any velocity v (face-on, so v = v⊥ and r = r⊥) has
// v² r/(8π² M).
func TestEnergyRatioPhysicalOrbits(t *testing.T) {
	const M, dL, dS, a = 0.5, 4.0, 8.0, 2.0
	vc := 2 * math.Pi * math.Sqrt(M/a) // circular speed, AU/yr
	cases := []struct {
		name   string
		vr, vt float64
		want   float64
	}{
		{"circular", 0, vc, 0.5},
		{"escape, tangential", 0, math.Sqrt2 * vc, 1},
		{"escape, radial", math.Sqrt2 * vc, 0, 1},
		{"mixed", 0.3 * vc, 0.5 * vc, (0.09 + 0.25) * vc * vc * a / (8 * math.Pi * math.Pi * M)},
	}
	for _, c := range cases {
		p, thetaE, piS := kepler(M, dL, dS, a, c.vr, c.vt)
		b, err := EnergyRatio(p, thetaE, piS)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(b-c.want) > 1e-12*c.want {
			t.Errorf("%s: β = %.15g, want %.15g", c.name, b, c.want)
		}
		chk := CheckOrbit(p, thetaE, dS)
		if chk.Beta != b || chk.Unbound != (b >= 1) {
			t.Errorf("%s: CheckOrbit %+v, β %v", c.name, chk, b)
		}
	}
	// Clearly unbound motion is flagged.
	p, thetaE, _ := kepler(M, dL, dS, a, 0, 2*vc)
	if chk := CheckOrbit(p, thetaE, dS); !chk.Unbound || !(chk.Beta > 1.9) || chk.Note == "" {
		t.Errorf("twice the circular speed: %+v", chk)
	}
}

// Scalings: β ∝ γ² and ∝ s³ at fixed θE, πE, πS (from the formula's form).
func TestEnergyRatioScaling(t *testing.T) {
	p := lens.Params{S: 1.2, Q: 0.3, PiEN: 0.2, PiEE: -0.1, DsDt: 0.3, DAlphaDt: 0.5}
	b0, _ := EnergyRatio(p, 0.5, 0.125)
	q := p
	q.DsDt, q.DAlphaDt = 2*p.DsDt, 2*p.DAlphaDt
	b1, _ := EnergyRatio(q, 0.5, 0.125)
	if math.Abs(b1/b0-4) > 1e-12 {
		t.Errorf("doubling γ: β ratio %v, want 4", b1/b0)
	}
	q = p
	q.S, q.DsDt = 2*p.S, 2*p.DsDt // same ṡ/s
	b2, _ := EnergyRatio(q, 0.5, 0.125)
	if math.Abs(b2/b0-8) > 1e-12 {
		t.Errorf("doubling s at fixed ṡ/s: β ratio %v, want 8", b2/b0)
	}
}

func TestEnergyRatioNeeds(t *testing.T) {
	ok := lens.Params{S: 1.2, Q: 0.3, PiEN: 0.2, DsDt: 0.3}
	for _, c := range []struct {
		p             lens.Params
		thetaE, piS   float64
		wantInMessage string
	}{
		{lens.Params{S: 1, PiEN: 0.2, DsDt: 0.1}, 0.5, 0.1, "binary"},
		{lens.Params{S: 1, Q: 0.1, DsDt: 0.1}, 0.5, 0.1, "parallax"},
		{ok, 0, 0.1, "θE"},
		{ok, 0.5, -1, "πS"},
	} {
		if _, err := EnergyRatio(c.p, c.thetaE, c.piS); err == nil || !strings.Contains(err.Error(), c.wantInMessage) {
			t.Errorf("%+v θE %v πS %v: %v, want an error about %s", c.p, c.thetaE, c.piS, err, c.wantInMessage)
		}
	}
	if chk := CheckOrbit(ok, 0, 8); !math.IsNaN(chk.Beta) || !strings.Contains(chk.Note, "θE") {
		t.Errorf("without θE: %+v", chk)
	}
	if chk := CheckOrbit(lens.Params{S: 1, Q: 0.1}, 0.5, 8); !strings.Contains(chk.Note, "no orbital motion") {
		t.Errorf("static: %+v", chk)
	}
	if chk := CheckOrbit(ok, 0.5, 0); !strings.Contains(chk.Note, "source distance") {
		t.Errorf("no D_S: %+v", chk)
	}
}
