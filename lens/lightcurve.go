package lens

import (
	"fmt"
	"math/cmplx"
)

// Evaluator computes light curves for a sequence of models, keeping one image
// solver so that successive epochs (and successive calls from an optimiser)
// warm-start the binary-lens roots. The zero value is ready to use. An Evaluator
// is not safe for concurrent use; give each goroutine its own.
type Evaluator struct {
	solver *Solver
	// Counts[m] is the number of points computed with Method m since the last Reset.
	Counts [Contour + 1]int
}

// ResetCounts zeroes Counts.
func (e *Evaluator) ResetCounts() { e.Counts = [Contour + 1]int{} }

// LightCurve fills dst with the magnification of m at each time (full JD).
// off, when non-nil, holds the parallax offset at each time (see Offset); nil
// means no parallax. Each point picks its own method: point source, a multipole
// expansion or full finite source (see Solver.FiniteMag and SingleMag).
// With orbital motion every epoch has its own s: the Solver is given the new
// lens (keeping its warm start), and the finite-source method switch reads
// the caustics from maps built at nearby s (causticDistance), so a curve
// builds a few maps rather than one per epoch.
// It panics if dst or a non-nil off differ in length from times.
func (e *Evaluator) LightCurve(dst []float64, m *Model, times []float64, off []Offset) error {
	if len(dst) != len(times) || (off != nil && len(off) != len(times)) {
		panic("lens: LightCurve slice lengths differ")
	}
	if err := m.Validate(); err != nil {
		return err
	}
	tol := m.tol()
	var o Offset
	if m.Q == 0 {
		for i, t := range times {
			if off != nil {
				o = off[i]
			}
			g := m.At(t, o)
			dst[i] = SingleMag(cmplx.Abs(g.Zeta), m.Rho, m.LD, tol)
			if m.Rho == 0 {
				e.Counts[PointSource]++
			} else {
				e.Counts[Contour]++
			}
		}
		return nil
	}
	var cur Binary
	for i, t := range times {
		if off != nil {
			o = off[i]
		}
		g := m.At(t, o)
		if i == 0 || g.S != cur.S {
			b, err := NewBinary(g.S, g.Q)
			if err != nil {
				return fmt.Errorf("lens: at t = %v: %w", t, err)
			}
			cur = b
			if e.solver == nil {
				e.solver = NewSolver(b)
			} else {
				e.solver.SetBinary(b)
			}
		}
		if m.Rho == 0 {
			a, err := e.solver.Mag(g.Zeta)
			if err != nil {
				return fmt.Errorf("lens: at t = %v: %w", t, err)
			}
			dst[i] = a
			e.Counts[PointSource]++
			continue
		}
		f, err := e.solver.FiniteMag(g.Zeta, m.Rho, m.LD, tol)
		if err != nil {
			return fmt.Errorf("lens: at t = %v: %w", t, err)
		}
		dst[i] = f.Mag
		e.Counts[f.Method]++
	}
	return nil
}

// LightCurve is Evaluator.LightCurve with a fresh Evaluator.
func LightCurve(dst []float64, m *Model, times []float64, off []Offset) error {
	var e Evaluator
	return e.LightCurve(dst, m, times, off)
}
