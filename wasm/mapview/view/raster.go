package view

import (
	"image/color"
	"math"
)

// Map is a computed magnification map: point-source magnification at the
// pixel centres of an NX×NY grid over Rect (row 0 at Rect.Y0, as lens.MagMap).
type Map struct {
	X0, Y0, X1, Y1 float64 // covered rectangle (θE)
	NX, NY         int
	A              []float32 // magnification, len NX·NY
	RGBA           []uint8   // colours of A (4 bytes per pixel, same row order), filled with A
	Rows           int       // rows [0, Rows) are computed
	Gen            int       // changes whenever the map is restarted for a new view or lens
}

// Covers reports whether plane point (x, y) lies in a computed row of m.
func (m *Map) Covers(x, y float64) bool {
	if m == nil || m.Rows == 0 {
		return false
	}
	return x >= m.X0 && x < m.X1 && y >= m.Y0 && y < m.Y0+float64(m.Rows)*(m.Y1-m.Y0)/float64(m.NY)
}

// Background0 is the colour of screen pixels no computed map covers yet.
var Background0 = color.RGBA{20, 20, 28, 255}

// Frame is an RGBA image in the layout of the canvas ImageData
// (row-major, top row first, 4 bytes per pixel, premultiplied = straight here
// since every pixel ends opaque).
type Frame struct {
	W, H int
	Pix  []uint8
}

// Resize makes f hold a w×h image, reusing its buffer when large enough.
func (f *Frame) Resize(w, h int) {
	f.W, f.H = w, h
	if cap(f.Pix) < 4*w*h {
		f.Pix = make([]uint8, 4*w*h)
	}
	f.Pix = f.Pix[:4*w*h]
}

// Colour fills m.RGBA for rows [j0, j1) from m.A with scale sc.
func (m *Map) Colour(sc Scale, j0, j1 int) {
	if len(m.RGBA) != 4*len(m.A) {
		if cap(m.RGBA) >= 4*len(m.A) {
			m.RGBA = m.RGBA[:4*len(m.A)]
		} else {
			m.RGBA = make([]uint8, 4*len(m.A))
		}
	}
	for i := j0 * m.NX; i < j1*m.NX; i++ {
		c := Ramp[sc.Index(m.A[i])]
		p := m.RGBA[4*i : 4*i+4 : 4*i+4]
		p[0], p[1], p[2], p[3] = c.R, c.G, c.B, 255
	}
}

// PaintMaps fills f with the maps seen through t: each screen pixel takes the
// nearest computed pixel of the first map in maps that covers it (finest
// first), else Background0. Map colours come from Map.RGBA.
func PaintMaps(f *Frame, t Transform, maps ...*Map) {
	f.Resize(t.W, t.H)
	// Fast path: a complete map with one pixel per screen pixel over exactly
	// the view (the usual case while dragging the trajectory) is a row copy.
	if len(maps) > 0 && maps[0] != nil {
		if m := maps[0]; m.Rows == m.NY && m.NX == t.W && m.NY == t.H && len(m.RGBA) == 4*len(m.A) {
			if r := t.Rect(); r.X0 == m.X0 && r.X1 == m.X1 && r.Y0 == m.Y0 && r.Y1 == m.Y1 {
				for y := range t.H {
					j := m.NY - 1 - y
					copy(f.Pix[4*y*t.W:4*(y+1)*t.W], m.RGBA[4*j*m.NX:4*(j+1)*m.NX])
				}
				return
			}
		}
	}
	// The transform is axis-aligned, so column and row lookups separate.
	cols := make([][]int32, len(maps))
	rows := make([][]int32, len(maps))
	for k, m := range maps {
		if m == nil || m.Rows == 0 || len(m.RGBA) != 4*len(m.A) {
			continue
		}
		cols[k] = make([]int32, t.W)
		rows[k] = make([]int32, t.H)
		dx, dy := (m.X1-m.X0)/float64(m.NX), (m.Y1-m.Y0)/float64(m.NY)
		for x := range t.W {
			px := real(t.ToPlane(float64(x)+0.5, 0))
			i := int32(math.Floor((px - m.X0) / dx))
			if i < 0 || int(i) >= m.NX {
				i = -1
			}
			cols[k][x] = i
		}
		for y := range t.H {
			py := imag(t.ToPlane(0, float64(y)+0.5))
			j := int32(math.Floor((py - m.Y0) / dy))
			if j < 0 || int(j) >= m.Rows {
				j = -1
			}
			rows[k][y] = j * int32(m.NX)
		}
	}
	bg := [4]uint8{Background0.R, Background0.G, Background0.B, 255}
	for y := range t.H {
		p := f.Pix[4*y*t.W : 4*(y+1)*t.W]
		for x := range t.W {
			src := bg[:]
			for k, m := range maps {
				if cols[k] == nil {
					continue
				}
				i, j := cols[k][x], rows[k][y]
				if i < 0 || j < 0 {
					continue
				}
				o := 4 * (j + i)
				src = m.RGBA[o : o+4]
				break
			}
			copy(p[4*x:4*x+4], src)
		}
	}
}

// DrawScene rasterises prims over f with anti-aliased edges (coverage from
// the distance of the pixel centre to the shape, one pixel wide ramp).
func DrawScene(f *Frame, prims []Prim) {
	for i := range prims {
		p := &prims[i]
		switch p.Kind {
		case Polyline:
			for j := 1; j < len(p.Pts); j++ {
				f.segment(p.Pts[j-1], p.Pts[j], p.Width, p.Col)
			}
		case Disk:
			f.circle(p.Pts[0], p.R, 0, p.Col)
		case Ring:
			f.circle(p.Pts[0], p.R, p.Width, p.Col)
		case Polygon:
			f.polygon(p.Pts, p.Col)
		}
	}
}

// blend composes premultiplied c with coverage a ∈ [0, 1] over pixel (x, y).
func (f *Frame) blend(x, y int, c color.RGBA, a float32) {
	if a <= 0 || x < 0 || y < 0 || x >= f.W || y >= f.H {
		return
	}
	if a > 1 {
		a = 1
	}
	o := 4 * (y*f.W + x)
	sa := float32(c.A) / 255 * a
	px := f.Pix[o : o+3 : o+3]
	px[0] = uint8(float32(c.R)*a + float32(px[0])*(1-sa) + 0.5)
	px[1] = uint8(float32(c.G)*a + float32(px[1])*(1-sa) + 0.5)
	px[2] = uint8(float32(c.B)*a + float32(px[2])*(1-sa) + 0.5)
}

// segment strokes the segment p0–p1 with width w. Each pixel is drawn once
// per segment; joints of a polyline may be drawn twice, which only shows for
// translucent colours.
func (f *Frame) segment(p0, p1 Pt, w float32, c color.RGBA) {
	hw := w / 2
	x0 := int(math.Floor(float64(min(p0.X, p1.X) - hw - 1)))
	x1 := int(math.Ceil(float64(max(p0.X, p1.X) + hw + 1)))
	y0 := int(math.Floor(float64(min(p0.Y, p1.Y) - hw - 1)))
	y1 := int(math.Ceil(float64(max(p0.Y, p1.Y) + hw + 1)))
	x0, y0 = max(x0, 0), max(y0, 0)
	x1, y1 = min(x1, f.W-1), min(y1, f.H-1)
	if x0 > x1 || y0 > y1 || (x1-x0)*(y1-y0) > 4*f.W*f.H {
		return
	}
	dx, dy := p1.X-p0.X, p1.Y-p0.Y
	ll := dx*dx + dy*dy
	// Long segments: walk along the segment instead of its whole bounding box.
	if ll > 64*64 && (x1-x0) > 8 && (y1-y0) > 8 {
		n := int(math.Ceil(math.Sqrt(float64(ll)) / 32))
		for k := range n {
			a := Pt{p0.X + dx*float32(k)/float32(n), p0.Y + dy*float32(k)/float32(n)}
			b := Pt{p0.X + dx*float32(k+1)/float32(n), p0.Y + dy*float32(k+1)/float32(n)}
			f.segmentPart(a, b, p0, p1, w, c)
		}
		return
	}
	f.segmentPart(p0, p1, p0, p1, w, c)
}

// segmentPart draws the pixels of the bounding box of a–b (a piece of p0–p1)
// whose nearest point on p0–p1 lies within the piece, so pieces do not overlap.
func (f *Frame) segmentPart(a, b, p0, p1 Pt, w float32, c color.RGBA) {
	hw := w / 2
	x0 := max(int(math.Floor(float64(min(a.X, b.X)-hw-1))), 0)
	x1 := min(int(math.Ceil(float64(max(a.X, b.X)+hw+1))), f.W-1)
	y0 := max(int(math.Floor(float64(min(a.Y, b.Y)-hw-1))), 0)
	y1 := min(int(math.Ceil(float64(max(a.Y, b.Y)+hw+1))), f.H-1)
	dx, dy := p1.X-p0.X, p1.Y-p0.Y
	ll := dx*dx + dy*dy
	ta, tb := float32(0), float32(1)
	if ll > 0 {
		ta = ((a.X-p0.X)*dx + (a.Y-p0.Y)*dy) / ll
		tb = ((b.X-p0.X)*dx + (b.Y-p0.Y)*dy) / ll
	}
	first, last := ta <= 0, tb >= 1
	for y := y0; y <= y1; y++ {
		for x := x0; x <= x1; x++ {
			px, py := float32(x)+0.5, float32(y)+0.5
			u := float32(0)
			if ll > 0 {
				u = ((px-p0.X)*dx + (py-p0.Y)*dy) / ll
			}
			if (u < ta && !first) || (u >= tb && !last) {
				continue
			}
			u = max(0, min(1, u))
			ex, ey := p0.X+u*dx-px, p0.Y+u*dy-py
			d := float32(math.Sqrt(float64(ex*ex + ey*ey)))
			f.blend(x, y, c, hw+0.5-d)
		}
	}
}

// circle fills (w == 0) or strokes (w > 0) a circle.
func (f *Frame) circle(ctr Pt, r, w float32, c color.RGBA) {
	ext := r + w/2 + 1
	x0 := max(int(math.Floor(float64(ctr.X-ext))), 0)
	x1 := min(int(math.Ceil(float64(ctr.X+ext))), f.W-1)
	y0 := max(int(math.Floor(float64(ctr.Y-ext))), 0)
	y1 := min(int(math.Ceil(float64(ctr.Y+ext))), f.H-1)
	for y := y0; y <= y1; y++ {
		for x := x0; x <= x1; x++ {
			dx, dy := float32(x)+0.5-ctr.X, float32(y)+0.5-ctr.Y
			d := float32(math.Sqrt(float64(dx*dx + dy*dy)))
			if w == 0 {
				f.blend(x, y, c, r+0.5-d)
			} else {
				f.blend(x, y, c, w/2+0.5-abs32(d-r))
			}
		}
	}
}

// polygon fills a convex polygon; coverage falls off over one pixel outside
// the nearest edge.
func (f *Frame) polygon(pts []Pt, c color.RGBA) {
	if len(pts) < 3 {
		return
	}
	minX, minY, maxX, maxY := pts[0].X, pts[0].Y, pts[0].X, pts[0].Y
	for _, p := range pts {
		minX, minY, maxX, maxY = min(minX, p.X), min(minY, p.Y), max(maxX, p.X), max(maxY, p.Y)
	}
	// Orientation sign so that "inside" is positive for both windings.
	area := float32(0)
	for i := range pts {
		a, b := pts[i], pts[(i+1)%len(pts)]
		area += a.X*b.Y - b.X*a.Y
	}
	sgn := float32(1)
	if area < 0 {
		sgn = -1
	}
	x0, x1 := max(int(minX)-1, 0), min(int(maxX)+1, f.W-1)
	y0, y1 := max(int(minY)-1, 0), min(int(maxY)+1, f.H-1)
	for y := y0; y <= y1; y++ {
		for x := x0; x <= x1; x++ {
			px, py := float32(x)+0.5, float32(y)+0.5
			in := float32(math.Inf(1))
			for i := range pts {
				a, b := pts[i], pts[(i+1)%len(pts)]
				ex, ey := b.X-a.X, b.Y-a.Y
				l := float32(math.Sqrt(float64(ex*ex + ey*ey)))
				if l == 0 {
					continue
				}
				// signed distance of (px, py) to the edge, positive inside
				d := sgn * (ex*(py-a.Y) - ey*(px-a.X)) / l
				in = min(in, d)
			}
			f.blend(x, y, c, in+0.5)
		}
	}
}

func abs32(v float32) float32 {
	if v < 0 {
		return -v
	}
	return v
}
