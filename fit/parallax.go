package fit

import (
	"errors"
	"fmt"
	"strconv"

	"lensbook/lens"
)

// Annual parallax and lens orbital motion in the likelihood.
//
// The model follows the geocentric formalism of Gould (2004, ApJ 606, 319) as
// implemented by lens.ParallaxOffsets and lens.Model.At: πE = (πE,N, πE,E) are
// free parameters like any other (PiEN, PiEE), and the trajectory is offset by
// the Sun's projected position relative to its position and velocity at the
// reference epoch t0,par. Linear orbital motion (DsDt, DAlphaDt) is measured
// about the same epoch.
//
// t0,par is held FIXED during a fit (common practice): then the offsets, which
// cost a solar ephemeris evaluation per point (~5 µs), are computed once per
// dataset and reused by every χ² call. It is Event.TRef when the user set it;
// otherwise Refine fixes it at the t0 of its starting solution (the default of
// the trade) and records it in Solution.TRef. Likelihood.TRef reports the
// value in use and SetTRef fixes it explicitly (e.g. to a solution's TRef).
// SetDefaultTRef writes the default into the event so that it is recorded in
// the notebook before the fit starts. A model with parallax or orbital motion
// evaluated before t0,par is chosen is an error (ErrNoTRef), never a guess.

// SetDefaultTRef sets e.TRef to start.T0 when the user has not chosen t0,par
// (e.TRef == 0) and returns the value in force.
func (e *Event) SetDefaultTRef(start lens.Params) float64 {
	if e.TRef == 0 {
		e.TRef = start.T0
	}
	return e.TRef
}

// HasParallax reports whether p has a non-zero microlens parallax.
func HasParallax(p *lens.Params) bool { return p.PiEN != 0 || p.PiEE != 0 }

// HasOrbit reports whether p has linear lens orbital motion.
func HasOrbit(p *lens.Params) bool { return p.DsDt != 0 || p.DAlphaDt != 0 }

// ParallaxOffsets returns the parallax offsets of the event at the given times
// for reference epoch tref (full JD): nil when the event has no coordinates.
// Use them with lens.LightCurve to draw model curves at arbitrary times.
func (e *Event) ParallaxOffsets(times []float64, tref float64) ([]lens.Offset, error) {
	if e.Coords == nil {
		return nil, nil
	}
	if err := e.Coords.Validate(); err != nil {
		return nil, err
	}
	if !isFinite(tref) || tref == 0 {
		return nil, fmt.Errorf("fit: parallax reference epoch t0,par = %v must be a finite full JD", tref)
	}
	ra, dec := e.Coords.Radians()
	off := make([]lens.Offset, len(times))
	lens.ParallaxOffsets(off, times, ra, dec, tref)
	return off, nil
}

// ModelCurve fills dst with the magnification of p at the given times as the
// likelihood computes it for a ground-based dataset (reference point,
// tolerance, limb darkening ld, parallax offsets for t0,par = tref when p has
// parallax). tref 0 means e.TRef, or p.T0 when that is 0 too. It is for plots
// and forecasts; DatasetCurve does the same for one dataset's observatory.
func (e *Event) ModelCurve(dst []float64, p lens.Params, ld float64, times []float64, tref float64) error {
	return e.curve(-1, dst, p, ld, times, tref)
}

// DatasetCurve is ModelCurve for dataset k: its limb darkening and, when it
// has one, its observatory's parallax offsets (Event.Observers).
func (e *Event) DatasetCurve(k int, dst []float64, p lens.Params, times []float64, tref float64) error {
	if k < 0 || k >= len(e.Datasets) {
		return fmt.Errorf("fit: dataset index %d out of range [0, %d)", k, len(e.Datasets))
	}
	return e.curve(k, dst, p, e.Datasets[k].LD, times, tref)
}

func (e *Event) curve(k int, dst []float64, p lens.Params, ld float64, times []float64, tref float64) error {
	if tref == 0 {
		tref = e.TRef
	}
	if tref == 0 {
		tref = p.T0
	}
	m := lens.Model{Params: p, Ref: e.Ref, Tol: e.Tol, LD: ld, TRef: tref}
	var off []lens.Offset
	if HasParallax(&p) {
		if e.Coords == nil {
			return errNoCoords(&p)
		}
		var err error
		if off, err = e.DatasetOffsets(k, times, tref); err != nil {
			return err
		}
	}
	return lens.LightCurve(dst, &m, times, off)
}

func errNoCoords(p *lens.Params) error {
	return fmt.Errorf("fit: parallax πE = (%g, %g) needs the event coordinates (RA, Dec): set them in the Data step", p.PiEN, p.PiEE)
}

// parallaxState is the part of a Likelihood that deals with parallax and
// orbital motion: the fixed t0,par and the cached offsets of each dataset.
type parallaxState struct {
	tref float64         // t0,par in use (full JD); 0 until fixed
	off  [][]lens.Offset // per dataset, per used point; nil until needed
	use  bool            // the current model has parallax
}

// prepare fixes t0,par and computes the offsets when the model p first needs
// them, and sets the model's reference epoch.
func (st *parallaxState) prepare(l *Likelihood, p *lens.Params) error {
	par := HasParallax(p)
	st.use = par
	if st.tref == 0 && (par || HasOrbit(p)) {
		if par && l.ev.Coords == nil {
			return errNoCoords(p)
		}
		if !isFinite(l.ev.TRef) || l.ev.TRef == 0 {
			return ErrNoTRef
		}
		st.tref = l.ev.TRef
	}
	l.mod.TRef = st.tref
	if !par || st.off != nil {
		return nil
	}
	if l.ev.Coords == nil {
		return errNoCoords(p)
	}
	off := make([][]lens.Offset, len(l.sets))
	for k := range l.sets {
		o, err := l.ev.DatasetOffsets(k, l.sets[k].t, st.tref)
		if err != nil {
			return err
		}
		off[k] = o
	}
	st.off = off
	return nil
}

// offsets returns dataset k's offsets for the current model (nil without parallax).
func (st *parallaxState) offsets(k int) []lens.Offset {
	if !st.use {
		return nil
	}
	return st.off[k]
}

// ErrNoTRef reports a model with parallax or orbital motion evaluated before
// t0,par was chosen. Refine chooses it (Event.TRef, else the start's t0);
// other callers set Event.TRef (SetDefaultTRef, or a solution's TRef) or call
// Likelihood.SetTRef first. Guessing it from whichever model comes first
// would make the result depend on evaluation order.
var ErrNoTRef = errors.New("fit: the reference epoch t0,par of parallax and orbital motion is not set (Event.TRef or Likelihood.SetTRef)")

// SetTRef fixes this likelihood's t0,par (full JD, finite and non-zero), e.g.
// to a solution's TRef before evaluating it; it is an error to change it once
// fixed (the cached offsets depend on it).
func (l *Likelihood) SetTRef(tref float64) error {
	if !isFinite(tref) || tref == 0 {
		return fmt.Errorf("fit: t0,par = %v must be a finite full JD", tref)
	}
	if l.par.tref != 0 && l.par.tref != tref {
		return fmt.Errorf("fit: t0,par is already fixed at %v for this likelihood (asked %v)", l.par.tref, tref)
	}
	l.par.tref = tref
	return nil
}

// TRef returns the parallax and orbital-motion reference epoch t0,par (full
// JD) this likelihood uses: fixed by SetTRef, by Refine, or from Event.TRef at
// the first model with parallax or orbital motion; 0 while not fixed.
func (l *Likelihood) TRef() float64 { return l.par.tref }

// fixTRef fixes t0,par before a fit from start with the given specs when the
// model has, or may acquire, parallax or orbital motion: Event.TRef when set,
// else start's t0 (the default of the starting solution). It does nothing when
// t0,par is already fixed.
func (l *Likelihood) fixTRef(start *lens.Params, specs *Specs) {
	if l.par.tref != 0 {
		return
	}
	if !HasParallax(start) && !HasOrbit(start) && !specs.PiEN.Free && !specs.PiEE.Free &&
		!specs.DsDt.Free && !specs.DAlphaDt.Free {
		return
	}
	l.par.tref = l.ev.TRef
	if l.par.tref == 0 && isFinite(start.T0) {
		l.par.tref = start.T0
	}
}

// ParallaxConventions returns export-header lines ("key: value", like
// Conventions) recording the event's coordinates, t0,par and observatories,
// for the parallax and orbital-motion parameters of a solution fitted with
// t0,par = tref (0: e.TRef). Without coordinates it says parallax was not
// modelled.
func ParallaxConventions(e *Event, tref float64) []string {
	if tref == 0 {
		tref = e.TRef
	}
	if e.Coords == nil {
		return []string{"coordinates: not given (no annual parallax modelled)"}
	}
	c := *e.Coords
	out := []string{
		fmt.Sprintf("coordinates: RA %s deg, Dec %s deg (ICRS; %s)", strconv.FormatFloat(c.RA, 'f', 6, 64), strconv.FormatFloat(c.Dec, 'f', 6, 64), c.String()),
		"parallax: geocentric formalism (Gould 2004, ApJ 606, 319); piEN, piEE are the north and east components of the microlens parallax; Earth ephemeris VSOP87 (truncated) with lunar correction",
		"orbital_motion: dsdt in Einstein radii per Julian year, dalphadt in angle per Julian year, both linear about t0par",
	}
	if tref != 0 {
		out = append(out, "t0par: "+strconv.FormatFloat(tref, 'f', -1, 64)+" (full JD; reference epoch of parallax and orbital motion, fixed during fits)")
	}
	for k, o := range e.Observers {
		if o != nil && k < len(e.Datasets) && e.Datasets[k] != nil {
			out = append(out, fmt.Sprintf("observatory: dataset %s observed from %s (ephemeris table, geocentric ICRS AU)", e.Datasets[k].Name, o.Name))
		}
	}
	return out
}
