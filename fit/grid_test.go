package fit_test

import (
	"context"
	"encoding/json"
	"math"
	"reflect"
	"testing"

	"lensbook/fit"
	"lensbook/fit/problems"
	"lensbook/lens"
)

// smallGrid is a cheap grid around the planetary central-caustic problem.
func smallGrid() fit.GridSettings {
	return fit.GridSettings{LogSMin: -0.2, LogSMax: 0.2, NS: 5, LogQMin: -3.5, LogQMax: -2, NQ: 4, Alphas: 4, Polish: 1, MaxEval: 12, Seed: 7}
}

func planetStart(s *problems.Spec) lens.Params {
	p := s.Truth.Params
	return lens.Params{T0: p.T0 + 0.01, U0: p.U0 * 1.1, TE: p.TE * 0.95}
}

func TestGridChunksMergeToSingleChunk(t *testing.T) {
	s := problems.PlanetCentral()
	ev := simulate(t, s, 3)
	set := smallGrid()
	ctx := context.Background()
	one, err := fit.RunGrid(ctx, ev, planetStart(s), set, nil)
	if err != nil {
		t.Fatal(err)
	}
	var parts []*fit.GridResult
	for c := 2; c >= 0; c-- { // any order
		g, err := fit.RunGridChunk(ctx, ev, planetStart(s), set, c, 3, nil)
		if err != nil {
			t.Fatal(err)
		}
		parts = append(parts, g)
	}
	merged, err := fit.MergeGrid(parts...)
	if err != nil {
		t.Fatal(err)
	}
	if merged.Status != fit.Converged || one.Status != fit.Converged {
		t.Fatalf("status one=%v merged=%v", one.Status, merged.Status)
	}
	if !reflect.DeepEqual(one.Nodes, merged.Nodes) {
		for k := range one.Nodes {
			if !reflect.DeepEqual(one.Nodes[k], merged.Nodes[k]) {
				t.Fatalf("node %d differs:\n one    %+v\n merged %+v", k, one.Nodes[k], merged.Nodes[k])
			}
		}
	}
	// a missing chunk leaves the merged status not converged
	part, _ := fit.MergeGrid(parts[0], parts[1])
	if part.Status == fit.Converged {
		t.Error("merge of 2 of 3 chunks reports converged")
	}
	if _, err := fit.MergeGrid(parts[0], parts[0]); err == nil {
		t.Error("duplicate chunk accepted")
	}
	other := set
	other.Seed++
	g2, _ := fit.RunGridChunk(ctx, ev, planetStart(s), other, 1, 3, nil)
	if _, err := fit.MergeGrid(parts[0], g2); err == nil {
		t.Error("chunks of different grids merged")
	}
	// the result survives JSON (it travels between workers)
	js, err := json.Marshal(merged)
	if err != nil {
		t.Fatal(err)
	}
	var back fit.GridResult
	if err := json.Unmarshal(js, &back); err != nil || !reflect.DeepEqual(back.Nodes, merged.Nodes) {
		t.Fatalf("JSON round trip failed: %v", err)
	}
}

func TestGridCancelKeepsFinishedNodes(t *testing.T) {
	s := problems.PlanetCentral()
	ev := simulate(t, s, 3)
	ctx, cancel := context.WithCancel(context.Background())
	calls := 0
	g, err := fit.RunGrid(ctx, ev, planetStart(s), smallGrid(), func(nd fit.GridNode) {
		calls++
		if !nd.Done {
			t.Errorf("progress for unfinished node %d", nd.Index)
		}
		if calls == 3 {
			cancel()
		}
	})
	if err != nil {
		t.Fatal(err)
	}
	done := g.DoneNodes()
	if g.Status != fit.Cancelled || done != 3 {
		t.Fatalf("status %v with %d nodes done, want cancelled with 3", g.Status, done)
	}
}

func TestGridSettingsValidation(t *testing.T) {
	s := problems.PlanetCentral()
	ev := simulate(t, s, 3)
	for _, bad := range []fit.GridSettings{
		{LogSMin: 1, LogSMax: -1},
		{LogQMin: -3, LogQMax: 1},
		{Rho: -1},
		{NS: -2},
	} {
		if _, err := fit.RunGrid(context.Background(), ev, planetStart(s), bad, nil); err == nil {
			t.Errorf("settings %+v accepted", bad)
		}
	}
	if _, err := fit.RunGridChunk(context.Background(), ev, planetStart(s), smallGrid(), 3, 3, nil); err == nil {
		t.Error("chunk 3 of 3 accepted")
	}
	a, b := fit.GridSettings{Seed: 1}.AlphaSeeds(), fit.GridSettings{Seed: 1}.AlphaSeeds()
	c := fit.GridSettings{Seed: 2}.AlphaSeeds()
	if !reflect.DeepEqual(a, b) || reflect.DeepEqual(a, c) || len(a) != 8 {
		t.Errorf("α seeds: same seed %v vs %v, other seed %v", a, b, c)
	}
}

// The mirror partner is an exact symmetry without parallax: same χ².
func TestMirrorPartnerExact(t *testing.T) {
	s := problems.PlanetCentral()
	ev := simulate(t, s, 4)
	l, _ := fit.NewLikelihood(ev)
	p := s.Truth.Params
	c0, _ := l.Chi2(&p)
	sol := &fit.Solution{Params: p, Chi2: c0}
	m, err := fit.PartnerStart(p, ev.Ref, fit.Mirror)
	if err != nil {
		t.Fatal(err)
	}
	c1, _ := l.Chi2(&m)
	if d := c1 - c0; d > 1e-6*c0 || d < -1e-6*c0 {
		t.Fatalf("mirror χ² %v vs %v", c1, c0)
	}
	_ = sol
}

// With a caustic crossing in the data the grid adds the chord seeds and the
// point source without the jump windows; chunks still merge to the grid of a
// single chunk, bit for bit.
func TestGridChunksMergeWithCrossing(t *testing.T) {
	s := problems.PlanetaryCaustic()
	ev := simulate(t, s, 3)
	p := s.Truth.Params
	start := lens.Params{T0: p.T0 - 0.04, U0: 0.111, TE: 29.7}
	set := fit.GridSettings{LogSMin: 0.1, LogSMax: 0.16, NS: 2, LogQMin: -3.2, LogQMax: -3, NQ: 2, Seed: 5}
	ctx := context.Background()
	one, err := fit.RunGrid(ctx, ev, start, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	if one.Crossing == nil || one.AnomalyT == 0 {
		t.Fatalf("no caustic crossing (%+v) or anomaly time (%v) read from the planetary-caustic event", one.Crossing, one.AnomalyT)
	}
	if tin, tout := one.Crossing.TIn-p.T0, one.Crossing.TOut-p.T0; math.Abs(tin-15.78) > 0.3 || math.Abs(tout-17.31) > 0.3 {
		t.Errorf("crossing read at t0 %+.3f, %+.3f d; the truth's trajectory crosses at +15.78, +17.31 d", tin, tout)
	}
	var parts []*fit.GridResult
	for c := range 2 {
		g, err := fit.RunGridChunk(ctx, ev, start, set, c, 2, nil)
		if err != nil {
			t.Fatal(err)
		}
		parts = append(parts, g)
	}
	merged, err := fit.MergeGrid(parts[1], parts[0])
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(one.Nodes, merged.Nodes) || !reflect.DeepEqual(one.Crossing, merged.Crossing) {
		t.Fatalf("merged chunks differ from one chunk:\n one    %+v\n merged %+v", one.Nodes, merged.Nodes)
	}
}

// Cancelling a caustic-crossing grid keeps the nodes finished so far.
func TestGridCancelWithCrossing(t *testing.T) {
	s := problems.PlanetaryCaustic()
	ev := simulate(t, s, 3)
	p := s.Truth.Params
	start := lens.Params{T0: p.T0 - 0.04, U0: 0.111, TE: 29.7}
	ctx, cancel := context.WithCancel(context.Background())
	calls := 0
	g, err := fit.RunGrid(ctx, ev, start, fit.GridSettings{LogSMin: 0.1, LogSMax: 0.16, NS: 2, LogQMin: -3.2, LogQMax: -3, NQ: 2}, func(nd fit.GridNode) {
		calls++
		if calls == 2 {
			cancel()
		}
	})
	if err != nil {
		t.Fatal(err)
	}
	done := g.DoneNodes()
	if g.Status != fit.Cancelled || done != 2 || g.Crossing == nil {
		t.Fatalf("status %v, %d nodes done, crossing %v: want cancelled after 2 nodes of a crossing grid", g.Status, done, g.Crossing != nil)
	}
}
