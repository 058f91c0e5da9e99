package view

import (
	"math"

	"lensbook/lens"
)

// Transform maps the source plane (θE, y up) to screen pixels (y down) of a
// W×H view. Pixel (i, j) covers [i, i+1)×[j, j+1); its centre is at i+0.5, j+0.5.
type Transform struct {
	CX, CY float64 // source-plane point at the centre of the view (θE)
	Scale  float64 // θE per pixel, > 0
	W, H   int     // view size in device pixels
}

// ToScreen returns the screen position of source-plane point z.
func (t Transform) ToScreen(z complex128) (x, y float64) {
	return (real(z)-t.CX)/t.Scale + float64(t.W)/2, (t.CY-imag(z))/t.Scale + float64(t.H)/2
}

// ToPlane returns the source-plane point at screen position (x, y).
func (t Transform) ToPlane(x, y float64) complex128 {
	return complex(t.CX+(x-float64(t.W)/2)*t.Scale, t.CY-(y-float64(t.H)/2)*t.Scale)
}

// Rect is the source-plane rectangle covered by the view.
func (t Transform) Rect() lens.Rect {
	hw, hh := float64(t.W)/2*t.Scale, float64(t.H)/2*t.Scale
	return lens.Rect{X0: t.CX - hw, Y0: t.CY - hh, X1: t.CX + hw, Y1: t.CY + hh}
}

// ZoomAt multiplies the scale by f keeping the plane point under (x, y) fixed.
// The scale is kept within [minScale, maxScale].
func (t *Transform) ZoomAt(x, y, f float64) {
	z := t.ToPlane(x, y)
	t.Scale = math.Max(minScale, math.Min(maxScale, t.Scale*f))
	// Solve ToPlane(x, y) == z for the centre.
	t.CX = real(z) - (x-float64(t.W)/2)*t.Scale
	t.CY = imag(z) + (y-float64(t.H)/2)*t.Scale
}

// Pan moves the view so that content moves by (dx, dy) pixels on screen.
func (t *Transform) Pan(dx, dy float64) {
	t.CX -= dx * t.Scale
	t.CY += dy * t.Scale
}

// Scale limits: 1e-6 θE per pixel resolves the smallest planetary caustics of
// q ~ 1e-6; 0.1 θE per pixel shows ±25 θE on a 512-pixel view.
const (
	minScale = 1e-6
	maxScale = 0.1
)
