//go:build e2e && !js

package e2e

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"testing"

	"lensbook/wasm/protocol"
)

// Agreement of the browser (Go compiled to wasm, in a worker) and native Go on
// the same requests. The same Go code runs on both, but on amd64 some math
// functions (Exp, Log) are assembly while wasm uses the pure-Go versions, which
// may differ in the last bit. A closed-form or single-path computation then
// agrees to ~1e-15; an optimiser can amplify a last-bit difference into a
// different stopping point within its own tolerance. So:
//   - single-lens fit: every number within 1e-9 relative;
//   - grid: each node is an independent local optimisation (Nelder–Mead from
//     several α seeds, then a Levenberg–Marquardt polish); a last-bit change can
//     flip one comparison inside the simplex and end the node in a different
//     nearby point, so node χ² are compared loosely (1e-3 relative, measured
//     ~4e-4 at worst, most nodes bit-identical) while what the grid hands on
//     — its best node — must be the same node with χ² within 1e-6;
//   - refine: solution χ² within 1e-6 relative (its optimiser stops on χ²
//     changes well below 1e-3 of the ~3000 χ² total; measured differences are
//     printed) and parameters within 1e-3 of their 1σ;
//   - posterior: medians within Monte-Carlo error (comparePosterior).
const (
	singleTol    = 1e-9
	gridNodeTol  = 1e-3
	gridBestTol  = 1e-6
	refineRelTol = 1e-6
)

type logged struct {
	Req    protocol.Request `json:"req"`
	Kind   string           `json:"kind"`
	Result json.RawMessage  `json:"result"`
}

func compareNative(t *testing.T, p *page) {
	t.Helper()
	var reqs []logged
	p.evalInto(`lensbook.engine.log.filter(r => ["single", "grid", "refine", "posterior"].includes(r.step)).map(r => ({req: r, kind: (lensbook.engine.results.get(r.id) || {}).kind, result: (lensbook.engine.results.get(r.id) || {}).result}))`, &reqs)
	if len(reqs) == 0 {
		t.Fatal("no engine requests recorded")
	}
	for _, r := range reqs {
		if r.Kind != protocol.KindResult {
			continue
		}
		native := protocol.Handle(context.Background(), r.Req, nil)
		if native.Kind != protocol.KindResult {
			t.Errorf("native %s: %s %s", r.Req.Step, native.Kind, native.Error)
			continue
		}
		var a, b any
		json.Unmarshal(r.Result, &a)
		json.Unmarshal(native.Result, &b)
		switch r.Req.Step {
		case "posterior":
			comparePosterior(t, a, b)
		case "single":
			worst, where := maxRelDiff(a, b, "")
			t.Logf("single (request %d): wasm vs native max relative difference %.2g at %s", r.Req.ID, worst, where)
			if worst > singleTol {
				t.Errorf("single: wasm and native differ by %.3g relative at %s", worst, where)
			}
		case "grid":
			na := a.(map[string]any)["nodes"].([]any)
			nb := b.(map[string]any)["nodes"].([]any)
			if len(na) != len(nb) {
				t.Fatalf("grid: %d nodes in the browser, %d native", len(na), len(nb))
			}
			worst, at, differ := 0.0, 0, 0
			best := func(nodes []any) (int, float64) {
				k, c := -1, math.Inf(1)
				for i, n := range nodes {
					m := n.(map[string]any)
					if done, _ := m["done"].(bool); done && m["chi2"].(float64) < c {
						k, c = i, m["chi2"].(float64)
					}
				}
				return k, c
			}
			for i := range na {
				ca := na[i].(map[string]any)["chi2"].(float64)
				cb := nb[i].(map[string]any)["chi2"].(float64)
				if ca != cb {
					differ++
				}
				if d := math.Abs(ca-cb) / math.Max(math.Max(ca, cb), 1); d > worst {
					worst, at = d, i
				}
			}
			ka, ba := best(na)
			kb, bb := best(nb)
			t.Logf("grid (request %d): %d of %d node χ² bit-identical; largest relative difference %.2g at node %d; best node %d (χ² %.10g) vs native %d (χ² %.10g)", r.Req.ID, len(na)-differ, len(na), worst, at, ka, ba, kb, bb)
			if worst > gridNodeTol {
				t.Errorf("grid: node %d χ² differs by %.3g relative between wasm and native (tolerance %g)", at, worst, gridNodeTol)
			}
			if ka != kb || math.Abs(ba-bb) > gridBestTol*bb {
				t.Errorf("grid: best node %d χ² %.10g in the browser, %d χ² %.10g native", ka, ba, kb, bb)
			}
		case "refine":
			compareRefine(t, a, b)
		}
	}
}

// compareRefine compares every candidate and partner: χ² relative and each
// parameter in units of its 1σ.
func compareRefine(t *testing.T, a, b any) {
	t.Helper()
	ca := a.(map[string]any)["candidates"].([]any)
	cb := b.(map[string]any)["candidates"].([]any)
	if len(ca) != len(cb) {
		t.Errorf("refine: %d candidates in the browser, %d native", len(ca), len(cb))
		return
	}
	var sa, sb []map[string]any
	collect := func(cs []any, out *[]map[string]any) {
		for _, c := range cs {
			m := c.(map[string]any)
			*out = append(*out, m["solution"].(map[string]any))
			ps, _ := m["partners"].([]any)
			for _, p := range ps {
				*out = append(*out, p.(map[string]any)["solution"].(map[string]any))
			}
		}
	}
	collect(ca, &sa)
	collect(cb, &sb)
	if len(sa) != len(sb) {
		t.Errorf("refine: %d solutions in the browser, %d native", len(sa), len(sb))
		return
	}
	worstChi2, worstSigma := 0.0, 0.0
	for i := range sa {
		c1, c2 := sa[i]["chi2"].(float64), sb[i]["chi2"].(float64)
		worstChi2 = math.Max(worstChi2, math.Abs(c1-c2)/math.Max(c1, c2))
		free, _ := sa[i]["free"].([]any)
		sig, _ := sa[i]["sigma"].([]any)
		pa := sa[i]["params"].(map[string]any)
		pb := sb[i]["params"].(map[string]any)
		for k, f := range free {
			if k >= len(sig) {
				break
			}
			s, _ := sig[k].(float64)
			field := map[string]string{"t0": "T0", "u0": "U0", "tE": "TE", "rho": "Rho", "s": "S", "q": "Q", "alpha": "Alpha"}[f.(string)]
			if field == "" || !(s > 0) {
				continue
			}
			worstSigma = math.Max(worstSigma, math.Abs(pa[field].(float64)-pb[field].(float64))/s)
		}
	}
	t.Logf("refine: %d solutions; largest χ² relative difference %.2g, largest parameter difference %.2g σ", len(sa), worstChi2, worstSigma)
	if worstChi2 > refineRelTol {
		t.Errorf("refine: χ² differs by %.3g relative between wasm and native (tolerance %g)", worstChi2, refineRelTol)
	}
	if worstSigma > 1e-3 {
		t.Errorf("refine: a parameter differs by %.3g σ between wasm and native (tolerance 1e-3 σ)", worstSigma)
	}
}

// maxRelDiff walks two decoded JSON values and returns the largest relative
// difference of matching numbers (structure differences count as +Inf).
func maxRelDiff(a, b any, path string) (float64, string) {
	switch x := a.(type) {
	case map[string]any:
		y, ok := b.(map[string]any)
		if !ok || len(x) != len(y) {
			return math.Inf(1), path
		}
		worst, where := 0.0, path
		for k, v := range x {
			if k == "elapsed_ms" || k == "Runtime" {
				continue
			}
			d, w := maxRelDiff(v, y[k], path+"."+k)
			if d > worst {
				worst, where = d, w
			}
		}
		return worst, where
	case []any:
		y, ok := b.([]any)
		if !ok || len(x) != len(y) {
			return math.Inf(1), path
		}
		worst, where := 0.0, path
		for i := range x {
			d, w := maxRelDiff(x[i], y[i], fmt.Sprintf("%s[%d]", path, i))
			if d > worst {
				worst, where = d, w
			}
		}
		return worst, where
	case float64:
		y, ok := b.(float64)
		if !ok {
			return math.Inf(1), path
		}
		if x == y {
			return 0, path
		}
		// counts of evaluations are integers: any change is a different path
		return math.Abs(x-y) / math.Max(math.Max(math.Abs(x), math.Abs(y)), 1e-300), path
	default:
		if fmt.Sprint(a) != fmt.Sprint(b) {
			return math.Inf(1), path
		}
		return 0, path
	}
}

// comparePosterior checks every marginal median of the browser run against
// the native run within 4 Monte-Carlo standard errors: the spread of a
// median of n effective samples is about 1.2533·σ/√n (asymptotic variance of
// the sample median of a normal, common practice), σ ≈ half the 68 % width.
func comparePosterior(t *testing.T, a, b any) {
	t.Helper()
	ma := a.(map[string]any)["modes"].([]any)
	mb := b.(map[string]any)["modes"].([]any)
	if len(ma) != len(mb) {
		t.Fatalf("posterior: %d modes in the browser, %d native", len(ma), len(mb))
	}
	for i := range ma {
		pa := ma[i].(map[string]any)["params"].([]any)
		pb := mb[i].(map[string]any)["params"].([]any)
		for j := range pa {
			x, y := pa[j].(map[string]any), pb[j].(map[string]any)
			med1, _ := x["median"].(float64)
			med2, _ := y["median"].(float64)
			lo, _ := x["lower"].(float64)
			hi, _ := x["upper"].(float64)
			ess, _ := x["ess"].(float64)
			sigma := (hi - lo) / 2
			if ess < 1 {
				ess = 1
			}
			se := 1.2533 * sigma / math.Sqrt(ess) * math.Sqrt2 // difference of two independent-ish medians
			t.Logf("posterior %s: median wasm %.8g native %.8g (MC standard error %.2g)", x["name"], med1, med2, se)
			if math.Abs(med1-med2) > 4*se && med1 != med2 {
				t.Errorf("posterior %s: medians %.8g vs %.8g differ by more than 4 MC standard errors (%.2g)", x["name"], med1, med2, se)
			}
		}
	}
}
