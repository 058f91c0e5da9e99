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
// the same requests. Deterministic steps must agree to about 1e-9 relative:
// the same Go code runs on both, but on amd64 some math functions (Exp, Log)
// are assembly while wasm uses the pure-Go versions, which may differ in the
// last bit; optimisers amplify that only slightly because they stop on χ²
// changes far above it. The posterior is compared within Monte-Carlo error.
const deterministicTol = 1e-9

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
		if r.Req.Step == "posterior" {
			comparePosterior(t, a, b)
			continue
		}
		worst, where := maxRelDiff(a, b, "")
		t.Logf("%s (request %d): wasm vs native max relative difference %.2g at %s", r.Req.Step, r.Req.ID, worst, where)
		if worst > deterministicTol {
			t.Errorf("%s: wasm and native differ by %.3g relative at %s", r.Req.Step, worst, where)
		}
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
