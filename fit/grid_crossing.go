package fit

import (
	"context"
	"math"
	"math/cmplx"
	"sort"

	"gonum.org/v1/gonum/mat"

	"lensbook/lens"
)

// Crossing is the caustic crossing a grid found in the data: a rise and a later
// fall of the residuals of the start model (FindJumps), read as the source
// entering and leaving one caustic. The grid then seeds every node with
// trajectories that cross a caustic of that node exactly at these times, and
// evaluates its nodes with a point source on the data outside Masked (see
// GridSettings).
type Crossing struct {
	TIn  float64 `json:"tIn"`  // entry (full JD)
	TOut float64 `json:"tOut"` // exit (full JD)
	In   Jump    `json:"in"`
	Out  Jump    `json:"out"`
	// Masked are the time windows [T1, T2] around the two jumps left out of the
	// grid stage (the refinement uses every point).
	Masked [][2]float64 `json:"masked"`
}

// crossingMinSigma is the smallest step (σ) read as a caustic jump. A fold
// crossing with percent photometry makes steps of hundreds of σ. What tells a
// crossing from the sharp peak of a central-caustic approach is the pairing, a
// rise and a later fall: the approaches of package problems show one strong
// step (a 408–417σ rise, the demo a 235σ fall) and nothing of the other sign
// after it above 50σ (the demo's 75σ rise comes after its fall). Measured on
// their residuals from the single-lens start; an approach whose residuals did
// pair up would be searched as a crossing (point source without the jumps).
const crossingMinSigma = 50

// findCrossing pairs the strongest rise with the strongest fall after it
// (both ≥ crossingMinSigma); nil when the jumps contain no such pair.
func findCrossing(jumps []Jump) *Crossing {
	var best *Crossing
	score := 0.0
	for _, a := range jumps {
		if a.Sigma < crossingMinSigma {
			continue
		}
		for _, b := range jumps {
			if b.Sigma > -crossingMinSigma || b.T <= a.T {
				continue
			}
			if s := math.Min(a.Sigma, -b.Sigma); s > score {
				score = s
				best = &Crossing{TIn: a.T, TOut: b.T, In: a, Out: b}
			}
		}
	}
	if best == nil {
		return nil
	}
	// leave out the ramps: twice their measured width, at least half a day
	// (a disk passage of 2ρ·tE/sin θ with ρ ~ 0.003, tE ~ 30 d and θ ~ 10°
	// lasts about that, from memory), at most a quarter of the interior
	gap := best.TOut - best.TIn
	for _, j := range []Jump{best.In, best.Out} {
		w := math.Min(math.Max(2*j.Width, 0.5), gap/4)
		best.Masked = append(best.Masked, [2]float64{j.T - w, j.T + w})
	}
	return best
}

// maskWindows returns a copy of ev with the points in the windows masked (the
// datasets' own masks kept).
func maskWindows(ev *Event, win [][2]float64) *Event {
	out := *ev
	out.Datasets = make([]*Dataset, len(ev.Datasets))
	for k, d := range ev.Datasets {
		cd := *d
		cd.Masked = make([]bool, d.Len())
		for i, t := range d.T {
			cd.Masked[i] = !d.Used(i)
			for _, w := range win {
				if t >= w[0] && t <= w[1] {
					cd.Masked[i] = true
				}
			}
		}
		out.Datasets[k] = &cd
	}
	return &out
}

// causticPath is one closed caustic as a function of its normalised arc length
// ℓ ∈ [0, 1) (periodic), by linear interpolation of lens.Caustics.
type causticPath struct {
	z   []complex128
	cum []float64 // cum[i] = arc length to z[i] / total, cum[len(z)] = 1
}

func causticPaths(b lens.Binary, n int) []causticPath {
	var out []causticPath
	for _, c := range b.Caustics(n) {
		z := c.Caustic
		if len(z) < 3 {
			continue
		}
		z = normalisePath(z)
		cum := make([]float64, len(z)+1)
		for i := range z {
			cum[i+1] = cum[i] + cmplx.Abs(z[(i+1)%len(z)]-z[i])
		}
		tot := cum[len(z)]
		if !(tot > 0) {
			continue
		}
		for i := range cum {
			cum[i] /= tot
		}
		out = append(out, causticPath{z: z, cum: cum})
	}
	return out
}

// normalisePath returns the caustic z starting at its vertex of largest real
// part and running anticlockwise, so that the arc length ℓ of a point moves
// little when s and q change a little (lens.Caustics starts each curve where
// its root tracking starts).
func normalisePath(z []complex128) []complex128 {
	i0 := 0
	area := 0.0
	for i := range z {
		if real(z[i]) > real(z[i0]) {
			i0 = i
		}
		a, b := z[i], z[(i+1)%len(z)]
		area += real(a)*imag(b) - imag(a)*real(b)
	}
	out := make([]complex128, len(z))
	for i := range z {
		if area >= 0 {
			out[i] = z[(i0+i)%len(z)]
		} else {
			out[i] = z[(i0-i+len(z))%len(z)]
		}
	}
	return out
}

// at returns the point at arc length ℓ (wrapped into [0, 1)).
func (c *causticPath) at(l float64) complex128 {
	l -= math.Floor(l)
	i := sort.SearchFloat64s(c.cum, l)
	if i > 0 {
		i--
	}
	if i >= len(c.z) {
		i = len(c.z) - 1
	}
	seg := c.cum[i+1] - c.cum[i]
	f := 0.0
	if seg > 0 {
		f = (l - c.cum[i]) / seg
	}
	a, b := c.z[i], c.z[(i+1)%len(c.z)]
	return a + complex(f, 0)*(b-a)
}

// chordAt maps the crossing coordinates x = (ℓin, ℓout, tin, tout) on path to
// the parameters of the node (s, q) with reference point c (Cassan 2008).
func chordAt(path *causticPath, c complex128, base lens.Params, x []float64) (lens.Params, bool) {
	t0, u0, tE, al, ok := chordParams(c, path.at(x[0]), path.at(x[1]), x[2], x[3])
	if !ok || tE > 1e4 || math.Abs(u0) > 10 {
		return base, false
	}
	p := base
	p.T0, p.U0, p.TE, p.Alpha = t0, u0, tE, al
	return p, true
}

// lmResiduals minimises Σ r² over x by Levenberg–Marquardt with forward
// differences of step h[i], from x (updated in place), within maxEval calls of
// res; res fills r and returns Σ r² (+Inf when x is not allowed). It returns
// the best Σ r², the number of calls and whether ctx was cancelled. (The same
// damped Gauss–Newton iteration as Optimize, Marquardt 1963, J. SIAM 11, 431, on coordinates
// that are not model parameters.)
func lmResiduals(ctx context.Context, res func(r, x []float64) float64, x, h []float64, nres, maxEval int, tol float64) (float64, int, bool) {
	n := len(x)
	r0 := make([]float64, nres)
	r1 := make([]float64, nres)
	jac := make([]float64, nres*n)
	xt := make([]float64, n)
	evals := 1
	c := res(r0, x)
	if math.IsInf(c, 1) {
		return c, evals, false
	}
	A := mat.NewSymDense(n, nil)
	Ad := mat.NewSymDense(n, nil)
	g := mat.NewVecDense(n, nil)
	step := mat.NewVecDense(n, nil)
	var chol mat.Cholesky
	lambda := 1e-3
	small := 0
	for evals < maxEval {
		if ctx.Err() != nil {
			return c, evals, true
		}
		for j := 0; j < n; j++ {
			copy(xt, x)
			hj := h[j]
			xt[j] += hj
			cj := res(r1, xt)
			evals++
			if math.IsInf(cj, 1) {
				hj = -hj
				xt[j] = x[j] + hj
				cj = res(r1, xt)
				evals++
				if math.IsInf(cj, 1) {
					return c, evals, false
				}
			}
			for i := 0; i < nres; i++ {
				jac[i*n+j] = (r1[i] - r0[i]) / hj
			}
		}
		normalEquations(A, g, jac, r0[:nres], n)
		improved := false
		for evals < maxEval && lambda < 1e10 {
			Ad.CopySym(A)
			for a := 0; a < n; a++ {
				d := A.At(a, a)
				if d <= 0 {
					d = 1e-12
				}
				Ad.SetSym(a, a, d*(1+lambda))
			}
			if !chol.Factorize(Ad) || chol.SolveVecTo(step, g) != nil {
				lambda *= 10
				continue
			}
			for a := 0; a < n; a++ {
				xt[a] = x[a] + step.AtVec(a)
			}
			ct := res(r1, xt)
			evals++
			if ct < c {
				if c-ct < tol {
					small++
				} else {
					small = 0
				}
				copy(x, xt)
				copy(r0, r1)
				c = ct
				lambda = math.Max(lambda/10, 1e-7)
				improved = true
				break
			}
			lambda *= 10
		}
		if !improved || small >= 2 {
			break
		}
	}
	return c, evals, false
}
