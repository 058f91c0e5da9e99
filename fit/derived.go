package fit

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"lensbook/lens"
)

// Physical constants behind κ and the mass units. Sources: references.md §10
// (GM☉ and AU as used there for κ); c is exact in the SI; the AU is exact by
// IAU 2012 Resolution B2; the nominal Jovian and terrestrial GM are IAU 2015
// Resolution B3 values (from memory).
const (
	gmSun       = 1.32712440018e20 // m³ s⁻², heliocentric gravitational constant
	cLight      = 299792458.0      // m s⁻¹
	auMetre     = 1.495978707e11   // m
	gmJupiter   = 1.2668653e17     // m³ s⁻², IAU 2015 B3 nominal (from memory)
	gmEarth     = 3.986004e14      // m³ s⁻², IAU 2015 B3 nominal (from memory)
	masPerRad   = 180 / math.Pi * 3600 * 1000
	julianYearD = 365.25 // days per Julian year, for μrel in mas/yr
)

// Kappa is κ = 4G/(c² AU) in mas per solar mass, computed from the constants
// above; references.md §10 gives 8.143853 mas/M☉.
const Kappa = 4 * gmSun / (cLight * cLight * auMetre) * masPerRad

// Mass ratios of the Sun to Jupiter and to the Earth from the nominal GM values.
const (
	SunPerJupiter = gmSun / gmJupiter
	SunPerEarth   = gmSun / gmEarth
)

// ThetaE returns the angular Einstein radius θE = θ*/ρ (same unit as θ*).
func ThetaE(thetaStar, rho float64) float64 { return thetaStar / rho }

// MuRel returns the lens–source relative proper motion θE/tE in mas/yr for θE
// in mas and tE in days (Julian year of 365.25 d).
func MuRel(thetaE, tE float64) float64 { return thetaE / tE * julianYearD }

// LensMass returns M = θE/(κ πE) in M☉ for θE in mas.
func LensMass(thetaE, piE float64) float64 { return thetaE / (Kappa * piE) }

// PiRel returns the relative parallax πrel = θE·πE (mas for θE in mas).
func PiRel(thetaE, piE float64) float64 { return thetaE * piE }

// LensDistance returns D_L = 1/(πrel + πS) in kpc for πrel in mas and the
// source distance dS in kpc (πS = 1/dS mas).
func LensDistance(piRel, dS float64) float64 { return 1 / (piRel + 1/dS) }

// KervellaThetaLD returns the limb-darkened angular diameter θ_LD (mas) of the
// colour–surface-brightness relation of Kervella, Thévenin, Di Folco & Ségransan
// (2004, A&A 426, 297): log10 θ_LD = 0.0755 (V−K)₀ + 0.5170 − 0.2 K₀, with
// dereddened Johnson magnitudes; intrinsic dispersion ≤ 1 %; calibrated on
// dwarfs A0–M2 and subgiants A0–K0 (references.md §10 [K04]).
func KervellaThetaLD(vk0, k0 float64) float64 {
	return math.Pow(10, 0.0755*vk0+0.5170-0.2*k0)
}

// kervellaScatter is the relation's intrinsic dispersion (≤ 1 %, [K04]), drawn
// as a 1 % log-normal factor on θ_LD.
const kervellaScatter = 0.01

// LuminosityClass states what kind of star the source is, for the validity of a
// colour–surface-brightness relation. Zero means unknown.
type LuminosityClass int

const (
	ClassUnknown LuminosityClass = iota
	ClassDwarf
	ClassSubgiant
	ClassGiant
)

func (c LuminosityClass) String() string {
	switch c {
	case ClassDwarf:
		return "dwarf"
	case ClassSubgiant:
		return "subgiant"
	case ClassGiant:
		return "giant"
	}
	return "unknown"
}

// ColourSB asks for θ* from the Kervella et al. (2004) V−K relation.
type ColourSB struct {
	VK0, VK0Err float64 // dereddened (V−K)₀ and its 1σ (mag)
	K0, K0Err   float64 // dereddened K₀ and its 1σ (mag)
	Class       LuminosityClass
}

// PhysicalSettings are the user's inputs to the physical quantities. Exactly one
// source of θ* must be given: ThetaStar > 0 or CSB non-nil.
type PhysicalSettings struct {
	ThetaStar    float64   // angular source radius θ* (µas); 0 when CSB is used
	ThetaStarErr float64   // its 1σ (µas), drawn independently per posterior sample; 0 = exact
	CSB          *ColourSB // colour–surface-brightness input instead of ThetaStar
	DS, DSErr    float64   // source distance and 1σ (kpc); 0 = not given (no D_L, a⊥)
	Seed         uint64    // stream of the θ* and D_S draws
}

// PhysicalInput holds, per posterior sample, the fitted parameters the
// physical quantities need. Rho and TE are required; PiEN/PiEE (both or
// neither), S and Q, and the orbital motion DsDt/DAlphaDt (both or neither;
// θE per Julian year and radians per Julian year, as in package lens) are
// optional (nil).
type PhysicalInput struct {
	TE, Rho, S, Q, PiEN, PiEE []float64
	DsDt, DAlphaDt            []float64
}

// Quantity is one derived quantity's posterior.
type Quantity struct {
	Name, Unit    string
	Median        float64
	Lower, Upper  float64   // LowerQuantile, UpperQuantile
	Values        []float64 // per posterior sample
	NonFiniteRows int       // samples where the value is not finite (left out of the quantiles)
}

// Physical is the set of derived quantities with the assumptions behind them.
// Assumptions and Warnings must be shown beside the numbers.
type Physical struct {
	Quantities  []Quantity
	Assumptions []string
	Warnings    []string
	// UnboundFraction is the fraction of samples whose projected
	// kinetic-to-potential energy ratio β (quantity "beta", see EnergyRatio)
	// is ≥ 1, i.e. whose fitted orbital motion cannot belong to a bound
	// orbit; among samples with a finite β. 0 when β is not computed (no
	// "beta" quantity).
	UnboundFraction float64
}

// Get returns the quantity named name, or nil.
func (p *Physical) Get(name string) *Quantity {
	for i := range p.Quantities {
		if p.Quantities[i].Name == name {
			return &p.Quantities[i]
		}
	}
	return nil
}

// ErrPhysical reports unusable inputs to the physical quantities.
var ErrPhysical = errors.New("fit: physical quantities")

// DeriveQuantities propagates the posterior samples in in through the standard
// relations (references.md §10): θE = θ*/ρ, μrel = θE/tE, and with the
// microlens parallax πE = |πE|: M = θE/(κπE), πrel = θE·πE, and with a source
// distance D_L = 1/(πrel + 1/D_S). For a binary lens (q > 0) the host and
// companion masses are M/(1+q) and qM/(1+q) (q = m2/m1 of package lens, so the
// companion is the body at the positive end of the binary axis) and the
// projected separation is a⊥ = s·θE·D_L (AU, since 1 mas at 1 kpc is 1 AU).
// θ* and D_S uncertainties are drawn per sample from the seeded stream, so the
// quantiles include them.
func DeriveQuantities(in PhysicalInput, set PhysicalSettings) (*Physical, error) {
	n := len(in.Rho)
	bad := func(f string, a ...any) error { return fmt.Errorf("%w: %s", ErrPhysical, fmt.Sprintf(f, a...)) }
	if n == 0 || len(in.TE) != n {
		return nil, bad("need ρ and tE for every sample (%d ρ, %d tE)", n, len(in.TE))
	}
	for _, c := range []struct {
		name string
		col  []float64
	}{{"s", in.S}, {"q", in.Q}, {"piEN", in.PiEN}, {"piEE", in.PiEE}, {"ds/dt", in.DsDt}, {"dalpha/dt", in.DAlphaDt}} {
		if c.col != nil && len(c.col) != n {
			return nil, bad("%s has %d samples, ρ has %d", c.name, len(c.col), n)
		}
	}
	if (in.PiEN == nil) != (in.PiEE == nil) {
		return nil, bad("πE needs both north and east components")
	}
	if (in.DsDt == nil) != (in.DAlphaDt == nil) {
		return nil, bad("orbital motion needs both ds/dt and dα/dt")
	}
	if (set.ThetaStar > 0) == (set.CSB != nil) {
		return nil, bad("give either θ* (µas) or a colour–surface-brightness input, not both or neither")
	}
	if !(set.ThetaStarErr >= 0) || !(set.DS >= 0) || !(set.DSErr >= 0) || math.IsInf(set.ThetaStar, 0) || math.IsInf(set.DS, 0) {
		return nil, bad("θ* = %v ± %v µas, D_S = %v ± %v kpc: need finite values ≥ 0", set.ThetaStar, set.ThetaStarErr, set.DS, set.DSErr)
	}
	r := rand.New(rand.NewPCG(set.Seed, 0x706879736963616c))
	out := &Physical{}
	thetaStar := make([]float64, n) // µas
	if set.CSB != nil {
		c := set.CSB
		if math.IsNaN(c.VK0+c.K0) || math.IsInf(c.VK0+c.K0, 0) || !(c.VK0Err >= 0) || !(c.K0Err >= 0) {
			return nil, bad("colour–surface-brightness input (V−K)₀ = %v ± %v, K₀ = %v ± %v is not usable", c.VK0, c.VK0Err, c.K0, c.K0Err)
		}
		for i := range thetaStar {
			vk := c.VK0 + c.VK0Err*r.NormFloat64()
			k := c.K0 + c.K0Err*r.NormFloat64()
			ld := KervellaThetaLD(vk, k) * math.Exp(kervellaScatter*r.NormFloat64())
			thetaStar[i] = ld / 2 * 1000 // radius in µas
		}
		out.Assumptions = append(out.Assumptions,
			fmt.Sprintf("θ* from the colour–surface-brightness relation of Kervella et al. 2004 (A&A 426, 297): log10 θ_LD[mas] = 0.0755 (V−K)₀ + 0.5170 − 0.2 K₀, θ* = θ_LD/2, with (V−K)₀ = %g ± %g, K₀ = %g ± %g (dereddened, Johnson) and a 1%% intrinsic scatter", c.VK0, c.VK0Err, c.K0, c.K0Err),
			"the relation is calibrated on dwarfs A0–M2 and subgiants A0–K0 (Kervella et al. 2004)")
		switch c.Class {
		case ClassDwarf, ClassSubgiant:
			out.Assumptions = append(out.Assumptions, "source taken to be a "+c.Class.String()+" as stated by the user")
		case ClassGiant:
			out.Warnings = append(out.Warnings, "the source is a giant: outside the calibration of the Kervella et al. 2004 V−K relation for dwarfs and subgiants")
		default:
			out.Warnings = append(out.Warnings, "source luminosity class not given: the Kervella et al. 2004 relation holds for dwarfs A0–M2 and subgiants A0–K0 only")
		}
	} else {
		for i := range thetaStar {
			thetaStar[i] = drawPositive(r, set.ThetaStar, set.ThetaStarErr)
		}
		out.Assumptions = append(out.Assumptions, fmt.Sprintf("θ* = %g ± %g µas supplied by the user (Gaussian, truncated at 0)", set.ThetaStar, set.ThetaStarErr))
	}
	thetaE := make([]float64, n)
	mu := make([]float64, n)
	for i := range n {
		thetaE[i] = ThetaE(thetaStar[i]/1000, in.Rho[i])
		mu[i] = MuRel(thetaE[i], in.TE[i])
	}
	out.add("thetaStar", "uas", thetaStar)
	out.add("thetaE", "mas", thetaE)
	out.add("muRel", "mas/yr", mu)
	out.Assumptions = append(out.Assumptions, "θE = θ*/ρ requires a measured finite-source effect; μrel = θE/tE is geocentric when the fit has parallax, with a Julian year of 365.25 d")
	if in.PiEN == nil {
		out.Assumptions = append(out.Assumptions, "no microlens parallax in the model: lens mass and distance are not constrained")
		return out, nil
	}
	var (
		mass  = make([]float64, n)
		pirel = make([]float64, n)
		piE   = make([]float64, n)
	)
	for i := range n {
		piE[i] = math.Hypot(in.PiEN[i], in.PiEE[i])
		mass[i] = LensMass(thetaE[i], piE[i])
		pirel[i] = PiRel(thetaE[i], piE[i])
	}
	out.add("piE", "", piE)
	out.add("M", "Msun", mass)
	out.add("piRel", "mas", pirel)
	out.Assumptions = append(out.Assumptions, fmt.Sprintf("M = θE/(κ πE) with κ = 4G/(c² AU) = %.6f mas/M☉ (computed from GM☉, c and the AU)", Kappa))
	if in.Q != nil {
		host, comp := make([]float64, n), make([]float64, n)
		compJ, compE := make([]float64, n), make([]float64, n)
		for i := range n {
			host[i] = mass[i] / (1 + in.Q[i])
			comp[i] = in.Q[i] * mass[i] / (1 + in.Q[i])
			compJ[i] = comp[i] * SunPerJupiter
			compE[i] = comp[i] * SunPerEarth
		}
		out.add("M1", "Msun", host)
		out.add("M2", "Msun", comp)
		out.add("M2_jup", "Mjup", compJ)
		out.add("M2_earth", "Mearth", compE)
		out.Assumptions = append(out.Assumptions, "mass split: q = m2/m1, host M1 = M/(1+q), companion (planet) M2 = qM/(1+q); Jupiter and Earth masses from the IAU 2015 nominal GM values")
	}
	if set.DS == 0 {
		out.Assumptions = append(out.Assumptions, "no source distance given: D_L and the projected separation in AU are not computed")
		if in.DsDt != nil && in.Q != nil {
			out.Assumptions = append(out.Assumptions, "no source distance given: the orbital-motion energy check β = (KE/PE)⊥ is not computed")
		}
		return out, nil
	}
	ds := make([]float64, n)
	dl := make([]float64, n)
	for i := range n {
		ds[i] = drawPositive(r, set.DS, set.DSErr)
		dl[i] = LensDistance(pirel[i], ds[i])
	}
	out.add("DS", "kpc", ds)
	out.add("DL", "kpc", dl)
	out.Assumptions = append(out.Assumptions, fmt.Sprintf("D_S = %g ± %g kpc supplied by the user (Gaussian, truncated at 0); D_L = 1/(πrel + 1/D_S)", set.DS, set.DSErr))
	if in.S != nil && in.Q != nil {
		a := make([]float64, n)
		for i := range n {
			a[i] = in.S[i] * thetaE[i] * dl[i]
		}
		out.add("aPerp", "AU", a)
		out.Assumptions = append(out.Assumptions, "a⊥ = s·θE·D_L is the projected separation at the reference epoch; the true semi-major axis is larger on average")
		if in.DsDt != nil {
			out.addEnergyRatio(in, thetaE, ds)
		}
	}
	return out, nil
}

// addEnergyRatio adds β = (KE/PE)⊥ per sample (EnergyRatio, Dong et al. 2009,
// ApJ 695, 970) with πS = 1/D_S of the same sample, and reports the fraction of
// samples with β ≥ 1 (not bound) in UnboundFraction and in the assumptions.
func (p *Physical) addEnergyRatio(in PhysicalInput, thetaE, ds []float64) {
	n := len(thetaE)
	beta := make([]float64, n)
	finite, unbound := 0, 0
	for i := range n {
		lp := lens.Params{S: in.S[i], Q: in.Q[i], PiEN: in.PiEN[i], PiEE: in.PiEE[i], DsDt: in.DsDt[i], DAlphaDt: in.DAlphaDt[i]}
		b, err := EnergyRatio(lp, thetaE[i], 1/ds[i])
		if err != nil {
			b = math.NaN() // counted by add as a non-finite sample
		}
		beta[i] = b
		if !math.IsNaN(b) && !math.IsInf(b, 0) {
			finite++
			if b >= 1 {
				unbound++
			}
		}
	}
	p.add("beta", "", beta)
	if finite > 0 {
		p.UnboundFraction = float64(unbound) / float64(finite)
	}
	p.Assumptions = append(p.Assumptions, fmt.Sprintf("β = (KE/PE)⊥ is the projected kinetic-to-potential energy ratio of the lens orbit from s, ds/dt, dα/dt, θE, πE and πS = 1/D_S (Dong et al. 2009, ApJ 695, 970); the true ratio is at least β, so a bound orbit needs β < 1: %d of %d samples (%.1f%%) have β ≥ 1",
		unbound, finite, 100*p.UnboundFraction))
	if unbound > 0 {
		p.Warnings = append(p.Warnings, fmt.Sprintf("%.1f%% of the samples have β = (KE/PE)⊥ ≥ 1: their fitted orbital motion is faster than escape speed (unphysical)", 100*p.UnboundFraction))
	}
}

// drawPositive draws from N(mu, sd) truncated at 0 (redrawn while ≤ 0).
func drawPositive(r *rand.Rand, mu, sd float64) float64 {
	if sd == 0 {
		return mu
	}
	for range 1000 {
		if v := mu + sd*r.NormFloat64(); v > 0 {
			return v
		}
	}
	return math.NaN()
}

func (p *Physical) add(name, unit string, v []float64) {
	q := Quantity{Name: name, Unit: unit, Values: v}
	finite := make([]float64, 0, len(v))
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			q.NonFiniteRows++
			continue
		}
		finite = append(finite, x)
	}
	slices.Sort(finite)
	q.Median = sortedQuantile(finite, 0.5)
	q.Lower = sortedQuantile(finite, LowerQuantile)
	q.Upper = sortedQuantile(finite, UpperQuantile)
	if q.NonFiniteRows > 0 {
		p.Warnings = append(p.Warnings, fmt.Sprintf("%s is not finite for %d of %d samples (left out of its quantiles)", name, q.NonFiniteRows, len(v)))
	}
	p.Quantities = append(p.Quantities, q)
}
