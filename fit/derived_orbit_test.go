package fit

import (
	"math"
	"slices"
	"strings"
	"testing"
)

// TestDeriveEnergyRatio: β per sample through DeriveQuantities for the
// worked example of references.md §10 (θ* = 6 µas, ρ = 0.005, πE = 0.1,
// D_S = 8 kpc) with s = 1.1 and a face-on circular orbit. For a circular
// orbit v² = GM/r, so KE/PE = (v²/2)/(GM/r) = 1/2 (Kepler; common practice);
// seen face-on nothing is lost in projection, so β = 1/2. The angular speed
// ω = k·sqrt(M/r³) with the Gaussian gravitational constant
// k = 0.01720209895 AU^{3/2} d⁻¹ M☉^{-1/2} (IAU 1976, from memory). A sample
// rotating √3 times faster has β = 3/2 (β ∝ ω²) and counts as unbound.
// Tolerance 1e-4: EnergyRatio's κ·yr²/(8π²) takes GM☉ = 4π² AU³ per Julian
// year², which differs from k² by (365.2569/365.25)² − 1 = 3.8e-5.
func TestDeriveEnergyRatio(t *testing.T) {
	const k = 0.01720209895 // AU^{3/2} d⁻¹ M☉^{-1/2}
	thE, piE, s := 1.2, 0.1, 1.1
	mass := thE / (Kappa * piE)                   // M☉
	dl := 1 / (thE*piE + 1.0/8)                   // kpc
	r := s * thE * dl                             // AU (1 mas at 1 kpc is 1 AU)
	omega := k * 365.25 * math.Sqrt(mass/(r*r*r)) // rad per Julian year
	n := 4
	in := PhysicalInput{TE: slices.Repeat([]float64{30}, n), Rho: slices.Repeat([]float64{0.005}, n),
		PiEN: slices.Repeat([]float64{0.06}, n), PiEE: slices.Repeat([]float64{0.08}, n),
		S: slices.Repeat([]float64{s}, n), Q: slices.Repeat([]float64{0.001}, n),
		DsDt: make([]float64, n), DAlphaDt: []float64{omega, -omega, omega, math.Sqrt(3) * omega}}
	p, err := DeriveQuantities(in, PhysicalSettings{ThetaStar: 6, DS: 8})
	if err != nil {
		t.Fatal(err)
	}
	q := p.Get("beta")
	if q == nil {
		t.Fatal("no quantity beta")
	}
	for i, want := range []float64{0.5, 0.5, 0.5, 1.5} {
		if math.Abs(q.Values[i]-want) > 1e-4*want {
			t.Errorf("β of sample %d = %.9g, want %g", i, q.Values[i], want)
		}
	}
	if p.UnboundFraction != 0.25 {
		t.Errorf("UnboundFraction = %v, want 0.25", p.UnboundFraction)
	}
	said := strings.Join(p.Assumptions, "\n")
	if !strings.Contains(said, "1 of 4 samples (25.0%) have β ≥ 1") || !strings.Contains(said, "Dong et al. 2009") {
		t.Errorf("assumptions do not state the β check:\n%s", said)
	}
	if !strings.Contains(strings.Join(p.Warnings, "\n"), "25.0% of the samples have β") {
		t.Errorf("no warning about unbound samples: %q", p.Warnings)
	}
	// The separation rate enters as (ds/dt / s)²: a radial speed equal to
	// the circular speed (ds/dt = s ω) with dα/dt = √2 ω makes γ² = 3ω²,
	// β = 3/2.
	in.DsDt = slices.Repeat([]float64{s * omega}, n)
	in.DAlphaDt = slices.Repeat([]float64{math.Sqrt2 * omega}, n)
	p, err = DeriveQuantities(in, PhysicalSettings{ThetaStar: 6, DS: 8})
	if err != nil {
		t.Fatal(err)
	}
	if b := p.Get("beta").Median; math.Abs(b-1.5) > 1.5e-4 || p.UnboundFraction != 1 {
		t.Errorf("β with ds/dt = sω, dα/dt = √2ω: median %v, unbound fraction %v; want 1.5 and 1", b, p.UnboundFraction)
	}

	// Without D_S there is no πS: β is not computed, and the report says so.
	p, err = DeriveQuantities(in, PhysicalSettings{ThetaStar: 6})
	if err != nil {
		t.Fatal(err)
	}
	if p.Get("beta") != nil || p.UnboundFraction != 0 || !strings.Contains(strings.Join(p.Assumptions, "\n"), "β = (KE/PE)⊥ is not computed") {
		t.Errorf("without D_S: beta %v, fraction %v, assumptions %q", p.Get("beta"), p.UnboundFraction, p.Assumptions)
	}
	// Half an orbital motion is an input error.
	in.DAlphaDt = nil
	if _, err := DeriveQuantities(in, PhysicalSettings{ThetaStar: 6, DS: 8}); err == nil || !strings.Contains(err.Error(), "both ds/dt and dα/dt") {
		t.Errorf("ds/dt without dα/dt: %v", err)
	}
}
