package fit

import (
	"fmt"
	"math"
	"sort"

	"lensbook/lens"
)

// binForGrid returns a copy of ev with runs of consecutive points merged where
// the start model is smooth, for the grid stage only (refinement always uses
// every point). Within one dataset, sorted by time, a bin grows while its time
// span stays ≤ days, the start model's magnification changes by ≤ tol
// (relative), and no point in it departs from the start model by 3σ or more
// (so anomalies keep every point). A bin becomes one point at the weighted mean
// time and flux with σ = (Σ 1/σ'²)^(−1/2) — inverse-variance binning, common
// practice: for a model linear across the bin the χ² differences between
// models are unchanged. It returns ev itself when nothing merges.
func binForGrid(ev *Event, start lens.Params, days, tol float64) (*Event, error) {
	l, err := NewLikelihood(ev)
	if err != nil {
		return nil, err
	}
	p := start
	p.S, p.Q, p.Alpha = 0, 0, 0
	if _, err := l.Chi2(&p); err != nil {
		return nil, fmt.Errorf("fit: grid start model: %w", err)
	}
	out := *ev
	out.Datasets = make([]*Dataset, len(ev.Datasets))
	out.Masks = nil
	merged := false
	for k, d := range ev.Datasets {
		s := &l.sets[k]
		fs, fb := l.fits[k].Fs, l.fits[k].Fb
		n := len(s.t)
		ord := make([]int, n)
		for i := range ord {
			ord[i] = i
		}
		sort.SliceStable(ord, func(a, b int) bool { return s.t[ord[a]] < s.t[ord[b]] })
		nd := &Dataset{Name: d.Name, Band: d.Band, TimeSystem: d.TimeSystem, ZeroPoint: d.ZeroPoint, LD: d.LD}
		smooth := func(i int) bool { return math.Abs((s.f[i]-fs*s.a[i]-fb)*s.isig[i]) < 3 }
		for i := 0; i < n; {
			first := ord[i]
			j := i + 1
			if smooth(first) {
				for j < n {
					c := ord[j]
					if s.t[c]-s.t[first] > days || math.Abs(s.a[c]-s.a[first]) > tol*s.a[first] || !smooth(c) {
						break
					}
					j++
				}
			}
			var sw, st, sf float64
			for _, c := range ord[i:j] {
				sw += s.w[c]
				st += s.w[c] * s.t[c]
				sf += s.w[c] * s.f[c]
			}
			nd.T = append(nd.T, st/sw)
			nd.Flux = append(nd.Flux, sf/sw)
			nd.Err = append(nd.Err, 1/math.Sqrt(sw))
			nd.Line = append(nd.Line, lineOf(d, s.idx[first]))
			if j-i > 1 {
				merged = true
			}
			i = j
		}
		out.Datasets[k] = nd
	}
	if !merged {
		return ev, nil
	}
	return &out, nil
}
