package fit

import (
	"context"
	"math"
	"sort"

	"lensbook/lens"
)

// gridPlan is what every node of a grid shares: the likelihood of the grid
// stage, the seeds' ingredients and the settings. It is computed from the
// event, start and settings alone, so every chunk computes the same plan.
type gridPlan struct {
	set    GridSettings
	start  lens.Params
	l      *Likelihood
	alphas []float64
	rho    float64
	specs  Specs
	opt    OptSettings
	ta     float64   // anomaly time for the caustic-centre seeds, 0 for none
	cross  *Crossing // caustic crossing for the chord seeds, nil for none
}

// crossingSamples is the number of points per caustic between which the chord
// seeds run (pairs with the entry in the upper half plane: the mirror image
// below gives the same light curve without parallax).
const crossingSamples = 16

func newGridPlan(ev *Event, start lens.Params, set GridSettings) (*gridPlan, error) {
	pl := &gridPlan{set: set, start: start, alphas: set.AlphaSeeds(), rho: set.Rho}
	if pl.rho == 0 {
		pl.rho = start.Rho
	}
	// the start's residuals: anomaly window and jumps
	l0, err := NewLikelihood(ev)
	if err != nil {
		return nil, err
	}
	p0 := start
	p0.S, p0.Q, p0.Alpha = 0, 0, 0
	res, err := l0.AppendResiduals(nil, &p0)
	if err != nil {
		return nil, err
	}
	pl.ta = set.AnomalyT
	if pl.ta == 0 {
		if a := FindAnomaly(res, start.TE, 0); a.Found {
			if t := (a.T1 + a.T2) / 2; math.Abs(t-start.T0) > 0.1*start.TE {
				pl.ta = t
			}
		}
	}
	gev := ev
	if !set.NoCrossing {
		pl.cross = findCrossing(FindJumps(res, crossingMinSigma, 6))
	}
	if pl.cross != nil {
		pl.rho = 0
		gev = maskWindows(ev, pl.cross.Masked)
	}
	if !set.NoBin {
		if gev, err = binForGrid(gev, start, set.BinDays, set.BinTol); err != nil {
			return nil, err
		}
	}
	if pl.l, err = NewLikelihood(gev); err != nil {
		return nil, err
	}
	free := []Param{T0, U0, TE, Alpha}
	if set.FreeRho && pl.rho > 0 {
		free = append(free, Rho)
	}
	pl.specs = FreeSpecs(free...)
	pl.opt = OptSettings{Method: set.Method, MaxEval: set.MaxEval, Tol: set.Tol}
	return pl, nil
}

// node computes one node; it returns true when ctx was cancelled during it.
func (pl *gridPlan) node(ctx context.Context, nd *GridNode) bool {
	l := pl.l
	l.ResetSolver()
	s, q := math.Pow(10, nd.LogS), math.Pow(10, nd.LogQ)
	base := pl.start
	base.S, base.Q, base.Rho = s, q, pl.rho
	seeds := make([]lens.Params, 0, len(pl.alphas)+8)
	for _, a := range pl.alphas {
		p := base
		p.Alpha = a
		seeds = append(seeds, p)
	}
	var paths []causticPath
	if pl.ta > 0 || pl.cross != nil {
		if b, err := lens.NewBinary(s, q); err == nil {
			paths = causticPaths(b, 64)
		}
	}
	c := lens.ReferencePoint(l.ev.Ref, s, q)
	if pl.ta > 0 {
		for _, path := range paths {
			var cen complex128
			for _, z := range path.z {
				cen += z
			}
			cen /= complex(float64(len(path.z)), 0)
			seeds = append(seeds, throughPoint(base, c, cen, pl.ta)...)
		}
	}
	chis := make([]float64, len(seeds))
	order := make([]int, len(seeds))
	for i := range seeds {
		order[i] = i
		ch, err := l.Chi2(&seeds[i])
		nd.Evals++
		if err != nil {
			ch = math.Inf(1)
			nd.Err = err.Error()
		}
		chis[i] = ch
	}
	sort.SliceStable(order, func(i, j int) bool { return chis[order[i]] < chis[order[j]] })
	best := math.Inf(1)
	if len(order) > 0 && !math.IsInf(chis[order[0]], 1) {
		best, nd.Params = chis[order[0]], seeds[order[0]]
	}
	for _, i := range order[:min(pl.set.Polish, len(order))] {
		if math.IsInf(chis[i], 1) {
			break
		}
		sol, err := Optimize(ctx, l, seeds[i], pl.specs, pl.opt)
		if sol != nil {
			nd.Evals += sol.Evals
		}
		if err != nil {
			nd.Err = err.Error()
			continue
		}
		if sol.Status == Cancelled {
			return true
		}
		if sol.Chi2 < best {
			best, nd.Params = sol.Chi2, sol.Params
		}
	}
	if pl.cross != nil {
		for pi := range paths {
			ch, p, ev, cancelled := pl.chords(ctx, &paths[pi], c, base)
			nd.Evals += ev
			if cancelled {
				return true
			}
			if ch < best {
				best, nd.Params = ch, p
			}
		}
	}
	if !math.IsInf(best, 1) {
		nd.Done, nd.Chi2, nd.Err = true, best, ""
	}
	return false
}

// chords seeds the node with the chords of path crossed at the observed entry
// and exit times, evaluates each once and polishes the best Polish over the
// crossing coordinates (ℓin, ℓout, tin, tout) of Cassan (2008). It returns the
// best χ² and model, the χ² evaluations used and whether ctx was cancelled.
func (pl *gridPlan) chords(ctx context.Context, path *causticPath, c complex128, base lens.Params) (float64, lens.Params, int, bool) {
	l := pl.l
	cr := pl.cross
	type seed struct {
		x   [4]float64
		chi float64
	}
	var seeds []seed
	evals := 0
	m := crossingSamples
	for i := range m {
		li := (float64(i) + 0.5) / float64(m)
		if imag(path.at(li)) < 0 {
			continue
		}
		for j := range m {
			if j == i {
				continue
			}
			x := [4]float64{li, (float64(j) + 0.5) / float64(m), cr.TIn, cr.TOut}
			p, ok := chordAt(path, c, base, x[:])
			if !ok {
				continue
			}
			ch, err := l.Chi2(&p)
			evals++
			if err != nil {
				continue
			}
			seeds = append(seeds, seed{x, ch})
		}
	}
	sort.SliceStable(seeds, func(a, b int) bool { return seeds[a].chi < seeds[b].chi })
	best, bestP := math.Inf(1), base
	if len(seeds) > 0 {
		bestP, _ = chordAt(path, c, base, seeds[0].x[:])
		best = seeds[0].chi
	}
	res := func(r, x []float64) float64 {
		p, ok := chordAt(path, c, base, x)
		if !ok {
			return math.Inf(1)
		}
		ch, err := l.Residuals(r, &p)
		if err != nil {
			return math.Inf(1)
		}
		return ch
	}
	h := []float64{1e-3, 1e-3, 0.01, 0.01}
	for _, sd := range seeds[:min(pl.set.Polish, len(seeds))] {
		x := sd.x[:]
		ch, ev, cancelled := lmResiduals(ctx, res, x, h, l.N(), pl.set.MaxEval, pl.set.Tol)
		evals += ev
		if cancelled {
			return best, bestP, evals, true
		}
		if ch < best {
			if p, ok := chordAt(path, c, base, x); ok {
				best, bestP = ch, p
			}
		}
	}
	return best, bestP, evals, false
}
