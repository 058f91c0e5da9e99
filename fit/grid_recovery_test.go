package fit_test

import (
	"context"
	"math"
	"testing"
	"time"

	"lensbook/fit"
	"lensbook/fit/problems"
	"lensbook/lens"
)

// finiteBinaryReady reports whether lens has its finite-source binary
// magnification (a source of radius 0.05 on the central caustic needs more than
// the point-source method).
func finiteBinaryReady() bool {
	b, err := lens.NewBinary(1, 0.5)
	if err != nil {
		return false
	}
	f, err := lens.NewSolver(b).FiniteMag(complex(0.01, 0), 0.05, 0, 1e-3)
	return err == nil && f.Method != lens.PointSource
}

// matchesTruth reports whether sol has s and q of the truth, or s of its
// close/wide partner (s ↔ 1/s): |Δlog s| < dls and |Δlog q| < dlq.
func matchesTruth(p, truth lens.Params, dls, dlq float64) bool {
	ls, lt := math.Log10(p.S), math.Log10(truth.S)
	okS := math.Abs(ls-lt) < dls || math.Abs(ls+lt) < dls
	return okS && math.Abs(math.Log10(p.Q/truth.Q)) < dlq
}

// recoverBinary runs the single-lens fit, the grid and refinement on a
// simulated event and checks χ² ≤ χ²(truth) + 1 with s, q recovered (up to the
// close/wide partner) by the best candidate.
func recoverBinary(t *testing.T, s *problems.Spec, seed uint64, grid fit.GridSettings) *fit.SearchResult {
	t.Helper()
	ev := simulate(t, s, seed)
	truthChi2, err := problems.TruthChi2(s, ev)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	t0 := time.Now()
	single, err := fit.FitSingle(ctx, ev, fit.SingleSettings{NoFinite: true})
	if err != nil {
		t.Fatal(err)
	}
	if !single.Anomaly.Found {
		t.Fatalf("no anomaly found in the single-lens residuals: %+v", single.Anomaly)
	}
	// the grid reads the anomaly time and any caustic crossing from the
	// residuals of its start itself (as in the browser)
	start := single.GridStart()
	set := fit.SearchSettings{Grid: grid}
	res, err := fit.Search(ctx, ev, start, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Candidates) == 0 {
		t.Fatal("no candidates")
	}
	best := res.Candidates[0].Solution
	t.Logf("%s: %d points, χ²(truth) = %.2f, single lens %.1f, best %.2f at s=%.4f q=%.3g α=%.3f ρ=%.4g (truth s=%v q=%v α=%v ρ=%v; %v, %d grid evaluations on %d points, crossing %v)",
		s.Name, ev.NumUsed(), truthChi2, single.Best().Chi2, best.Chi2, best.Params.S, best.Params.Q, best.Params.Alpha, best.Params.Rho,
		s.Truth.S, s.Truth.Q, s.Truth.Alpha, s.Truth.Rho,
		time.Since(t0).Round(time.Millisecond), res.Grid.Evals, res.Grid.Points, res.Grid.Crossing != nil)
	for i, nd := range res.Grid.Minima(6) {
		t.Logf("  grid minimum %d: s=%.4f q=%.3g χ²=%.1f (grid points)", i+1, math.Pow(10, nd.LogS), math.Pow(10, nd.LogQ), nd.Chi2)
	}
	if best.Chi2 > truthChi2+1 {
		t.Errorf("best χ² %.2f > χ²(truth) + 1 = %.2f", best.Chi2, truthChi2+1)
	}
	ok := matchesTruth(best.Params, s.Truth.Params, 0.05, 0.2)
	for _, p := range res.Candidates[0].Partners {
		if p.Kind == fit.CloseWide && matchesTruth(p.Solution.Params, s.Truth.Params, 0.05, 0.2) {
			ok = true
		}
	}
	if !ok {
		t.Errorf("s=%v q=%v (or its partner) do not match truth s=%v q=%v", best.Params.S, best.Params.Q, s.Truth.S, s.Truth.Q)
	}
	return res
}

// Cheap, always-on variant: a 7×5 grid bracketing the truth and its
// close/wide partner.
func TestRecoverPlanetCentralCausticSmallGrid(t *testing.T) {
	recoverBinary(t, problems.PlanetCentral(), 11, fit.GridSettings{LogSMin: -0.3, LogSMax: 0.3, NS: 7, LogQMin: -4, LogQMax: -2, NQ: 5})
}

func TestRecoverPlanetCentralCausticFullGrid(t *testing.T) {
	if testing.Short() {
		t.Skip("full 31×31 grid")
	}
	recoverBinary(t, problems.PlanetCentral(), 12, fit.GridSettings{})
}

func TestRecoverDemoEventFullGrid(t *testing.T) {
	if testing.Short() {
		t.Skip("full 31×31 grid on ~2900 points")
	}
	recoverBinary(t, problems.Demo(), 20240601, fit.GridSettings{})
}

// The caustic-crossing recoveries refine with a finite source (tens of ms per
// χ² evaluation) and take a minute or more: skipped under -short (see
// DEVELOPERS.md).
func TestRecoverPlanetaryCausticCrossingSmallGrid(t *testing.T) {
	if testing.Short() {
		t.Skip("finite-source refinement of a caustic crossing (about a minute)")
	}
	s := problems.PlanetaryCaustic()
	ls := math.Log10(s.Truth.S)
	recoverBinary(t, s, 13, fit.GridSettings{LogSMin: ls - 0.1, LogSMax: ls + 0.1, NS: 5, LogQMin: -3.5, LogQMax: -2.5, NQ: 3})
}

func TestRecoverPlanetaryCausticCrossingFullGrid(t *testing.T) {
	if testing.Short() {
		t.Skip("full grid with finite-source refinement")
	}
	recoverBinary(t, problems.PlanetaryCaustic(), 14, fit.GridSettings{})
}

func TestRecoverResonantBinarySmallGrid(t *testing.T) {
	if testing.Short() {
		t.Skip("finite-source refinement of a caustic crossing (about 15 s native, longer under wasm)")
	}
	recoverBinary(t, problems.ResonantBinary(), 15, fit.GridSettings{LogSMin: -0.1, LogSMax: 0.1, NS: 5, LogQMin: -0.8, LogQMax: -0.2, NQ: 4})
}

func TestRecoverResonantBinaryFullGrid(t *testing.T) {
	if testing.Short() {
		t.Skip("full grid with finite-source refinement")
	}
	recoverBinary(t, problems.ResonantBinary(), 16, fit.GridSettings{})
}
