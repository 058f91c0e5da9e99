package fit

import (
	"fmt"
	"math"

	"lensbook/lens"
)

// NewDrawsMode rebuilds a posterior mode from a set of its draws, as kept with
// a notebook (the posterior step keeps a few thousand rows, not the chain), so
// that the derived quantities (ModeResult.PhysicalInput) and the forecast
// (ModeResult.Forecast) can be computed long after the sampler ran and give
// the same numbers from a saved notebook.
//
// names are the free parameters in the exported units of PhysicalSamples
// ("t0", "u0", "tE", "rho", "s", "q", "alpha" in degrees, …), in Param order as
// PhysicalSamples writes them; columns[j] holds the draws of names[j]. base
// holds the fixed parameters (the mode's Space.Base) and tref its t0,par (full
// JD; 0 when not fixed). The result has no Chain and an empty Summary, and its
// samples carry no ln π (NaN) or χ² (nil).
func NewDrawsMode(label string, base lens.Params, tref float64, names []string, columns [][]float64) (*ModeResult, error) {
	bad := func(f string, a ...any) (*ModeResult, error) {
		return nil, fmt.Errorf("fit: posterior draws of %q: %s", clip(label), fmt.Sprintf(f, a...))
	}
	if len(names) == 0 || len(names) != len(columns) {
		return bad("%d parameter names for %d columns", len(names), len(columns))
	}
	var specs Specs
	free := make([]Param, len(names))
	for j, n := range names {
		p, err := ParseParam(n)
		if err != nil {
			return bad("column %d: %v", j+1, err)
		}
		if j > 0 && p <= free[j-1] {
			return bad("column %q is out of order or repeated (want the order t0, u0, tE, rho, s, q, alpha, piEN, piEE, dsdt, dalphadt)", n)
		}
		free[j] = p
		// Flat priors: the draws are used as given, never in log coordinates.
		*specs.At(p) = Spec{Free: true, Prior: PriorFlat}
	}
	rows := len(columns[0])
	if rows == 0 {
		return bad("no draws")
	}
	for j, c := range columns {
		if len(c) != rows {
			return bad("column %q has %d draws, %q has %d", names[j], len(c), names[0], rows)
		}
		for i, v := range c {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return bad("draw %d of %q is not finite", i+1, names[j])
			}
		}
	}
	for p := Param(0); p < NumParams; p++ {
		if v := Get(&base, p); math.IsNaN(v) || math.IsInf(v, 0) {
			return bad("fixed parameter %v = %v is not finite", p, v)
		}
	}
	if !(tref >= 0 && tref < 1e8) {
		return bad("t0,par %v is not a Julian date", tref)
	}
	sp, err := NewSpace(base, specs)
	if err != nil {
		return nil, err
	}
	d := len(names)
	s := &Samples{Mode: label, Names: append([]string(nil), names...), Units: make([]string, d),
		X: make([]float64, rows*d), LogP: make([]float64, rows), Param: make([]int, d)}
	for i := range s.LogP {
		s.LogP[i] = math.NaN() // not kept with the draws
	}
	for j, p := range free {
		s.Units[j] = paramUnit(p)
		s.Param[j] = j
		for i, v := range columns[j] {
			s.X[i*d+j] = v
		}
	}
	return &ModeResult{Label: label, Space: sp, Samples: s, TRef: tref}, nil
}
