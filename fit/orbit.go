package fit

import (
	"fmt"
	"math"

	"lensbook/lens"
)

// Physical check of lens orbital motion.
//
// A fitted linear orbital motion (ds/dt, dα/dt) is physical only if the
// binary can be bound: its projected kinetic energy must not exceed its
// potential energy. With the projected separation r⊥ = s·θE·D_L and the
// projected relative velocity v⊥² = r⊥²·γ², γ² = (ṡ/s)² + α̇², the ratio
// β = (KE/PE)⊥ = v⊥² r⊥ / (2GM) is, with G·M☉ = 4π² AU³ yr⁻² (Kepler's third
// law), M = θE/(κπE) and D_L = AU/(θE·πE + πS):
//
//	β = κ M☉ yr² / (8π²) · πE s³ γ² / (θE (πE + πS/θE)³)
//
// (Dong et al. 2009, ApJ 695, 970, eq. for the projected energy ratio, from
// memory; the form above is re-derived here from the definitions and checked
// against a circular face-on orbit, β = 1/2, in the tests). The true
// separation and speed are at least their projections, so the true ratio
// v²r/(2GM) ≥ β: a bound orbit needs β < 1, and β ≥ 1 rules the fitted motion
// out. It needs θE (known when the source size θ* and ρ
// are), πE (parallax in the fit) and the source parallax πS = 1/D_S.

// OrbitEnergy reports the energy check of one solution.
type OrbitEnergy struct {
	// Beta is (KE/PE)⊥; NaN when it cannot be computed (see Note).
	Beta float64 `json:"beta"`
	// Unbound is true when Beta ≥ 1: the fitted orbital motion is faster than
	// escape speed at the projected separation and is not physical.
	Unbound bool    `json:"unbound"`
	ThetaE  float64 `json:"thetaE_mas"` // θE used (mas)
	PiS     float64 `json:"piS_mas"`    // source parallax used (mas)
	Note    string  `json:"note,omitempty"`
}

// EnergyRatio returns β = (KE/PE)⊥ of p for θE and πS in mas (see the file
// comment). p's DsDt is in θE per Julian year and DAlphaDt in radians per
// Julian year (package lens). It needs q > 0, s > 0, πE ≠ 0, θE > 0, πS ≥ 0.
func EnergyRatio(p lens.Params, thetaE, piS float64) (float64, error) {
	piE := math.Hypot(p.PiEN, p.PiEE)
	switch {
	case !(p.Q > 0) || !(p.S > 0):
		return math.NaN(), fmt.Errorf("fit: energy ratio needs a binary lens (s = %v, q = %v)", p.S, p.Q)
	case !(piE > 0) || math.IsInf(piE, 0):
		return math.NaN(), fmt.Errorf("fit: energy ratio needs the microlens parallax πE (have %v): fit πE,N and πE,E", piE)
	case !(thetaE > 0) || math.IsInf(thetaE, 0):
		return math.NaN(), fmt.Errorf("fit: energy ratio needs θE > 0 in mas (have %v): give the source size θ* with a finite-source fit", thetaE)
	case !(piS >= 0) || math.IsInf(piS, 0):
		return math.NaN(), fmt.Errorf("fit: energy ratio needs the source parallax πS ≥ 0 in mas (have %v)", piS)
	}
	gamma2 := (p.DsDt/p.S)*(p.DsDt/p.S) + p.DAlphaDt*p.DAlphaDt
	d := piE + piS/thetaE
	return Kappa / (8 * math.Pi * math.Pi) * piE * p.S * p.S * p.S * gamma2 / (thetaE * d * d * d), nil
}

// CheckOrbit returns the energy check of p given θE (mas) and the source
// distance dS (kpc; πS = 1/dS mas). Without θE (0) it returns Beta NaN and a
// note saying what is missing rather than an error, so a report can show it.
func CheckOrbit(p lens.Params, thetaE, dS float64) OrbitEnergy {
	out := OrbitEnergy{Beta: math.NaN(), ThetaE: thetaE}
	if !HasOrbit(&p) {
		out.Note = "no orbital motion in the model"
		return out
	}
	if !(dS > 0) {
		out.Note = "needs the source distance D_S"
		return out
	}
	out.PiS = 1 / dS
	b, err := EnergyRatio(p, thetaE, out.PiS)
	if err != nil {
		out.Note = err.Error()
		return out
	}
	out.Beta, out.Unbound = b, b >= 1
	if out.Unbound {
		out.Note = fmt.Sprintf("β = (KE/PE)⊥ = %.3g ≥ 1: the fitted orbital motion is unbound (not physical)", b)
	}
	return out
}
