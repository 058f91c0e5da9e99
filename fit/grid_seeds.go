package fit

import (
	"math"
	"math/cmplx"

	"lensbook/lens"
)

// chordParams returns t0, u0, tE, α of the straight trajectory that is at pin
// at time tin and at pout at tout (tout > tin), with t0 and u0 referred to the
// point c: the caustic-crossing parameterisation of Cassan (2008, A&A 491,
// 587), which describes a crossing by its entry and exit times and positions
// on the caustic, turned back into the usual parameters.
func chordParams(c, pin, pout complex128, tin, tout float64) (t0, u0, tE, alpha float64, ok bool) {
	d := pout - pin
	l := cmplx.Abs(d)
	if !(l > 0) || !(tout > tin) {
		return 0, 0, 0, 0, false
	}
	tE = (tout - tin) / l
	alpha = math.Atan2(imag(d), real(d))
	rot := cmplx.Exp(complex(0, -alpha))
	w := (pin - c) * rot // pin in the trajectory frame centred on c: (τ_in, u0)
	u0 = imag(w)
	t0 = tin - real(w)*tE
	return t0, u0, tE, WrapAlpha(alpha), true
}

// throughPoint returns the trajectories of start rotated (and, as a second
// variant, with tE rescaled) so that the source is at p at time ta; t0 and u0
// are referred to c. Keeping u0 and tE leaves the source at distance
// r = |τa + i·u0| from c at ta, which reaches p only when |p − c| = r: the
// first variant aims at p along that circle, the second keeps u0 and stretches
// tE so that r = |p − c| (possible when |p − c| > |u0| and ta ≠ t0).
func throughPoint(start lens.Params, c, p complex128, ta float64) []lens.Params {
	tau := (ta - start.T0) / start.TE
	rel := p - c
	out := make([]lens.Params, 0, 2)
	a := start
	a.Alpha = WrapAlpha(cmplx.Phase(rel) - math.Atan2(start.U0, tau))
	out = append(out, a)
	r := cmplx.Abs(rel)
	if r > math.Abs(start.U0) && tau != 0 {
		t := math.Copysign(math.Sqrt(r*r-start.U0*start.U0), tau)
		b := start
		b.TE = (ta - start.T0) / t
		b.Alpha = WrapAlpha(cmplx.Phase(rel) - math.Atan2(start.U0, t))
		if b.TE > 0 && math.Abs(math.Log(b.TE/start.TE)) > 1e-3 {
			out = append(out, b)
		}
	}
	return out
}
