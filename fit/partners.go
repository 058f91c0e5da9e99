package fit

import (
	"context"
	"fmt"
	"math"
	"math/cmplx"

	"lensbook/lens"
)

// PartnerKind names a degeneracy.
type PartnerKind string

const (
	// CloseWide maps s → 1/s keeping q, α and the trajectory relative to the
	// central caustic: the close/wide degeneracy of central-caustic events
	// (Griest & Safizadeh 1998, ApJ 500, 37; Dominik 1999, A&A 349, 108). It is
	// approximate, so the partner is refined.
	CloseWide PartnerKind = "close-wide"
	// Mirror maps (u0, α) → (−u0, −α): the reflection of the trajectory about the
	// binary axis, which leaves the light curve unchanged exactly when there is no
	// parallax (the binary lens is symmetric about its axis). It is not refined.
	Mirror PartnerKind = "mirror"
	// Ecliptic maps (u0, α, dα/dt) → −(u0, α, dα/dt) and reflects πE about the
	// ecliptic direction at the event: the ecliptic degeneracy of annual
	// parallax, exact on the ecliptic and approximate elsewhere, so refined
	// (EclipticPartnerStart, ecliptic.go).
	Ecliptic PartnerKind = "ecliptic"
)

// Partner is a degenerate partner of a solution.
type Partner struct {
	Kind     PartnerKind `json:"kind"`
	Solution *Solution   `json:"solution"`
	// DeltaChi2 is the partner's χ² minus the original's.
	DeltaChi2 float64 `json:"deltaChi2"`
}

// PartnerStart returns the unrefined partner parameters of p for kind under
// reference point ref. For CloseWide the trajectory keeps its position relative
// to the central caustic (lens.CentralCaustic reference point): with that
// reference t0 and u0 are unchanged; with another, t0 and u0 absorb the shift
// D = [c_ref(s) − c_cc(s)] − [c_ref(1/s) − c_cc(1/s)], projected on the
// trajectory (Δτ = Re(D·e^{−iα}), Δu0 = Im(D·e^{−iα})).
func PartnerStart(p lens.Params, ref lens.Reference, kind PartnerKind) (lens.Params, error) {
	switch kind {
	case CloseWide:
		if p.Q <= 0 || p.S <= 0 {
			return p, fmt.Errorf("fit: close/wide partner needs a binary lens, have s=%v q=%v", p.S, p.Q)
		}
		s2 := 1 / p.S
		d := (lens.ReferencePoint(ref, p.S, p.Q) - lens.ReferencePoint(lens.CentralCaustic, p.S, p.Q)) -
			(lens.ReferencePoint(ref, s2, p.Q) - lens.ReferencePoint(lens.CentralCaustic, s2, p.Q))
		rot := d * cmplx.Exp(complex(0, -p.Alpha))
		q := p
		q.S = s2
		q.T0 = p.T0 - real(rot)*p.TE
		q.U0 = p.U0 + imag(rot)
		return q, nil
	case Mirror:
		q := p
		q.U0, q.Alpha = -p.U0, WrapAlpha(-p.Alpha)
		q.DAlphaDt = -p.DAlphaDt
		return q, nil
	}
	return p, fmt.Errorf("fit: unknown partner kind %q", kind)
}

// Partners returns the degenerate partners of sol: the close/wide partner
// refined with the settings' free parameters (default: those of sol's model),
// and the exact mirror (evaluated, not refined; only without parallax). Each
// carries its Δχ² against sol.
func Partners(ctx context.Context, l *Likelihood, sol *Solution, set RefineSettings) ([]Partner, error) {
	var out []Partner
	ref := l.Event().Ref
	if sol.Params.Q > 0 {
		st, err := PartnerStart(sol.Params, ref, CloseWide)
		if err != nil {
			return nil, err
		}
		ps, err := Refine(ctx, l, st, set)
		if err != nil && ps == nil {
			return nil, err
		}
		if ps != nil {
			ps.Label = partnerLabel(sol.Label, CloseWide, ps.Params.S)
			out = append(out, Partner{Kind: CloseWide, Solution: ps, DeltaChi2: ps.Chi2 - sol.Chi2})
		}
		if ps != nil && ps.Status == Cancelled {
			return out, nil
		}
	}
	if ep, err := eclipticPartner(ctx, l, sol, set); err != nil || ep != nil {
		if ep != nil {
			out = append(out, *ep)
		}
		if err != nil || ep.Solution.Status == Cancelled {
			return out, err
		}
	}
	if sol.Params.PiEN == 0 && sol.Params.PiEE == 0 {
		mp, _ := PartnerStart(sol.Params, ref, Mirror)
		c, err := l.Chi2(&mp)
		if err != nil {
			return out, err
		}
		m := *sol
		m.Params, m.Chi2 = mp, c
		m.Fits = append([]DatasetFit(nil), l.Fits()...)
		m.Cov, m.Sigma, m.IsLog = mirrorCov(sol), sol.Sigma, sol.IsLog
		m.Label = partnerLabel(sol.Label, Mirror, 0)
		m.Note = "exact reflection about the binary axis; not refined"
		out = append(out, Partner{Kind: Mirror, Solution: &m, DeltaChi2: c - sol.Chi2})
	}
	return out, nil
}

// mirrorCov flips the sign of the covariances between u0 or α and the other
// parameters (the mirror negates both).
func mirrorCov(sol *Solution) [][]float64 {
	if sol.Cov == nil {
		return nil
	}
	sign := make([]float64, len(sol.Free))
	for i, p := range sol.Free {
		sign[i] = 1
		if p == U0 || p == Alpha || p == DAlphaDt {
			sign[i] = -1
		}
	}
	c := make([][]float64, len(sol.Cov))
	for i := range c {
		c[i] = make([]float64, len(sol.Cov[i]))
		for j := range c[i] {
			c[i][j] = sign[i] * sign[j] * sol.Cov[i][j]
		}
	}
	return c
}

func partnerLabel(base string, k PartnerKind, s float64) string {
	if base == "" {
		base = "solution"
	}
	switch k {
	case CloseWide:
		if s < 1 {
			return base + " (close partner)"
		}
		return base + " (wide partner)"
	case Mirror:
		return base + " (mirror)"
	case Ecliptic:
		return base + " (ecliptic partner)"
	}
	return base
}

// sameSolution reports whether two binary solutions describe the same minimum:
// log s within 0.02, log q within 0.05 and α within 0.05 rad (chosen here: a
// fraction of the default grid spacing).
func sameSolution(a, b lens.Params) bool {
	if a.Q <= 0 || b.Q <= 0 {
		return false
	}
	da := math.Abs(WrapAlpha(a.Alpha-b.Alpha+math.Pi) - math.Pi)
	return math.Abs(math.Log10(a.S/b.S)) < 0.02 && math.Abs(math.Log10(a.Q/b.Q)) < 0.05 && da < 0.05 &&
		math.Signbit(a.U0) == math.Signbit(b.U0)
}
