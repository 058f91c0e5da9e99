package fit

import (
	"context"
	"fmt"
	"math"
	"sort"

	"lensbook/lens"
)

// SearchSettings configures Search: the grid, how many grid minima to refine
// and how. The zero value is usable.
type SearchSettings struct {
	Grid GridSettings `json:"grid"`
	// Keep is how many grid minima are refined with all parameters free; 0 means 6.
	Keep int `json:"keep"`
	// Refine configures the final fits; its zero value frees t0, u0, tE, s, q, α
	// (and ρ when the grid used ρ > 0).
	Refine RefineSettings `json:"refine"`
	// NoPartners skips the degenerate partners.
	NoPartners bool `json:"noPartners"`
}

// Candidate is a refined solution with its degenerate partners.
type Candidate struct {
	Solution *Solution `json:"solution"`
	Partners []Partner `json:"partners"`
	// DeltaChi2 is the solution's χ² minus the best candidate's.
	DeltaChi2 float64 `json:"deltaChi2"`
}

// SearchResult is the outcome of Search.
type SearchResult struct {
	Grid       *GridResult `json:"grid"`
	Candidates []Candidate `json:"candidates"` // distinct solutions, best first
	Status     Status      `json:"status"`
}

// Search runs the grid (one chunk) and then RefineGrid.
func Search(ctx context.Context, ev *Event, start lens.Params, set SearchSettings, progress func(GridNode)) (*SearchResult, error) {
	g, err := RunGrid(ctx, ev, start, set.Grid, progress)
	if err != nil {
		return nil, err
	}
	if g.Status == Cancelled {
		return &SearchResult{Grid: g, Status: Cancelled}, nil
	}
	return RefineGrid(ctx, ev, g, set)
}

// crossingRefineEvals caps the χ² evaluations of the caustic-crossing
// refinement of one grid minimum (and of a partner of such a solution): each
// costs a finite-source light curve.
const crossingRefineEvals = 300

// crossingTol is the finite-source accuracy of the refinement in crossing
// coordinates: 1e-2 costs a third to a half of the default 1e-3 and moves χ²
// at the truth of the caustic-crossing events of package problems by 3–5%
// (measured); the usual refinement that follows uses the event's own.
const crossingTol = 1e-2

// RefineGrid refines the best Keep distinct minima of a finished (possibly
// merged) grid with all binary parameters free (after a caustic-crossing grid,
// first in the crossing coordinates with a finite source, see refineCrossing), removes duplicates (same
// minimum reached twice, or one the mirror of another), finds each survivor's
// partners and ranks everything by χ². Cancellation keeps the candidates
// refined so far.
func RefineGrid(ctx context.Context, ev *Event, g *GridResult, set SearchSettings) (*SearchResult, error) {
	l, err := NewLikelihood(ev)
	if err != nil {
		return nil, err
	}
	keep := set.Keep
	if keep <= 0 {
		keep = 6
	}
	res := &SearchResult{Grid: g, Status: Converged}
	var lc *Likelihood // coarse finite source for the crossing coordinates
	if g.Crossing != nil {
		cev := *ev
		cev.Tol = math.Max(ev.Tol, crossingTol)
		if lc, err = NewLikelihood(&cev); err != nil {
			return nil, err
		}
	}
	var sols []*Solution
	for i, nd := range g.Minima(keep) {
		if ctx.Err() != nil {
			res.Status = Cancelled
			break
		}
		rs := set.Refine
		st := nd.Params
		l.ResetSolver()
		if g.Crossing != nil {
			// the grid used a point source without the jumps: refine in the
			// caustic-crossing coordinates with a finite source first
			lc.ResetSolver()
			if p, _, _, ok := refineCrossing(ctx, lc, st, g.Crossing, crossingRefineEvals); ok {
				st = p
			}
			if ctx.Err() != nil {
				res.Status = Cancelled
				break
			}
			if rs.Opt.MaxEval == 0 {
				rs.Opt.MaxEval = crossingRefineEvals
			}
		}
		if len(rs.Specs.Free()) == 0 {
			rs.Specs = DefaultSpecs(st)
		}
		sol, err := Refine(ctx, l, st, rs)
		if err != nil && sol == nil {
			return nil, err
		}
		if sol.Status == Cancelled {
			res.Status = Cancelled
			break
		}
		sol.Label = fmt.Sprintf("grid %d", i+1)
		sols = append(sols, sol)
	}
	sort.SliceStable(sols, func(i, j int) bool { return sols[i].Chi2 < sols[j].Chi2 })
	var distinct []*Solution
	for _, s := range sols {
		dup := false
		for _, d := range distinct {
			m, _ := PartnerStart(d.Params, ev.Ref, Mirror)
			if sameSolution(s.Params, d.Params) || sameSolution(s.Params, m) {
				dup = true
				break
			}
		}
		if !dup {
			distinct = append(distinct, s)
		}
	}
	for i, s := range distinct {
		s.Label = fmt.Sprintf("solution %d", i+1)
		c := Candidate{Solution: s, DeltaChi2: s.Chi2 - distinct[0].Chi2}
		if !set.NoPartners && res.Status != Cancelled {
			ps0 := RefineSettings{Specs: set.Refine.Specs, Opt: set.Refine.Opt, NoCov: set.Refine.NoCov}
			if g.Crossing != nil && ps0.Opt.MaxEval == 0 {
				// a partner of a caustic crossing misses the crossing: a
				// local fit from it only says how much worse it is
				ps0.Opt.MaxEval = crossingRefineEvals
			}
			ps, err := Partners(ctx, l, s, ps0)
			if err != nil {
				return nil, err
			}
			c.Partners = ps
			if ctx.Err() != nil {
				res.Status = Cancelled
			}
		}
		res.Candidates = append(res.Candidates, c)
	}
	return res, nil
}
