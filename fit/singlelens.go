package fit

import (
	"context"
	"fmt"
	"math"
	"sort"
	"strings"

	"lensbook/lens"
)

// SingleSettings configures FitSingle. The zero value starts from GuessSingle,
// fits a point source and then a finite source, and uses the default optimiser.
type SingleSettings struct {
	// Start, when its TE > 0, replaces the automatic starting point.
	Start lens.Params `json:"start"`
	Opt   OptSettings `json:"opt"`
	// NoFinite skips the finite-source fit.
	NoFinite bool `json:"noFinite"`
	// FiniteDChi2 is the χ² improvement a finite source must bring to be
	// preferred over a point source; 0 means 10 (chosen here: a few σ for one
	// extra parameter).
	FiniteDChi2 float64 `json:"finiteDChi2"`
	// AnomalySigma is the significance above which a run of excess residual χ²
	// counts as an anomaly; 0 means 5.
	AnomalySigma float64 `json:"anomalySigma"`
}

// SingleResult is the outcome of FitSingle.
type SingleResult struct {
	Start  lens.Params `json:"start"`            // starting point used (automatic unless given)
	Point  *Solution   `json:"point"`            // point-source point-lens fit
	Finite *Solution   `json:"finite,omitempty"` // finite-source point-lens fit (nil if skipped)
	// PreferFinite is true when Finite improves χ² by more than FiniteDChi2.
	PreferFinite bool       `json:"preferFinite"`
	Residuals    []Residual `json:"residuals"` // of the preferred fit
	Anomaly      Anomaly    `json:"anomaly"`   // of the preferred fit
	// Clean is the preferred model refitted without the anomaly windows (found
	// and masked repeatedly, see cleanFit); nil when no anomaly was found. An
	// anomaly pulls a single-lens fit away from the underlying event, so Clean
	// is the better seed of t0, u0, tE for a binary search.
	Clean  *Solution `json:"clean,omitempty"`
	Status Status    `json:"status"`
}

// GridStart returns the seed of a binary search: Clean when present, else the
// preferred fit.
func (r *SingleResult) GridStart() lens.Params {
	if r.Clean != nil {
		return r.Clean.Params
	}
	return r.Best().Params
}

// Best returns the preferred fit.
func (r *SingleResult) Best() *Solution {
	if r.PreferFinite && r.Finite != nil {
		return r.Finite
	}
	return r.Point
}

// AnomalyTime returns the midpoint of the anomaly window when an anomaly was
// found away from the peak (more than 0.1 tE from t0 of GridStart), else 0:
// the value for GridSettings.AnomalyT (a planetary-caustic signature; an
// anomaly at the peak comes from the central caustic and needs no such seed).
// The grid reads the same from the residuals of its start when AnomalyT is 0.
func (r *SingleResult) AnomalyTime() float64 {
	a := r.Anomaly
	if !a.Found {
		return 0
	}
	p := r.GridStart()
	if t := (a.T1 + a.T2) / 2; math.Abs(t-p.T0) > 0.1*p.TE {
		return t
	}
	return 0
}

// Anomaly is the strongest localised departure of the data from a model: the
// time window in which the residual χ² most exceeds its expectation (one per
// point).
type Anomaly struct {
	Found bool    `json:"found"` // Sigma above the threshold
	T1    float64 `json:"t1"`    // window start (full JD)
	T2    float64 `json:"t2"`    // window end (full JD)
	N     int     `json:"n"`     // points in the window
	// Excess is Σ r² − N in the window (r the normalised residuals).
	Excess float64 `json:"excess"`
	// Sigma is Excess/√(2N), the excess in units of the χ²_N standard deviation.
	Sigma float64 `json:"sigma"`
	// Chi2Dof is χ²/N over all points (N the number of used points).
	Chi2Dof float64 `json:"chi2dof"`
}

// FindAnomaly scans residuals (any order) with windows of width tE·{0.003, 0.01,
// 0.03, 0.1, 0.3} days and returns the window of largest significance.
// Residuals with Norm outside ±∞ are ignored.
func FindAnomaly(res []Residual, tE, sigma float64) Anomaly {
	if sigma <= 0 {
		sigma = 5
	}
	rs := make([]Residual, 0, len(res))
	tot := 0.0
	for _, r := range res {
		if isFinite(r.Norm) {
			rs = append(rs, r)
			tot += r.Norm * r.Norm
		}
	}
	var a Anomaly
	if len(rs) == 0 {
		return a
	}
	a.Chi2Dof = tot / float64(len(rs))
	sort.Slice(rs, func(i, j int) bool { return rs[i].T < rs[j].T })
	best := math.Inf(-1)
	for _, f := range []float64{0.003, 0.01, 0.03, 0.1, 0.3} {
		w := f * tE
		j := 0
		sum := 0.0
		for i := range rs {
			// window [rs[j].T, rs[i].T] with width ≤ w
			sum += rs[i].Norm * rs[i].Norm
			for rs[i].T-rs[j].T > w {
				sum -= rs[j].Norm * rs[j].Norm
				j++
			}
			n := i - j + 1
			if n < 3 {
				continue
			}
			ex := sum - float64(n)
			sg := ex / math.Sqrt(2*float64(n))
			if sg > best {
				best = sg
				a.T1, a.T2, a.N, a.Excess, a.Sigma = rs[j].T, rs[i].T, n, ex, sg
			}
		}
	}
	a.Found = a.Sigma > sigma
	return a
}

// GuessSingle estimates a point-lens starting point from the data: the peak
// time and flux of the dataset spanning the longest time (smoothed by a running
// median of 5 points), its baseline (the median flux), the peak magnification
// A = F_peak/F_base assuming no blending, u0 from inverting A(u) (Paczynski 1986,
// ApJ 304, 1), and tE from the half-maximum width.
func GuessSingle(ev *Event) (lens.Params, error) {
	if err := ev.Validate(); err != nil {
		return lens.Params{}, err
	}
	// primary dataset: the longest time span
	var pk int
	bestSpan := -1.0
	for k, d := range ev.Datasets {
		t1, t2 := math.Inf(1), math.Inf(-1)
		for i, t := range d.T {
			if d.Used(i) {
				t1, t2 = math.Min(t1, t), math.Max(t2, t)
			}
		}
		if t2-t1 > bestSpan {
			bestSpan, pk = t2-t1, k
		}
	}
	d := ev.Datasets[pk]
	type pt struct{ t, f float64 }
	var pts []pt
	for i := range d.T {
		if d.Used(i) {
			pts = append(pts, pt{d.T[i], d.Flux[i]})
		}
	}
	if len(pts) < 5 {
		return lens.Params{}, fmt.Errorf("fit: dataset %q has %d used points, too few to guess a start", d.Name, len(pts))
	}
	sort.Slice(pts, func(i, j int) bool { return pts[i].t < pts[j].t })
	sm := make([]float64, len(pts))
	win := make([]float64, 0, 5)
	for i := range pts {
		win = win[:0]
		for j := max(0, i-2); j <= min(len(pts)-1, i+2); j++ {
			win = append(win, pts[j].f)
		}
		sm[i] = medianInPlace(win)
	}
	all := make([]float64, len(pts))
	for i := range pts {
		all[i] = pts[i].f
	}
	base := medianInPlace(all)
	ip := 0
	for i := range sm {
		if sm[i] > sm[ip] {
			ip = i
		}
	}
	t0 := pts[ip].t
	if !(base > 0) || sm[ip] <= base {
		// no brightening seen: fall back to the middle of the data
		return lens.Params{T0: t0, U0: 1, TE: math.Max(bestSpan/10, 1)}, nil
	}
	apk := math.Min(sm[ip]/base, 1e4)
	u0 := invPointMag(math.Max(apk, 1.0001))
	ahalf := 1 + (apk-1)/2
	uh := invPointMag(ahalf)
	fh := base * ahalf
	var widths []float64
	for i := ip; i < len(sm); i++ {
		if sm[i] < fh {
			widths = append(widths, pts[i].t-t0)
			break
		}
	}
	for i := ip; i >= 0; i-- {
		if sm[i] < fh {
			widths = append(widths, t0-pts[i].t)
			break
		}
	}
	tE := math.Max(bestSpan/20, 1)
	if len(widths) > 0 && uh > u0 {
		w := 0.0
		for _, x := range widths {
			w += x
		}
		w /= float64(len(widths))
		if w > 0 {
			tE = w / math.Sqrt(uh*uh-u0*u0)
		}
	}
	return lens.Params{T0: t0, U0: u0, TE: tE}, nil
}

// invPointMag inverts A(u) = (u²+2)/(u√(u²+4)) for A > 1:
// u² = 2A/√(A²−1) − 2 (Paczynski 1986).
func invPointMag(a float64) float64 {
	return math.Sqrt(math.Max(2*a/math.Sqrt(a*a-1)-2, 0))
}

// FitSingle fits a point lens to ev: a point source from the automatic start
// (and from two variants of it, u0/3 with 2tE and 3u0 with tE/2, keeping the best,
// because a blended event's start underestimates A), then a finite source seeded
// at ρ ∈ {u0/2, u0, 2u0, 1e-3}. It returns both fits, the residuals of the
// preferred one and its anomaly indicator.
func FitSingle(ctx context.Context, ev *Event, set SingleSettings) (*SingleResult, error) {
	l, err := NewLikelihood(ev)
	if err != nil {
		return nil, err
	}
	res := &SingleResult{Start: set.Start}
	if !(set.Start.TE > 0) {
		res.Start, err = GuessSingle(ev)
		if err != nil {
			return nil, err
		}
	}
	st := res.Start
	st.S, st.Q, st.Alpha, st.Rho = 0, 0, 0, 0
	ps := FreeSpecs(T0, U0, TE)
	starts := []lens.Params{st, st, st}
	starts[1].U0, starts[1].TE = st.U0/3, st.TE*2
	starts[2].U0, starts[2].TE = st.U0*3, st.TE/2
	for _, s := range starts {
		sol, err := Optimize(ctx, l, s, ps, set.Opt)
		if err != nil && sol == nil {
			return nil, err
		}
		if res.Point == nil || sol.Chi2 < res.Point.Chi2 {
			res.Point = sol
		}
		if sol.Status == Cancelled {
			res.Status = Cancelled
			return res, nil
		}
	}
	res.Point.Label = "point source"
	res.Status = res.Point.Status
	if !set.NoFinite {
		fsSpecs := FreeSpecs(T0, U0, TE, Rho)
		u0 := math.Abs(res.Point.Params.U0)
		for _, rho := range []float64{u0 / 2, u0, 2 * u0, 1e-3} {
			s := res.Point.Params
			s.Rho = math.Min(math.Max(rho, 1e-4), 0.5)
			sol, err := Optimize(ctx, l, s, fsSpecs, set.Opt)
			if err != nil && sol == nil {
				return nil, err
			}
			if sol.Status == Cancelled {
				res.Status = Cancelled
				return res, nil
			}
			if res.Finite == nil || sol.Chi2 < res.Finite.Chi2 {
				res.Finite = sol
			}
		}
		res.Finite.Label = "finite source"
		d := set.FiniteDChi2
		if d <= 0 {
			d = 10
		}
		res.PreferFinite = res.Point.Chi2-res.Finite.Chi2 > d
	}
	best := res.Best()
	res.Residuals, err = l.AppendResiduals(nil, &best.Params)
	if err != nil {
		return res, err
	}
	res.Anomaly = FindAnomaly(res.Residuals, best.Params.TE, set.AnomalySigma)
	if res.Anomaly.Found {
		res.Clean = cleanFit(ctx, ev, best, res.Anomaly, set)
	}
	return res, nil
}

// cleanFit refits the single lens without its anomalies: it masks the anomaly
// window (widened by half its length on each side), refits, looks for a new
// anomaly among the points still used, and repeats (at most 5 windows), since a
// long anomaly is found piece by piece by FindAnomaly's window widths.
func cleanFit(ctx context.Context, ev *Event, best *Solution, a Anomaly, set SingleSettings) *Solution {
	cev := *ev
	cev.Datasets = make([]*Dataset, len(ev.Datasets))
	for k, d := range ev.Datasets {
		cd := *d
		cd.Masked = make([]bool, d.Len())
		for i := range cd.Masked {
			cd.Masked[i] = !d.Used(i)
		}
		cev.Datasets[k] = &cd
	}
	specs := FreeSpecs(T0, U0, TE)
	if best.Params.Rho > 0 {
		specs = FreeSpecs(T0, U0, TE, Rho)
	}
	var out *Solution
	var windows []string
	p := best.Params
	for it := 0; it < 5 && a.Found; it++ {
		pad := 0.5 * (a.T2 - a.T1)
		lo, hi := a.T1-pad, a.T2+pad
		windows = append(windows, fmt.Sprintf("[%.5f, %.5f]", lo, hi))
		for _, d := range cev.Datasets {
			for i, t := range d.T {
				if t >= lo && t <= hi {
					d.Masked[i] = true
				}
			}
		}
		cl, err := NewLikelihood(&cev)
		if err != nil {
			break // too few points left
		}
		c, err := Optimize(ctx, cl, p, specs, set.Opt)
		if err != nil || c.Status == Failed || c.Status == Cancelled {
			break
		}
		out, p = c, c.Params
		res, err := cl.AppendResiduals(nil, &p)
		if err != nil {
			break
		}
		a = FindAnomaly(res, p.TE, set.AnomalySigma)
	}
	if out != nil {
		out.Label = "without the anomaly"
		out.Note = "points excluded in " + strings.Join(windows, ", ")
	}
	return out
}
