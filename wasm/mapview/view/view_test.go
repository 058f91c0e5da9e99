package view

import (
	"math"
	"math/cmplx"
	"testing"
	"time"

	"gonum.org/v1/gonum/floats/scalar"

	"lensbook/lens"
)

// planetary is a binary with a resonant-ish caustic near the primary.
var planetary = lens.Model{Params: lens.Params{T0: 2460100.5, U0: 0.05, TE: 22, S: 1.05, Q: 0.008, Alpha: 0.7}, Ref: lens.CentralCaustic}

func TestTransformRoundTrip(t *testing.T) {
	tr := Transform{CX: 0.3, CY: -0.2, Scale: 0.004, W: 512, H: 384}
	for _, z := range []complex128{0, 0.31 - 0.19i, complex(-0.5, 0.7)} {
		x, y := tr.ToScreen(z)
		if got := tr.ToPlane(x, y); cmplx.Abs(got-z) > 1e-12 {
			t.Errorf("ToPlane(ToScreen(%v)) = %v", z, got)
		}
	}
	// The view centre is the middle of the screen; y grows downwards on screen.
	if x, y := tr.ToScreen(complex(tr.CX, tr.CY)); x != 256 || y != 192 {
		t.Errorf("centre at (%v, %v), want (256, 192)", x, y)
	}
	if _, y := tr.ToScreen(complex(tr.CX, tr.CY+tr.Scale)); y != 191 {
		t.Errorf("one pixel up in the plane is screen y %v, want 191", y)
	}
	// Zooming keeps the point under the cursor.
	z := tr.ToPlane(100, 50)
	tr.ZoomAt(100, 50, 0.5)
	if got := tr.ToPlane(100, 50); cmplx.Abs(got-z) > 1e-12 || tr.Scale != 0.002 {
		t.Errorf("after zoom: point under cursor %v → %v, scale %v", z, got, tr.Scale)
	}
	// Panning moves content with the pointer.
	z = tr.ToPlane(200, 200)
	tr.Pan(10, -5)
	if x, y := tr.ToScreen(z); math.Abs(x-210) > 1e-9 || math.Abs(y-195) > 1e-9 {
		t.Errorf("after pan the point is at (%v, %v), want (210, 195)", x, y)
	}
}

// The drawn trajectory must be the one lens.Model.At computes (no parallax).
func TestTrackMatchesModel(t *testing.T) {
	m := planetary
	k := TrackOf(&m)
	for _, dt := range []float64{-30, -1, 0, 2.5, 40} {
		tt := m.T0 + dt
		want := m.At(tt, lens.Offset{}).Zeta
		if got := k.At(dt / m.TE); cmplx.Abs(got-want) > 1e-12 {
			t.Errorf("t0%+v: track %v, model %v", dt, got, want)
		}
	}
}

// Dragging the line by δ along the normal adds δ to u0; along the motion it
// moves t0 by −δ·tE; every point of the new trajectory is the old one shifted.
func TestDragLine(t *testing.T) {
	m := planetary
	k := TrackOf(&m)
	d := Drag{Part: Line, Start: k.At(0.3), U0: m.U0, T0: m.T0}
	shift := complex(0.02, -0.013)
	u0, t0 := d.MoveLine(k, m.TE, d.Start+shift)
	m2 := m
	m2.U0, m2.T0 = u0, t0
	for _, tt := range []float64{m.T0 - 5, m.T0, m.T0 + 11} {
		a, b := m.At(tt, lens.Offset{}).Zeta, m2.At(tt, lens.Offset{}).Zeta
		// t0 ≈ 2.46e6 d carries an ulp of 4.7e-10 d, i.e. ~2e-11 in τ.
		if cmplx.Abs(b-a-shift) > 1e-9 {
			t.Errorf("t = %v: moved by %v, want %v", tt, b-a, shift)
		}
	}
}

// Rotating by the handle turns the line about the reference point: u0 and t0
// unchanged, α changed by the angle swept.
func TestRotate(t *testing.T) {
	m := planetary
	k := TrackOf(&m)
	tr := Transform{Scale: 0.002, W: 512, H: 512}
	h := k.At(k.HandleTau(tr))
	d := Drag{Part: Handle, Start: h, Alpha: m.Alpha, Pivot: k.C}
	rot := cmplx.Rect(1, 0.25)
	got := d.Rotate(k.C + (h-k.C)*rot)
	if !scalar.EqualWithinAbs(got, m.Alpha+0.25, 1e-12) {
		t.Errorf("α = %v, want %v", got, m.Alpha+0.25)
	}
}

func TestHitTest(t *testing.T) {
	m := planetary
	k := TrackOf(&m)
	tr := Transform{Scale: 0.002, W: 512, H: 512}
	hx, hy := tr.ToScreen(k.At(k.HandleTau(tr)))
	if p := k.HitTest(tr, hx+3, hy-2, 1); p != Handle {
		t.Errorf("at the handle: %v", p)
	}
	lx, ly := tr.ToScreen(k.At(k.Tau(0) - 0.05))
	if p := k.HitTest(tr, lx, ly+3, 1); p != Line {
		t.Errorf("3 px from the line: %v", p)
	}
	// 20 px off the line along the screen normal.
	nx, ny := -math.Sin(m.Alpha), -math.Cos(m.Alpha)
	if p := k.HitTest(tr, lx+20*nx, ly+20*ny, 1); p != Background {
		t.Errorf("20 px off the line: %v", p)
	}
	if p := k.HitTest(tr, lx+20*nx, ly+20*ny, 3); p != Line {
		t.Errorf("20 px off the line at device pixel ratio 3: %v", p)
	}
}

func newTestView(t *testing.T, m lens.Model, w, h int) *View {
	t.Helper()
	v := New(m, w, h, 1)
	for range 1000 {
		v.Step(time.Second)
		if v.MapDone() {
			return v
		}
	}
	t.Fatal("map never completed")
	return nil
}

// The map pixels are the lens magnification at the pixel centres: exactly
// where the sampler solved the lens, within mapTol where it interpolated; and
// the painted colours are those of the scale.
func TestMapMatchesLens(t *testing.T) {
	const mapTol = 6e-3 // relTol plus float32 rounding; a third of one colour step (1.8 %) of DefaultScale
	for _, m := range []lens.Model{
		planetary,
		{Params: lens.Params{T0: 0, U0: 0.1, TE: 10, S: 0.7, Q: 1}},
		{Params: lens.Params{T0: 0, U0: 0.01, TE: 10, S: 1.3, Q: 1e-4}},
		{Params: lens.Params{T0: 0, U0: 0.2, TE: 10}}, // single lens
	} {
		const w, h = 200, 160
		v := newTestView(t, m, w, h)
		full, _ := v.Maps()
		var f Frame
		PaintMaps(&f, v.T, full)
		want := make([]float32, w*h)
		r := v.T.Rect()
		if m.Q > 0 {
			b, err := lens.NewBinary(m.S, m.Q)
			if err != nil {
				t.Fatal(err)
			}
			if err := lens.MagMap(want, b, r, w, h); err != nil {
				t.Fatal(err)
			}
		} else {
			dx, dy := (r.X1-r.X0)/w, (r.Y1-r.Y0)/h
			for j := range h {
				for i := range w {
					want[j*w+i] = float32(lens.PointMag(cmplx.Abs(complex(r.X0+(float64(i)+0.5)*dx, r.Y0+(float64(j)+0.5)*dy))))
				}
			}
		}
		worst, nExact := 0.0, 0
		for k := range want {
			got, ref := float64(full.A[k]), float64(want[k])
			rel := math.Abs(got-ref) / ref
			if v.fullS.st[k] == exact {
				nExact++
				if rel > 1e-6 {
					t.Errorf("s=%v q=%v exact pixel %d: %v, lens.MagMap %v", m.S, m.Q, k, got, ref)
				}
			}
			worst = math.Max(worst, rel)
			// Colour of screen pixel (i, h-1-j) is the colour of the map value.
			i, j := k%w, k/w
			o := 4 * ((h-1-j)*w + i)
			c := Ramp[v.Scale.Index(full.A[k])]
			if f.Pix[o] != c.R || f.Pix[o+1] != c.G || f.Pix[o+2] != c.B {
				t.Fatalf("pixel (%d,%d): colour %v, want %v", i, h-1-j, f.Pix[o:o+3], c)
			}
		}
		t.Logf("s=%v q=%v: %d of %d pixels solved exactly, worst relative error %.2g", m.S, m.Q, nExact, w*h, worst)
		if !(worst <= mapTol) {
			t.Errorf("s=%v q=%v: worst relative error %.3g > %g", m.S, m.Q, worst, mapTol)
		}
		if nExact < w*h/50 {
			t.Errorf("only %d exact pixels", nExact)
		}
	}
}

// A drag of the line recomputes the light curve and χ² in the same Step, and
// the curve is lens.LightCurve of the dragged model.
func TestStepUpdatesCurve(t *testing.T) {
	v := newTestView(t, planetary, 64, 64)
	var d Data
	tt := make([]float64, 200)
	for i := range tt {
		tt[i] = planetary.T0 - 20 + 0.2*float64(i)
	}
	a := make([]float64, len(tt))
	if err := lens.LightCurve(a, &planetary, tt, nil); err != nil {
		t.Fatal(err)
	}
	flux, errs := make([]float64, len(tt)), make([]float64, len(tt))
	for i := range a {
		flux[i] = 100*a[i] + 20
		errs[i] = 1
	}
	if err := d.Set([]Series{{Name: "x", T: tt, Flux: flux, Err: errs}}); err != nil {
		t.Fatal(err)
	}
	v.Chi2Func = d.Chi2
	v.DataChanged()
	if ch := v.Step(0); !ch.Model {
		t.Fatal("no model update after DataChanged")
	}
	// Exact model, exact data: χ² is zero up to rounding.
	if v.Chi2 > 1e-12 || v.Err != nil {
		t.Fatalf("χ² of the true model = %v (err %v)", v.Chi2, v.Err)
	}
	line, _, ok := v.Grips()
	if !ok {
		t.Fatal("trajectory not visible")
	}
	v.PointerDown(line[0], line[1])
	if v.Dragging() != Line {
		t.Fatalf("press on the line grabbed %v", v.Dragging())
	}
	v.PointerMove(line[0]+3, line[1]-4)
	ch := v.Step(0)
	if !ch.Model || v.Model.U0 == planetary.U0 || !(v.Chi2 > 1) {
		t.Fatalf("after drag: changed %+v, u0 %v, χ² %v", ch, v.Model.U0, v.Chi2)
	}
	want := make([]float64, GridN)
	m := v.Model
	if err := lens.LightCurve(want, &m, v.TGrid, nil); err != nil {
		t.Fatal(err)
	}
	for i := range want {
		// The view's evaluator keeps its warm start across calls, a fresh one
		// does not: the polished roots may differ in the last bits.
		if !scalar.EqualWithinRel(v.AGrid[i], want[i], 1e-12) {
			t.Fatalf("curve[%d] = %v, lens.LightCurve %v", i, v.AGrid[i], want[i])
		}
	}
	v.PointerUp()
	if v.Dragging() != Background {
		t.Error("drag not ended")
	}
}

// Keyboard nudges: arrows change u0 and t0 by 4 pixels, shift+arrows α by 1°.
func TestKeys(t *testing.T) {
	v := New(planetary, 100, 100, 1)
	m0 := v.Model
	step := 4 * v.T.Scale
	v.Key(KeyUp, false)
	v.Key(KeyRight, false)
	v.Key(KeyRight, true)
	if !scalar.EqualWithinAbs(v.Model.U0, m0.U0+step, 1e-15) ||
		!scalar.EqualWithinAbs(v.Model.T0, m0.T0+step*m0.TE, 1e-9) ||
		!scalar.EqualWithinAbs(v.Model.Alpha, m0.Alpha+math.Pi/180, 1e-15) {
		t.Errorf("after Up, Right, shift+Right: u0 %v t0 %v α %v", v.Model.U0, v.Model.T0, v.Model.Alpha)
	}
}

// Progressive map: a lens change gives a complete coarse map at once and the
// full map in chunks over later steps.
func TestProgressive(t *testing.T) {
	v := newTestView(t, planetary, 128, 128)
	if err := v.SetLens(1.2, 0.01, 0); err != nil {
		t.Fatal(err)
	}
	v.Step(0) // budget 0: one chunk of the full map only
	full, coarse := v.Maps()
	if coarse.Rows != coarse.NY || coarse.NX != 32 {
		t.Fatalf("coarse map %dx%d with %d rows done", coarse.NX, coarse.NY, coarse.Rows)
	}
	if full.Rows == 0 || full.Rows == full.NY || v.MapDone() {
		t.Fatalf("full map rows %d of %d after one zero-budget step", full.Rows, full.NY)
	}
	// The preview is within 2·coarseTol of the lens (coarseTol holds at the
	// tested points of each block, not between them).
	want := make([]float32, len(coarse.A))
	b, _ := lens.NewBinary(1.2, 0.01)
	if err := lens.MagMap(want, b, lens.Rect{X0: coarse.X0, Y0: coarse.Y0, X1: coarse.X1, Y1: coarse.Y1}, coarse.NX, coarse.NY); err != nil {
		t.Fatal(err)
	}
	for k := range want {
		if rel := math.Abs(float64(coarse.A[k]-want[k])) / float64(want[k]); rel > 2*coarseTol {
			t.Fatalf("coarse pixel %d: %v, lens.MagMap %v", k, coarse.A[k], want[k])
		}
	}
	if err := v.SetLens(-1, 0.01, 0); err == nil {
		t.Error("SetLens accepted s = -1")
	}
}

// The software renderer draws the caustic in its colour where the caustic is.
func TestPaintCaustic(t *testing.T) {
	v := newTestView(t, planetary, 200, 200)
	var f Frame
	v.Paint(&f)
	hit := 0
	for _, c := range v.curves {
		for _, z := range c.Caustic {
			x, y := v.T.ToScreen(z)
			if x < 1 || y < 1 || x >= 199 || y >= 199 {
				continue
			}
			o := 4 * (int(y)*200 + int(x))
			if near8(f.Pix[o], CausticColour.R) && near8(f.Pix[o+1], CausticColour.G) && near8(f.Pix[o+2], CausticColour.B) {
				hit++
			}
		}
	}
	if hit < 50 {
		t.Errorf("only %d caustic points drawn in the caustic colour", hit)
	}
}

func near8(a, b uint8) bool { return a-b < 40 || b-a < 40 }

// The source is drawn to scale (radius ρ in pixels of the view) at the
// position lens.Model.At gives for the cursor time, and not drawn without one.
func TestSceneSourceDisk(t *testing.T) {
	m := planetary
	m.Rho = 0.02
	tr := Transform{Scale: 0.001, W: 400, H: 400}
	g := Geometry{Model: m, CursorT: math.NaN(), DPR: 1}
	rings := func() []Prim {
		var out []Prim
		for _, p := range BuildScene(nil, tr, &g) {
			if p.Kind == Ring && p.Col == SourceColour {
				out = append(out, p)
			}
		}
		return out
	}
	if r := rings(); len(r) != 0 {
		t.Fatalf("source drawn without a cursor time: %+v", r)
	}
	g.CursorT = m.T0 + 0.3
	r := rings()
	if len(r) != 1 {
		t.Fatalf("got %d source rings", len(r))
	}
	x, y := tr.ToScreen(m.At(g.CursorT, lens.Offset{}).Zeta)
	if math.Abs(float64(r[0].Pts[0].X)-x) > 1e-3 || math.Abs(float64(r[0].Pts[0].Y)-y) > 1e-3 || math.Abs(float64(r[0].R)-20) > 1e-4 {
		t.Errorf("source ring at (%v, %v) radius %v, want (%v, %v) radius 20", r[0].Pts[0].X, r[0].Pts[0].Y, r[0].R, x, y)
	}
}
