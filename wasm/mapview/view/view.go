// Package view is the state of lensbook's interactive magnification map: the
// model being dragged, the screen transform, the trajectory geometry and its
// hit-testing, the progressive map computation, the colour scale, and the model
// light curve with its χ². It imports neither ebiten nor syscall/js, so all of
// it is tested natively; the wasm mains (ebiten, and the 2-D canvas fallback)
// only feed it input events and draw what it returns.
package view

import (
	"fmt"
	"math"
	"time"

	"lensbook/fit"
	"lensbook/lens"
)

// Key is a keyboard action.
type Key int

const (
	KeyLeft Key = iota + 1
	KeyRight
	KeyUp
	KeyDown
)

// Changed reports what a call to Step changed.
type Changed struct {
	Model bool // light curve and χ² were recomputed
	Map   bool // map pixels changed
	Scene bool // overlay geometry changed
}

// Any reports whether anything needs redrawing.
func (c Changed) Any() bool { return c.Model || c.Map || c.Scene }

// Stats are timings of the last pieces of work, for the page and the tests.
type Stats struct {
	CurveMs     float64 // last light curve + χ² (ms)
	CoarseMs    float64 // last coarse map (ms)
	FullMs      float64 // compute time of the last completed full map, summed over its chunks (ms)
	FullWallMs  float64 // wall time from request to completion of the last full map (ms)
	FullN       int     // full maps completed
	CoarseExact int     // pixels of the coarse map solved exactly (the rest interpolated)
	FullExact   int     // same for the last completed full map
	CoarseNX    int     // coarse map size
	CoarseNY    int
	FullNX      int // full map size
	FullNY      int
}

// GridN is the number of times at which the model light curve is sampled for plotting.
const GridN = 600

// View is the interactive map state. The zero value is not usable; use New.
type View struct {
	Model   lens.Model
	T       Transform
	DPR     float64
	Scale   Scale
	CursorT float64 // full JD, NaN = none

	// Chi2Func, when set, returns the total χ² of a model against the loaded
	// data (the wasm main plugs in package fit's likelihood).
	Chi2Func func(m *lens.Model) (float64, error)
	// TMin, TMax is the time range of the plotted curve (full JD); both 0 means
	// t0 ± 2 tE.
	TMin, TMax float64
	// Coords is the event's sky position; nil when unknown, and then annual
	// parallax is neither evaluated nor drawn (πE without a position has no
	// direction to the Sun to act along).
	Coords *fit.Coords

	// Outputs of the last Step.
	Chi2  float64   // NaN when no data or no Chi2Func
	Err   error     // last model error (invalid parameters, solver failure)
	TGrid []float64 // plot times (full JD)
	AGrid []float64 // magnification at TGrid
	// Path is the source position ζ (θE, frame of the model at t0,par) at each
	// TGrid time when the trajectory is not straight (parallax with Coords
	// set, or orbital motion); nil when it is the straight line of TrackOf.
	Path  []complex128
	Stats Stats

	curves         []lens.Curve
	coarse         *Map
	full           *Map
	coarseS, fullS *sampler
	fullT0         time.Time // when the current full map was requested
	fullMs         float64   // compute time so far of the current full map

	drag *Drag
	gen  int
	eval lens.Evaluator

	// Parallax offsets at TGrid, kept while the grid, t0,par and position
	// are unchanged (they do not depend on the dragged parameters).
	off    []lens.Offset
	offKey offKey

	dirtyModel, dirtyLens, dirtyMap, dirtyScene bool
	scene                                       []Prim
}

// New returns a view of m on a w×h device-pixel screen.
func New(m lens.Model, w, h int, dpr float64) *View {
	v := &View{Model: m, DPR: dpr, Scale: DefaultScale, CursorT: math.NaN(), Chi2: math.NaN()}
	v.T = Transform{Scale: 0.01, W: w, H: h}
	v.dirtyModel, v.dirtyLens, v.dirtyMap, v.dirtyScene = true, true, true, true
	v.curves = v.caustics()
	v.Fit()
	return v
}

// Fit chooses a transform that shows the caustics and the closest approach.
func (v *View) Fit() {
	c := lens.ReferencePoint(v.Model.Ref, v.Model.S, v.Model.Q)
	k := TrackOf(&v.Model)
	near := k.At(0)
	x0, x1 := math.Min(real(near), real(c)), math.Max(real(near), real(c))
	y0, y1 := math.Min(imag(near), imag(c)), math.Max(imag(near), imag(c))
	for _, cv := range v.curves {
		for _, z := range cv.Caustic {
			x0, x1 = math.Min(x0, real(z)), math.Max(x1, real(z))
			y0, y1 = math.Min(y0, imag(z)), math.Max(y1, imag(z))
		}
	}
	hw := math.Max(math.Max(x1-x0, y1-y0)/2*1.4, 0.05)
	v.T.CX, v.T.CY = (x0+x1)/2, (y0+y1)/2
	v.T.Scale = math.Max(minScale, math.Min(maxScale, 2*hw/float64(min(v.T.W, v.T.H))))
	v.dirtyMap, v.dirtyScene = true, true
}

// SetSize changes the screen size.
func (v *View) SetSize(w, h int, dpr float64) {
	if w == v.T.W && h == v.T.H && dpr == v.DPR {
		return
	}
	// Keep the plane extent of the shorter side.
	if v.T.W > 0 && v.T.H > 0 {
		v.T.Scale *= float64(min(v.T.W, v.T.H)) / float64(max(1, min(w, h)))
	}
	v.T.W, v.T.H, v.DPR = w, h, dpr
	v.dirtyMap, v.dirtyScene = true, true
}

// SetModel replaces the model (and refits the view when the lens changed).
//
// A model with parallax or orbital motion and no t0,par gets its t0 as t0,par
// here (lens.Model's default made explicit), so that dragging t0 afterwards
// moves the model, not its reference epoch.
func (v *View) SetModel(m lens.Model) {
	if m.TRef == 0 && (fit.HasParallax(&m.Params) || fit.HasOrbit(&m.Params)) {
		m.TRef = m.T0
	}
	lensChanged := m.S != v.Model.S || m.Q != v.Model.Q || m.Ref != v.Model.Ref
	v.Model = m
	v.dirtyModel, v.dirtyScene = true, true
	if lensChanged {
		v.dirtyLens = true
		v.curves = v.caustics()
		v.Fit()
	}
}

// SetLens changes s, q and ρ (the sliders); t0, u0 and α keep their meaning
// relative to the reference point.
func (v *View) SetLens(s, q, rho float64) error {
	m := v.Model
	m.S, m.Q, m.Rho = s, q, rho
	if err := m.Validate(); err != nil {
		return err
	}
	if q > 0 {
		if _, err := lens.NewBinary(s, q); err != nil {
			return err
		}
	}
	lensChanged := s != v.Model.S || q != v.Model.Q
	v.Model = m
	v.dirtyModel, v.dirtyScene = true, true
	if lensChanged {
		v.dirtyLens = true
	}
	return nil
}

// SetCursorTime sets the time under the cursor in the light-curve plot (NaN = none).
func (v *View) SetCursorTime(t float64) {
	if t != v.CursorT && !(math.IsNaN(t) && math.IsNaN(v.CursorT)) {
		v.CursorT = t
		v.dirtyScene = true
	}
}

// DataChanged tells the view that Chi2Func now sees other data.
func (v *View) DataChanged() { v.dirtyModel = true }

// Dragging returns the part being dragged (Background when panning or idle).
func (v *View) Dragging() Part {
	if v.drag == nil {
		return Background
	}
	return v.drag.Part
}

// PointerDown starts a drag at screen point (x, y) (device pixels).
func (v *View) PointerDown(x, y float64) {
	k := TrackOf(&v.Model)
	z := v.T.ToPlane(x, y)
	v.drag = &Drag{
		Part:   k.HitTest(v.T, x, y, v.DPR),
		Start:  z,
		StartX: x, StartY: y,
		U0: v.Model.U0, T0: v.Model.T0, Alpha: v.Model.Alpha,
		Pivot: k.C,
		View:  v.T,
	}
	v.dirtyScene = true
}

// PointerMove continues a drag (no-op without one).
func (v *View) PointerMove(x, y float64) {
	d := v.drag
	if d == nil {
		return
	}
	switch d.Part {
	case Line:
		u0, t0 := d.MoveLine(TrackOf(&v.Model), v.Model.TE, v.T.ToPlane(x, y))
		v.setU0T0(u0, t0)
	case Handle:
		v.Model.Alpha = d.Rotate(v.T.ToPlane(x, y))
		v.dirtyModel, v.dirtyScene = true, true
	default:
		t := d.View
		t.W, t.H = v.T.W, v.T.H
		t.Pan(x-d.StartX, y-d.StartY)
		if t != v.T {
			v.T = t
			v.dirtyMap, v.dirtyScene = true, true
		}
	}
}

func (v *View) setU0T0(u0, t0 float64) {
	if u0 != v.Model.U0 || t0 != v.Model.T0 {
		v.Model.U0, v.Model.T0 = u0, t0
		v.dirtyModel, v.dirtyScene = true, true
	}
}

// PointerUp ends a drag.
func (v *View) PointerUp() {
	if v.drag != nil {
		v.drag = nil
		v.dirtyScene = true
	}
}

// Wheel zooms about (x, y); dy > 0 (scrolling down) zooms out, 100 units = ×1.25.
func (v *View) Wheel(x, y, dy float64) {
	if dy == 0 {
		return
	}
	v.T.ZoomAt(x, y, math.Pow(1.25, dy/100))
	v.dirtyMap, v.dirtyScene = true, true
}

// Key applies a keyboard nudge: arrows move the trajectory by 4 device pixels
// (Up/Down change u0, Left/Right change t0); with shift, arrows turn it by 1°.
func (v *View) Key(k Key, shift bool) {
	if shift {
		d := math.Pi / 180
		if k == KeyLeft || k == KeyDown {
			d = -d
		}
		v.Model.Alpha = math.Remainder(v.Model.Alpha+d, 2*math.Pi)
		v.dirtyModel, v.dirtyScene = true, true
		return
	}
	step := 4 * v.DPR * v.T.Scale
	switch k {
	case KeyUp:
		v.setU0T0(v.Model.U0+step, v.Model.T0)
	case KeyDown:
		v.setU0T0(v.Model.U0-step, v.Model.T0)
	case KeyRight: // the source passes later: the line moves back along its motion
		v.setU0T0(v.Model.U0, v.Model.T0+step*v.Model.TE)
	case KeyLeft:
		v.setU0T0(v.Model.U0, v.Model.T0-step*v.Model.TE)
	}
}

func (v *View) caustics() []lens.Curve {
	if v.Model.Q == 0 {
		return nil
	}
	b, err := lens.NewBinary(v.Model.S, v.Model.Q)
	if err != nil {
		return nil
	}
	return b.Caustics(0)
}

// Step does the pending work: the light curve and χ² when the model changed,
// the caustics when the lens changed, a coarse map at once when the lens or
// the view changed, then chunks of the full-resolution map until budget is
// spent (at least one chunk).
func (v *View) Step(budget time.Duration) Changed {
	var ch Changed
	start := time.Now()
	if v.dirtyLens {
		v.curves = v.caustics()
		v.dirtyLens, v.dirtyMap, v.dirtyScene = false, true, true
	}
	if v.dirtyModel {
		v.updateCurve()
		v.dirtyModel = false
		ch.Model = true
	}
	if v.dirtyMap {
		v.startMaps()
		v.dirtyMap = false
		ch.Map = true
	}
	if v.full != nil && v.full.Rows < v.full.NY {
		for {
			t := time.Now()
			v.mapRows(v.full, v.fullS, 2*blockPx)
			v.fullMs += ms(time.Since(t))
			ch.Map = true
			if v.full.Rows == v.full.NY {
				v.Stats.FullMs = v.fullMs
				v.Stats.FullExact = v.fullS.Exact
				v.Stats.FullWallMs = ms(time.Since(v.fullT0))
				v.Stats.FullN++
				break
			}
			if time.Since(start) >= budget {
				break
			}
		}
	}
	if v.dirtyScene {
		ch.Scene = true
		v.dirtyScene = false
	}
	return ch
}

// MapDone reports whether the full-resolution map of the current view is complete.
func (v *View) MapDone() bool {
	return v.full != nil && v.full.Rows == v.full.NY && !v.dirtyMap && !v.dirtyLens
}

func ms(d time.Duration) float64 { return float64(d.Nanoseconds()) / 1e6 }

// Map sizes: the full map has one pixel per device pixel, at most maxMapSide
// per side; the coarse preview has a quarter of the linear resolution.
const (
	maxMapSide  = 768
	coarseRatio = 4
)

func (v *View) startMaps() {
	r := v.T.Rect()
	nx, ny := min(v.T.W, maxMapSide), min(v.T.H, maxMapSide)
	cnx, cny := max(nx/coarseRatio, 1), max(ny/coarseRatio, 1)
	v.gen++
	t := time.Now()
	v.coarse = reuseMap(v.coarse, r, cnx, cny)
	v.coarse.Gen = v.gen
	var err error
	if v.coarseS, err = newSampler(v.coarseS, v.coarse, v.Model.S, v.Model.Q, v.curves, coarseTol); err != nil {
		v.Err = err
		return
	}
	v.mapRows(v.coarse, v.coarseS, cny)
	v.Stats.CoarseMs = ms(time.Since(t))
	v.Stats.CoarseNX, v.Stats.CoarseNY = cnx, cny
	v.Stats.CoarseExact = v.coarseS.Exact
	t = time.Now()
	v.full = reuseMap(v.full, r, nx, ny)
	v.full.Gen = v.gen
	if v.fullS, err = newSampler(v.fullS, v.full, v.Model.S, v.Model.Q, v.curves, relTol); err != nil {
		v.Err = err
		return
	}
	v.fullMs = ms(time.Since(t)) // the caustic mask is part of the full map's cost
	v.Stats.FullNX, v.Stats.FullNY = nx, ny
	v.fullT0 = t
}

func reuseMap(m *Map, r lens.Rect, nx, ny int) *Map {
	if m == nil || cap(m.A) < nx*ny {
		m = &Map{A: make([]float32, nx*ny)}
	}
	m.X0, m.Y0, m.X1, m.Y1 = r.X0, r.Y0, r.X1, r.Y1
	m.NX, m.NY, m.Rows = nx, ny, 0
	m.A = m.A[:nx*ny]
	return m
}

// mapRows computes the next n rows of m (n a multiple of blockPx) with its
// adaptive sampler, then colours them.
func (v *View) mapRows(m *Map, sp *sampler, n int) {
	j0 := m.Rows
	j1 := min(m.NY, j0+n)
	sp.rows(j0, j1)
	if sp.err != nil {
		v.Err = fmt.Errorf("map: %d pixels without a valid image set, first: %w", sp.Failed, sp.err)
	}
	m.Colour(v.Scale, j0, j1)
	m.Rows = j1
}

// updateCurve recomputes the plotted light curve and the χ².
func (v *View) updateCurve() {
	t := time.Now()
	defer func() { v.Stats.CurveMs = ms(time.Since(t)) }()
	m := v.Model
	lo, hi := v.TMin, v.TMax
	if lo == 0 && hi == 0 {
		lo, hi = m.T0-2*m.TE, m.T0+2*m.TE
	}
	if len(v.TGrid) != GridN {
		v.TGrid = make([]float64, GridN)
		v.AGrid = make([]float64, GridN)
	}
	for i := range v.TGrid {
		v.TGrid[i] = lo + (hi-lo)*float64(i)/float64(GridN-1)
	}
	v.Err = nil
	var off []lens.Offset
	if fit.HasParallax(&m.Params) && v.Coords != nil {
		if m.TRef == 0 {
			m.TRef = m.T0 // lens.Model's own default, made explicit for the offsets
		}
		var err error
		if off, err = v.parallaxOffsets(m.TRef); err != nil {
			v.Err = err
		}
	}
	if v.Err == nil {
		v.Err = v.eval.LightCurve(v.AGrid, &m, v.TGrid, off)
	}
	if v.Err != nil {
		for i := range v.AGrid {
			v.AGrid[i] = math.NaN()
		}
	}
	// The drawn trajectory bends with parallax and orbital motion.
	v.Path = v.Path[:0]
	if off != nil || fit.HasOrbit(&m.Params) {
		for i, t := range v.TGrid {
			var o lens.Offset
			if off != nil {
				o = off[i]
			}
			v.Path = append(v.Path, m.At(t, o).Zeta)
		}
	} else {
		v.Path = nil
	}
	v.Chi2 = math.NaN()
	if v.Chi2Func != nil {
		c, err := v.Chi2Func(&m)
		if err != nil {
			v.Err = fmt.Errorf("χ²: %w", err)
		} else {
			v.Chi2 = c
		}
	}
}

type offKey struct {
	lo, hi, tref float64
	c            fit.Coords
}

// parallaxOffsets returns the offsets at TGrid for t0,par tref, computed once
// per grid, tref and position (Event.ParallaxOffsets evaluates the solar
// ephemeris at every time; dragging t0, u0 or α leaves them unchanged).
func (v *View) parallaxOffsets(tref float64) ([]lens.Offset, error) {
	k := offKey{v.TGrid[0], v.TGrid[len(v.TGrid)-1], tref, *v.Coords}
	if v.off != nil && k == v.offKey {
		return v.off, nil
	}
	ev := fit.Event{Coords: v.Coords}
	off, err := ev.ParallaxOffsets(v.TGrid, tref)
	if err != nil {
		v.off = nil
		return nil, err
	}
	v.off, v.offKey = off, k
	return off, nil
}

// Scene returns the overlay primitives of the current state. The slice is
// reused by the next call.
func (v *View) Scene() []Prim {
	g := Geometry{Model: v.Model, Curves: v.curves, CursorT: v.CursorT, DPR: v.DPR, Dragging: v.Dragging(), Path: v.Path}
	v.scene = BuildScene(v.scene, v.T, &g)
	return v.scene
}

// Grips returns the screen positions (device pixels) of a point on the
// trajectory (the one nearest the view centre) and of the rotation handle, for
// tests and for assistive descriptions; ok is false when the line is off screen.
func (v *View) Grips() (line, handle [2]float64, ok bool) {
	k := TrackOf(&v.Model)
	lx, ly := v.T.ToScreen(k.At(k.Tau(complex(v.T.CX, v.T.CY))))
	hx, hy := v.T.ToScreen(k.At(k.HandleTau(v.T)))
	in := func(x, y float64) bool { return x >= 0 && y >= 0 && x < float64(v.T.W) && y < float64(v.T.H) }
	return [2]float64{lx, ly}, [2]float64{hx, hy}, in(lx, ly) && in(hx, hy)
}

// Maps returns the full and coarse maps (either may be nil or partly computed).
func (v *View) Maps() (full, coarse *Map) { return v.full, v.coarse }

// Paint renders the map and overlay into f (the 2-D canvas fallback).
func (v *View) Paint(f *Frame) {
	PaintMaps(f, v.T, v.full, v.coarse)
	DrawScene(f, v.Scene())
}
