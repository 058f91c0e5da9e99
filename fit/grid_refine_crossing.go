package fit

import (
	"context"
	"math"
	"math/cmplx"

	"lensbook/lens"
)

// pathCrossing is where a straight trajectory crosses a caustic path.
type pathCrossing struct {
	l, t float64 // arc length on the path, time (full JD)
}

// crossingsOf intersects the trajectory of p (static model, reference point c)
// with every segment of path.
func crossingsOf(path *causticPath, c complex128, p lens.Params) []pathCrossing {
	rot := cmplx.Exp(complex(0, -p.Alpha))
	var out []pathCrossing
	n := len(path.z)
	for i := range n {
		w1, w2 := (path.z[i]-c)*rot, (path.z[(i+1)%n]-c)*rot
		y1, y2 := imag(w1)-p.U0, imag(w2)-p.U0
		if y1*y2 > 0 || y1 == y2 {
			continue
		}
		f := y1 / (y1 - y2)
		tau := real(w1) + f*(real(w2)-real(w1))
		out = append(out, pathCrossing{l: path.cum[i] + f*(path.cum[i+1]-path.cum[i]), t: p.T0 + tau*p.TE})
	}
	return out
}

// crossingFrame is the caustic-crossing parameterisation of a binary model
// (Cassan 2008, A&A 491, 587): x = (ℓin, ℓout, tin, tout, log10 ρ, log10 s,
// log10 q), the arc lengths on one caustic where the source centre enters and
// leaves it, the times it does, the source size and the lens. It maps x to
// lens.Params, recomputing the caustic when s or q change and following the
// caustic nearest the previous entry point.
type crossingFrame struct {
	ref   lens.Reference
	base  lens.Params
	s, q  float64
	path  causticPath
	entry complex128
}

const crossingCausticSamples = 128

func (f *crossingFrame) params(x []float64) (lens.Params, bool) {
	s, q := math.Pow(10, x[5]), math.Pow(10, x[6])
	if !(q <= 1) || !(s > 0.01 && s < 100) || !(x[4] < 0) {
		return f.base, false
	}
	if s != f.s || q != f.q {
		b, err := lens.NewBinary(s, q)
		if err != nil {
			return f.base, false
		}
		paths := causticPaths(b, crossingCausticSamples)
		bi, bd := -1, math.Inf(1)
		for i := range paths {
			for _, z := range paths[i].z {
				if d := cmplx.Abs(z - f.entry); d < bd {
					bi, bd = i, d
				}
			}
		}
		if bi < 0 {
			return f.base, false
		}
		f.s, f.q, f.path = s, q, paths[bi]
	}
	c := lens.ReferencePoint(f.ref, s, q)
	p := f.base
	p.S, p.Q, p.Rho = s, q, math.Pow(10, x[4])
	t0, u0, tE, al, ok := chordParams(c, f.path.at(x[0]), f.path.at(x[1]), x[2], x[3])
	if !ok || tE > 1e4 || math.Abs(u0) > 10 {
		return f.base, false
	}
	p.T0, p.U0, p.TE, p.Alpha = t0, u0, tE, al
	return p, true
}

// refineCrossing refines p (a grid minimum, point source) in the
// caustic-crossing coordinates with a finite source on every point of l: it
// finds where the trajectory of p crosses a caustic of its (s, q) closest to
// the observed entry and exit, seeds ρ from the entry's ramp (ρ ≈ w·sin θ /
// (2 tE) for a ramp of w days crossing the caustic at angle θ, geometry; or
// from the exit's; ×½, ×1, ×2 tried) and runs Levenberg–Marquardt over the
// seven coordinates. ok is false when the trajectory of p crosses no caustic.
func refineCrossing(ctx context.Context, l *Likelihood, p lens.Params, cr *Crossing, maxEval int) (lens.Params, float64, int, bool) {
	b, err := lens.NewBinary(p.S, p.Q)
	if err != nil {
		return p, 0, 0, false
	}
	ref := l.ev.Ref
	c := lens.ReferencePoint(ref, p.S, p.Q)
	var x []float64
	var fr *crossingFrame
	bestD := math.Inf(1)
	for _, path := range causticPaths(b, crossingCausticSamples) {
		cs := crossingsOf(&path, c, p)
		for _, a := range cs {
			for _, e := range cs {
				if e.t <= a.t {
					continue
				}
				if d := math.Abs(a.t-cr.TIn) + math.Abs(e.t-cr.TOut); d < bestD {
					bestD = d
					x = []float64{a.l, e.l, a.t, e.t, 0, math.Log10(p.S), math.Log10(p.Q)}
					fr = &crossingFrame{ref: ref, base: p, s: p.S, q: p.Q, path: path, entry: path.at(a.l)}
				}
			}
		}
	}
	if fr == nil {
		return p, 0, 0, false
	}
	// ρ from the ramps
	rhos := []float64{1e-3, 3e-3, 1e-2}
	for k, j := range []Jump{cr.In, cr.Out} {
		if j.Width <= 0 {
			continue
		}
		l0 := x[k]
		tg := fr.path.at(l0+1e-3) - fr.path.at(l0-1e-3)
		dir := cmplx.Exp(complex(0, p.Alpha))
		sin := math.Abs(imag(tg*cmplx.Conj(dir))) / cmplx.Abs(tg)
		r := j.Width * math.Max(sin, 0.05) / (2 * p.TE)
		r = math.Min(math.Max(r, 1e-4), 0.1)
		rhos = []float64{r / 2, r, 2 * r}
		break
	}
	evals := 0
	best := math.Inf(1)
	for _, r := range rhos {
		xr := append([]float64(nil), x...)
		xr[4] = math.Log10(r)
		q, ok := fr.params(xr)
		if !ok {
			continue
		}
		ch, err := l.Chi2(&q)
		evals++
		if err == nil && ch < best {
			best = ch
			x[4] = xr[4]
		}
	}
	if math.IsInf(best, 1) {
		return p, 0, evals, false
	}
	res := func(r, xx []float64) float64 {
		q, ok := fr.params(xx)
		if !ok {
			return math.Inf(1)
		}
		ch, err := l.Residuals(r, &q)
		if err != nil {
			return math.Inf(1)
		}
		return ch
	}
	h := []float64{1e-3, 1e-3, 0.005, 0.005, 0.01, 1e-3, 0.01}
	ch, ev, _ := lmResiduals(ctx, res, x, h, l.N(), maxEval, 0.01)
	evals += ev
	q, ok := fr.params(x)
	if !ok {
		return p, 0, evals, false
	}
	return q, ch, evals, true
}
