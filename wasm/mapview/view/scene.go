package view

import (
	"image/color"
	"math"

	"lensbook/lens"
)

// Kind is the kind of a drawing primitive.
type Kind int

const (
	Polyline Kind = iota // stroked open polyline
	Polygon              // filled polygon (convex shapes only)
	Disk                 // filled circle at Pts[0] with radius R
	Ring                 // stroked circle at Pts[0] with radius R
)

// Pt is a screen position in device pixels.
type Pt struct{ X, Y float32 }

// Prim is one drawing primitive of the overlay, in screen pixels. Both
// renderers (ebiten's vector package and the software rasteriser of the 2-D
// canvas fallback) draw the same list, so the two modes look alike.
type Prim struct {
	Kind  Kind
	Pts   []Pt
	Width float32 // stroke width (Polyline, Ring)
	R     float32 // radius (Disk, Ring)
	Col   color.RGBA
}

// Overlay colours: chosen outside the hue range of Ramp so that caustics and
// the trajectory never blend into the map.
var (
	CausticColour  = color.RGBA{255, 60, 100, 255}          // caustics
	CriticalColour = premul(color.RGBA{250, 250, 250, 150}) // critical curves (lens plane), translucent
	TrackColour    = color.RGBA{255, 255, 255, 255}
	OutlineColour  = color.RGBA{0, 0, 0, 200}
	HandleColour   = color.RGBA{255, 170, 30, 255}
	SourceColour   = color.RGBA{80, 230, 255, 255}
	LensColour     = color.RGBA{255, 255, 255, 255}
)

// Geometry is everything the overlay needs besides the view transform.
type Geometry struct {
	Model    lens.Model
	Curves   []lens.Curve // of the current (s, q)
	CursorT  float64      // time under the cursor in the light-curve plot (full JD); NaN = none
	DPR      float64      // device pixels per CSS pixel
	Dragging Part         // highlighted part, Background for none
	// Path, when set, is the source trajectory bent by parallax or orbital
	// motion (View.Path); it is drawn instead of the straight line, which
	// still carries the arrows and the handle (dragging moves the straight
	// part of the model: t0, u0, α).
	Path []complex128
}

// BuildScene returns the overlay primitives for g seen through t, appended to dst[:0].
func BuildScene(dst []Prim, t Transform, g *Geometry) []Prim {
	dst = dst[:0]
	dpr := float32(g.DPR)
	if dpr <= 0 {
		dpr = 1
	}
	toPt := func(z complex128) Pt {
		x, y := t.ToScreen(z)
		return Pt{float32(x), float32(y)}
	}
	poly := func(zs []complex128, closed bool) []Pt {
		pts := make([]Pt, 0, len(zs)+1)
		for _, z := range zs {
			pts = append(pts, toPt(z))
		}
		if closed && len(zs) > 0 {
			pts = append(pts, toPt(zs[0]))
		}
		return pts
	}
	m := &g.Model
	// Critical curves (lens plane) under the caustics.
	for _, c := range g.Curves {
		dst = append(dst, Prim{Kind: Polyline, Pts: poly(c.Critical, true), Width: 1 * dpr, Col: CriticalColour})
	}
	for _, c := range g.Curves {
		dst = append(dst, Prim{Kind: Polyline, Pts: poly(c.Caustic, true), Width: 1.6 * dpr, Col: CausticColour})
	}
	if m.Q == 0 { // single lens: the caustic is the point at the lens
		dst = append(dst, Prim{Kind: Disk, Pts: []Pt{toPt(0)}, R: 2 * dpr, Col: CausticColour})
	}
	// Lenses: disks with area ∝ mass, outlined.
	for _, l := range lensPositions(m) {
		r := float32(2.5+4*math.Sqrt(l.mass)) * dpr
		dst = append(dst, Prim{Kind: Disk, Pts: []Pt{toPt(l.z)}, R: r + dpr, Col: OutlineColour},
			Prim{Kind: Disk, Pts: []Pt{toPt(l.z)}, R: r, Col: LensColour})
	}
	// Trajectory with arrows.
	k := TrackOf(m)
	pad := 20 * t.Scale
	if a, b, ok := k.clipLine(t.Rect(), pad); ok {
		w := float32(2) * dpr
		if g.Dragging == Line {
			w = 3 * dpr
		}
		line := []Pt{toPt(k.At(a)), toPt(k.At(b))}
		if len(g.Path) > 1 {
			line = poly(g.Path, false)
		}
		dst = append(dst, Prim{Kind: Polyline, Pts: line, Width: w + 2*dpr, Col: OutlineColour},
			Prim{Kind: Polyline, Pts: line, Width: w, Col: TrackColour})
		// Direction arrows every 160 px along the visible part.
		step := 160 * float64(dpr) * t.Scale
		first := math.Ceil(a/step) * step
		for tau := first + step/2; tau < b; tau += step {
			dst = append(dst, arrowHead(toPt(k.At(tau)), k.D, 9*dpr))
		}
		// Rotation handle.
		h := toPt(k.At(k.HandleTau(t)))
		r := float32(7) * dpr
		if g.Dragging == Handle {
			r = 9 * dpr
		}
		dst = append(dst, Prim{Kind: Disk, Pts: []Pt{h}, R: r + dpr, Col: OutlineColour},
			Prim{Kind: Disk, Pts: []Pt{h}, R: r, Col: HandleColour},
			Prim{Kind: Ring, Pts: []Pt{h}, R: r - 3*dpr, Width: 1.5 * dpr, Col: OutlineColour})
	}
	// Source disk to scale at the cursor time.
	if !math.IsNaN(g.CursorT) && m.TE > 0 {
		z := m.At(g.CursorT, lens.Offset{}).Zeta
		c := toPt(z)
		r := float32(m.Rho / t.Scale)
		if r >= 2*dpr {
			fill := SourceColour
			fill.A = 90
			dst = append(dst, Prim{Kind: Disk, Pts: []Pt{c}, R: r, Col: premul(fill)},
				Prim{Kind: Ring, Pts: []Pt{c}, R: r, Width: 1.5 * dpr, Col: SourceColour})
		} else { // smaller than the pixels: a marker with a dot at its centre
			dst = append(dst, Prim{Kind: Ring, Pts: []Pt{c}, R: 6 * dpr, Width: 1.5 * dpr, Col: SourceColour},
				Prim{Kind: Disk, Pts: []Pt{c}, R: 1.5 * dpr, Col: SourceColour})
		}
	}
	return dst
}

// premul returns c with premultiplied alpha (the form color.RGBA is defined in).
func premul(c color.RGBA) color.RGBA {
	a := uint16(c.A)
	return color.RGBA{uint8(uint16(c.R) * a / 255), uint8(uint16(c.G) * a / 255), uint8(uint16(c.B) * a / 255), c.A}
}

func arrowHead(tip Pt, d complex128, size float32) Prim {
	dx, dy := float32(real(d)), float32(-imag(d)) // screen y is down
	nx, ny := -dy, dx
	back := Pt{tip.X - size*dx, tip.Y - size*dy}
	return Prim{Kind: Polygon, Col: TrackColour, Pts: []Pt{
		{tip.X + 0.4*size*dx, tip.Y + 0.4*size*dy},
		{back.X + 0.55*size*nx, back.Y + 0.55*size*ny},
		{back.X - 0.55*size*nx, back.Y - 0.55*size*ny},
	}}
}

type lensAt struct {
	z    complex128
	mass float64 // fraction of the total mass
}

// lensPositions follows the lens package frame: primary at −qs/(1+q), secondary at s/(1+q).
func lensPositions(m *lens.Model) []lensAt {
	if m.Q == 0 {
		return []lensAt{{0, 1}}
	}
	q, s := m.Q, m.S
	return []lensAt{{complex(-q*s/(1+q), 0), 1 / (1 + q)}, {complex(s/(1+q), 0), q / (1 + q)}}
}
