package view

import (
	"math"
	"math/cmplx"

	"lensbook/lens"
)

// Track is the straight source trajectory of a model as drawn on the map:
// ζ(τ) = C + τ·D + U0·N with D = (cos α, sin α) and N = (−sin α, cos α)
// (lens package convention; parallax and orbital motion are not drawn).
type Track struct {
	C    complex128 // reference point (θE)
	D, N complex128 // unit direction of motion and unit normal
	U0   float64
}

// TrackOf returns the trajectory of m.
func TrackOf(m *lens.Model) Track {
	sin, cos := math.Sincos(m.Alpha)
	return Track{
		C:  lens.ReferencePoint(m.Ref, m.S, m.Q),
		D:  complex(cos, sin),
		N:  complex(-sin, cos),
		U0: m.U0,
	}
}

// At returns the source position at τ.
func (k Track) At(tau float64) complex128 {
	return k.C + complex(tau, 0)*k.D + complex(k.U0, 0)*k.N
}

// Tau returns the τ of the point of the line nearest to z.
func (k Track) Tau(z complex128) float64 { return dot(z-k.C, k.D) }

func dot(a, b complex128) float64 { return real(a)*real(b) + imag(a)*imag(b) }

// clipLine returns the τ range of the track inside the rectangle r, padded by
// pad (θE), and false when the line misses it.
func (k Track) clipLine(r lens.Rect, pad float64) (t0, t1 float64, ok bool) {
	t0, t1 = math.Inf(-1), math.Inf(1)
	p := k.At(0)
	for _, ax := range []struct{ p, d, lo, hi float64 }{
		{real(p), real(k.D), r.X0 - pad, r.X1 + pad},
		{imag(p), imag(k.D), r.Y0 - pad, r.Y1 + pad},
	} {
		if math.Abs(ax.d) < 1e-15 {
			if ax.p < ax.lo || ax.p > ax.hi {
				return 0, 0, false
			}
			continue
		}
		a, b := (ax.lo-ax.p)/ax.d, (ax.hi-ax.p)/ax.d
		if a > b {
			a, b = b, a
		}
		t0, t1 = math.Max(t0, a), math.Min(t1, b)
	}
	return t0, t1, t0 < t1
}

// HandleTau is the τ of the rotation handle: a third of the shorter view side
// ahead of the point of the line nearest the view centre, pulled back inside
// the view (24 px from the edges) so it stays reachable at any zoom.
func (k Track) HandleTau(t Transform) float64 {
	tau := k.Tau(complex(t.CX, t.CY)) + float64(min(t.W, t.H))/3*t.Scale
	inset := 24 * t.Scale
	r := t.Rect()
	r.X0, r.Y0, r.X1, r.Y1 = r.X0+inset, r.Y0+inset, r.X1-inset, r.Y1-inset
	if a, b, ok := k.clipLine(r, 0); ok {
		tau = math.Max(a, math.Min(b, tau))
	}
	return tau
}

// Part is what a pointer press hits.
type Part int

const (
	Background Part = iota
	Line            // the trajectory: dragging moves it (u0, t0)
	Handle          // the rotation handle: dragging turns it (α)
)

// Hit tolerances in device pixels (scaled by the device pixel ratio by callers).
const (
	lineHitPx   = 7
	handleHitPx = 11
)

// HitTest returns the part of the trajectory under screen point (x, y);
// dpr scales the tolerances.
func (k Track) HitTest(t Transform, x, y, dpr float64) Part {
	hx, hy := t.ToScreen(k.At(k.HandleTau(t)))
	if math.Hypot(x-hx, y-hy) <= handleHitPx*dpr {
		return Handle
	}
	z := t.ToPlane(x, y)
	if d := math.Abs(dot(z-k.C, k.N) - k.U0); d/t.Scale <= lineHitPx*dpr {
		return Line
	}
	return Background
}

// Drag is an active pointer drag on the map.
type Drag struct {
	Part          Part
	Start         complex128 // plane point under the pointer at press (θE)
	StartX        float64    // screen position at press
	StartY        float64
	U0, T0, Alpha float64 // model values at press
	Pivot         complex128
	View          Transform // view at press
}

// MoveLine returns u0 and t0 after the trajectory grabbed at d.Start has been
// dragged to plane point z: the perpendicular displacement changes u0 and the
// displacement along the motion changes t0 (moving the line forward by δ θE
// makes the source arrive δ·tE earlier).
func (d *Drag) MoveLine(k Track, tE float64, z complex128) (u0, t0 float64) {
	delta := z - d.Start
	return d.U0 + dot(delta, k.N), d.T0 - dot(delta, k.D)*tE
}

// Rotate returns α after the handle grabbed at d.Start has been dragged to z.
// The trajectory turns about the reference point, which keeps u0 and t0.
func (d *Drag) Rotate(z complex128) float64 {
	a := d.Alpha + cmplx.Phase(z-d.Pivot) - cmplx.Phase(d.Start-d.Pivot)
	return math.Remainder(a, 2*math.Pi)
}
