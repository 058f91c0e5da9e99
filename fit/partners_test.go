package fit_test

import (
	"context"
	"math"
	"math/cmplx"
	"testing"

	"lensbook/fit"
	"lensbook/fit/problems"
	"lensbook/lens"
)

// The close/wide partner keeps the trajectory fixed relative to the central
// caustic, whatever the reference point: ζ(t) − c_cc(s) = ζ'(t) − c_cc(1/s).
func TestCloseWidePartnerKeepsTrajectory(t *testing.T) {
	for _, ref := range []lens.Reference{lens.CentreOfMass, lens.CentralCaustic} {
		for _, p := range []lens.Params{
			{T0: 100, U0: 0.02, TE: 30, S: 0.7, Q: 1e-3, Alpha: 0.9},
			{T0: 100, U0: -0.1, TE: 12, S: 1.8, Q: 0.3, Alpha: 4},
		} {
			q, err := fit.PartnerStart(p, ref, fit.CloseWide)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(q.S*p.S-1) > 1e-15 || q.Q != p.Q || q.Alpha != p.Alpha || q.TE != p.TE {
				t.Fatalf("partner %+v of %+v", q, p)
			}
			if ref == lens.CentralCaustic && (q.T0 != p.T0 || q.U0 != p.U0) {
				t.Errorf("central-caustic reference: t0, u0 changed: %+v → %+v", p, q)
			}
			m1 := lens.Model{Params: p, Ref: ref}
			m2 := lens.Model{Params: q, Ref: ref}
			for _, tt := range []float64{70, 100, 101.3, 140} {
				z1 := m1.At(tt, lens.Offset{}).Zeta - lens.ReferencePoint(lens.CentralCaustic, p.S, p.Q)
				z2 := m2.At(tt, lens.Offset{}).Zeta - lens.ReferencePoint(lens.CentralCaustic, q.S, q.Q)
				if cmplx.Abs(z1-z2) > 1e-9 {
					t.Errorf("ref %v, t=%v: %v vs %v", ref, tt, z1, z2)
				}
			}
		}
	}
	if _, err := fit.PartnerStart(lens.Params{TE: 1}, lens.CentralCaustic, fit.CloseWide); err == nil {
		t.Error("partner of a single lens accepted")
	}
}

// On the central-caustic planet (q = 1e-3, s = 0.7), the refined wide partner
// (s ≈ 1/0.7) fits nearly as well: the close/wide degeneracy (Griest &
// Safizadeh 1998). /work/shared/references.md §6 finds the two light curves
// differ by ~1e-3 in typical points at |log s| ≈ 0.1, so with ~0.8% errors
// near the peak Δχ² stays well below the single-lens Δχ² (~1e5) — here we ask
// Δχ² < 200 and the partner's s within 0.03 dex of 1/s.
func TestCloseWidePartnerRefined(t *testing.T) {
	s := problems.PlanetCentral()
	ev := simulate(t, s, 31)
	l := mustLikelihood(t, ev)
	sol, err := fit.Refine(context.Background(), l, s.Truth.Params, fit.RefineSettings{})
	if err != nil {
		t.Fatal(err)
	}
	ps, err := fit.Partners(context.Background(), l, sol, fit.RefineSettings{})
	if err != nil {
		t.Fatal(err)
	}
	var cw, mir *fit.Partner
	for i := range ps {
		switch ps[i].Kind {
		case fit.CloseWide:
			cw = &ps[i]
		case fit.Mirror:
			mir = &ps[i]
		}
	}
	if cw == nil || mir == nil {
		t.Fatalf("partners %+v", ps)
	}
	t.Logf("wide partner: s=%.4f q=%.3g Δχ²=%.2f; mirror Δχ²=%.2g", cw.Solution.Params.S, cw.Solution.Params.Q, cw.DeltaChi2, mir.DeltaChi2)
	if math.Abs(math.Log10(cw.Solution.Params.S*s.Truth.S)) > 0.03 || cw.DeltaChi2 > 200 || cw.DeltaChi2 < -200 {
		t.Errorf("wide partner s=%v Δχ²=%v", cw.Solution.Params.S, cw.DeltaChi2)
	}
	if math.Abs(mir.DeltaChi2) > 1e-6*sol.Chi2 {
		t.Errorf("mirror Δχ² = %v, want 0", mir.DeltaChi2)
	}
}
