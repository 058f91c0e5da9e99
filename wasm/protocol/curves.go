package protocol

import (
	"context"
	"encoding/json"
	"math"
	"slices"

	"lensbook/fit"
	"lensbook/lens"
)

// Curves is everything the light-curve, residual and caustic plots draw.
// Magnitudes are on the first dataset's system: with a solution, every
// dataset's fluxes are mapped through its own source and blend fluxes onto
// the first one's (F' = (F − fb_k)/fs_k · fs_1 + fb_1, the common practice for
// showing several telescopes on one scale); without one, each dataset is shown
// in its own magnitudes.
type Curves struct {
	YLabel   string        `json:"y_label"`
	Datasets []DataCurve   `json:"datasets"`
	Models   []ModelCurve  `json:"models"`
	Caustics []CausticPlot `json:"caustics"`
}

// DataCurve is one dataset as plotted: full JD, magnitude, 1σ magnitude error
// and, with a selected solution, the residual data − model in magnitudes.
type DataCurve struct {
	T     []float64 `json:"t"`
	Y     []Num     `json:"y"`
	E     []Num     `json:"e"`
	Resid []Num     `json:"resid,omitempty"`
}

// ModelCurve is a solution's model magnitude on a dense time grid (full JD).
type ModelCurve struct {
	Label string    `json:"label"`
	T     []float64 `json:"t"`
	Y     []Num     `json:"y"`
}

// CausticPlot is a solution's caustics, source trajectory and lens positions
// in the source plane (θE of the total mass; frame of package lens).
type CausticPlot struct {
	Label      string       `json:"label"`
	Caustics   [][][2]Num   `json:"caustics"`
	Trajectory [][2]Num     `json:"trajectory"`
	Lenses     [][2]float64 `json:"lenses"`
}

type curvesIn struct {
	Notebook  json.RawMessage `json:"notebook"`
	Solutions []*fit.Solution `json:"solutions"`
	Selected  int             `json:"selected"`
	N         int             `json:"n"` // model points; 0 means 3000
}

func init() { register("curves", stepCurves) }

// plotMags returns dataset k's magnitudes and 1σ errors as plotted (see Curves).
func plotMags(ev *fit.Event, k int, sol *fit.Solution) (mag, err []float64) {
	d := ev.Datasets[k]
	mag = make([]float64, d.Len())
	err = make([]float64, d.Len())
	ref := ev.Datasets[0]
	for i := range d.T {
		f, s := d.Flux[i], d.Sigma(i)
		zp := d.ZeroPoint
		if sol != nil && len(sol.Fits) == len(ev.Datasets) && sol.Fits[k].Fs != 0 {
			a, b := sol.Fits[k], sol.Fits[0]
			f = (f-a.Fb)/a.Fs*b.Fs + b.Fb
			s = s / math.Abs(a.Fs) * math.Abs(b.Fs)
			zp = ref.ZeroPoint
		}
		if f > 0 {
			mag[i] = zp - 2.5*math.Log10(f)
			err[i] = 2.5 / math.Ln10 * s / f
		} else {
			mag[i], err[i] = math.NaN(), math.NaN()
		}
	}
	return mag, err
}

func stepCurves(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in curvesIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	_, ev, err := loadEvent(in.Notebook)
	if err != nil {
		return nil, err
	}
	var sel *fit.Solution
	if in.Selected >= 0 && in.Selected < len(in.Solutions) {
		sel = in.Solutions[in.Selected]
	}
	out := &Curves{YLabel: "magnitude (own zero points)"}
	if sel != nil {
		ref := ev.Datasets[0]
		name := []rune(ref.Name)
		if len(name) > 16 {
			name = append(name[:15], '…')
		}
		out.YLabel = "mag (scale of " + string(name) + ")"
		if ref.Band != "" {
			out.YLabel = ref.Band + " " + out.YLabel
		}
	}
	// data, and residuals against the selected solution
	for k, d := range ev.Datasets {
		mag, e := plotMags(ev, k, sel)
		dc := DataCurve{T: d.T, Y: nums(mag), E: nums(e)}
		if sel != nil && len(sel.Fits) == len(ev.Datasets) {
			a := make([]float64, d.Len())
			if err := ev.DatasetCurve(k, a, sel.Params, d.T, sel.TRef); err == nil {
				b := sel.Fits[0]
				res := make([]float64, d.Len())
				for i := range a {
					res[i] = mag[i] - (ref0(ev) - 2.5*math.Log10(b.Fs*a[i]+b.Fb))
				}
				dc.Resid = nums(res)
			}
		}
		out.Datasets = append(out.Datasets, dc)
	}
	// model curves on a dense grid joined with the data times
	n := in.N
	if n <= 0 {
		n = 3000
	}
	t1, t2 := ev.TimeRange()
	if !(t2 > t1) {
		t2 = t1 + 1
	}
	var ts []float64
	for i := range n {
		ts = append(ts, t1+(t2-t1)*float64(i)/float64(n-1))
	}
	for _, d := range ev.Datasets {
		ts = append(ts, d.T...)
	}
	slices.Sort(ts)
	ts = slices.Compact(ts)
	for _, sol := range in.Solutions {
		if sol == nil || len(sol.Fits) != len(ev.Datasets) {
			continue
		}
		a := make([]float64, len(ts))
		// On dataset 0's scale (its fluxes below), so with its limb darkening
		// and observatory; parallax and orbital motion about the solution's t0,par.
		if err := ev.DatasetCurve(0, a, sol.Params, ts, sol.TRef); err != nil {
			return nil, err
		}
		b := sol.Fits[0]
		y := make([]float64, len(ts))
		for i := range a {
			f := b.Fs*a[i] + b.Fb
			y[i] = math.NaN()
			if f > 0 {
				y[i] = ref0(ev) - 2.5*math.Log10(f)
			}
		}
		out.Models = append(out.Models, ModelCurve{Label: sol.Label, T: ts, Y: nums(y)})
		if sol.Params.Q > 0 {
			out.Caustics = append(out.Caustics, causticPlot(sol, t1, t2))
		}
	}
	return out, nil
}

func ref0(ev *fit.Event) float64 { return ev.Datasets[0].ZeroPoint }

func causticPlot(sol *fit.Solution, t1, t2 float64) CausticPlot {
	p := sol.Params
	cp := CausticPlot{Label: sol.Label}
	b := lens.Binary{S: p.S, Q: p.Q}
	for _, c := range b.Caustics(0) {
		var line [][2]Num
		for _, z := range c.Caustic {
			line = append(line, [2]Num{Num(real(z)), Num(imag(z))})
		}
		if len(c.Caustic) > 0 {
			z := c.Caustic[0]
			line = append(line, [2]Num{Num(real(z)), Num(imag(z))})
		}
		cp.Caustics = append(cp.Caustics, line)
	}
	m := lens.Model{Params: p, Ref: sol.Ref}
	// trajectory over the data range, widened to ±2 tE around t0
	a, z := math.Min(t1, p.T0-2*p.TE), math.Max(t2, p.T0+2*p.TE)
	for i := range 400 {
		t := a + (z-a)*float64(i)/399
		zeta := m.At(t, lens.Offset{}).Zeta
		cp.Trajectory = append(cp.Trajectory, [2]Num{Num(real(zeta)), Num(imag(zeta))})
	}
	m2 := p.Q / (1 + p.Q)
	cp.Lenses = [][2]float64{{-m2 * p.S, 0}, {(1 - m2) * p.S, 0}}
	return cp
}
