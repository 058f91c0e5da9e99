package fit

import (
	"math"
	"sort"
)

// Jump is a step in the residuals of a smooth model: the signature of a caustic
// crossing, where the magnification changes by a large factor within the time
// the source disk takes to pass the caustic line (a fold entry or exit,
// Schneider & Weiss 1986, A&A 164, 237), while a smooth single-lens model changes little.
type Jump struct {
	T     float64 `json:"t"`     // time of the step (full JD)
	Sigma float64 `json:"sigma"` // size of the step in σ of its estimate; > 0 for a rise
	// Width is the time over which the residuals climb or fall (days): about
	// the source disk's passage of the caustic, 2ρ·tE/sin θ (geometry).
	Width   float64 `json:"width"`
	Dataset int     `json:"dataset"`
}

// jumpWindows are the half-widths (days) of the two line fits that FindJumps
// compares: each must hold at least 3 points, so the shortest suits dense
// follow-up and the longest a survey cadence of a few points per night.
var jumpWindows = []float64{0.1, 0.3, 1}

// FindJumps returns the steps of the residuals res (any order, several
// datasets) of at least minSigma, strongest first, at most max (≤ 0: all), no
// two within 1 day. For every gap between consecutive points of a dataset it
// fits a weighted straight line to the residuals on each side within a window
// (jumpWindows) and takes the difference of the two lines at the gap over its
// standard error; a smooth departure from the model bends the residuals but
// does not break them. This is a two-segment change-point test (common
// practice).
func FindJumps(res []Residual, minSigma float64, max int) []Jump {
	byDS := map[int][]Residual{}
	for _, r := range res {
		if isFinite(r.Norm) && r.Sigma > 0 {
			byDS[r.Dataset] = append(byDS[r.Dataset], r)
		}
	}
	var all []Jump
	keys := make([]int, 0, len(byDS))
	for k := range byDS {
		keys = append(keys, k)
	}
	sort.Ints(keys)
	for _, k := range keys {
		rs := byDS[k]
		sort.Slice(rs, func(i, j int) bool { return rs[i].T < rs[j].T })
		for _, w := range jumpWindows {
			lo, hi := 0, 0
			for i := 1; i < len(rs); i++ {
				tb := 0.5 * (rs[i-1].T + rs[i].T)
				for lo < i && rs[lo].T < rs[i].T-w {
					lo++
				}
				if hi < i {
					hi = i
				}
				for hi < len(rs) && rs[hi].T < rs[i].T+w {
					hi++
				}
				a1, v1, ok1 := lineAt(rs[lo:i], tb)
				a2, v2, ok2 := lineAt(rs[i:hi], tb)
				if !ok1 || !ok2 {
					continue
				}
				all = append(all, Jump{T: tb, Sigma: (a2 - a1) / math.Sqrt(v1+v2), Dataset: k})
			}
		}
	}
	sort.SliceStable(all, func(i, j int) bool { return math.Abs(all[i].Sigma) > math.Abs(all[j].Sigma) })
	var out []Jump
	for _, j := range all {
		if math.Abs(j.Sigma) < minSigma || (max > 0 && len(out) >= max) {
			break
		}
		near := false
		for _, o := range out {
			if math.Abs(o.T-j.T) < 1 {
				near = true
				break
			}
		}
		if !near {
			j.Width = rampWidth(byDS[j.Dataset], j)
			out = append(out, j)
		}
	}
	return out
}

// lineAt fits r.Flux − r.Model = a + b·(t − t0) by weighted least squares and
// returns a and its variance; it needs 3 points and two distinct times.
func lineAt(rs []Residual, t0 float64) (a, va float64, ok bool) {
	if len(rs) < 3 {
		return 0, 0, false
	}
	var sw, st, sf, stt, stf float64
	for _, r := range rs {
		w := 1 / (r.Sigma * r.Sigma)
		x := r.T - t0
		y := r.Flux - r.Model
		sw += w
		st += w * x
		sf += w * y
		stt += w * x * x
		stf += w * x * y
	}
	det := sw*stt - st*st
	if !(det > 1e-12*sw*stt) {
		return 0, 0, false
	}
	return (stt*sf - st*stf) / det, stt / det, true
}

// rampWidth estimates how long the residuals of a step take to climb from 20%
// to 80% of the step, scaled to the full passage (÷ 0.6), from the points of its
// dataset: the bright side of a caustic crossing is after a rise (entry) and
// before a fall (exit). The base is the mean residual up to 0.3 d on the faint
// side, the top the largest residual within 1 d on the bright side. It returns
// 0 when the points do not resolve the step. A fold's finite-source profile is
// steeper near its end than a ramp, so this underestimates the disk passage:
// by a factor 1.6–2 on the caustic crossings of package problems (measured).
func rampWidth(rs []Residual, j Jump) float64 {
	dir := 1.0 // d = (t − T)·dir grows towards the bright side
	if j.Sigma < 0 {
		dir = -1
	}
	var base, top, dTop float64
	nb := 0
	topSet := false
	for _, r := range rs {
		d := (r.T - j.T) * dir
		y := r.Flux - r.Model
		if d < 0 && d > -0.3 {
			base += y
			nb++
		} else if d > 0 && d < 1 && (!topSet || y > top) {
			top, dTop, topSet = y, d, true
		}
	}
	if nb == 0 || !topSet || !(top > base/float64(nb)) {
		return 0
	}
	base /= float64(nb)
	y20, y80 := base+0.2*(top-base), base+0.8*(top-base)
	d20, d80 := math.Inf(1), math.Inf(1)
	for _, r := range rs {
		d := (r.T - j.T) * dir
		if d <= -0.3 || d > dTop {
			continue
		}
		y := r.Flux - r.Model
		if y >= y20 && d < d20 {
			d20 = d
		}
		if y >= y80 && d < d80 {
			d80 = d
		}
	}
	if math.IsInf(d20, 1) || math.IsInf(d80, 1) {
		return 0
	}
	return (d80 - d20) / 0.6
}
