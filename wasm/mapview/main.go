//go:build js && wasm

// Command mapview is lensbook's interactive magnification map drawn with ebiten
// on WebGL2. It runs in its own iframe (ebiten restyles the document it lives
// in) and talks to the notebook page through package bridge. The 2-D canvas
// fallback for browsers without WebGL2 is the sibling command mapview/canvas.
package main

import (
	"errors"
	"image"
	"image/color"
	"log"
	"math"
	"time"

	"github.com/hajimehoshi/ebiten/v2"
	"github.com/hajimehoshi/ebiten/v2/inpututil"
	"github.com/hajimehoshi/ebiten/v2/vector"

	"lensbook/lens"
	"lensbook/wasm/mapview/bridge"
	"lensbook/wasm/mapview/view"
)

type game struct {
	v  *view.View
	br *bridge.Bridge

	full, coarse *ebiten.Image
	fullGen      int // generation of the map uploaded to full
	fullRows     int // rows of that map already uploaded
	coarseGen    int
	coarseRows   int
	px           []byte

	pressed bool
	lastX   int
	lastY   int
	ready   bool
	dirty   bool // the screen must be redrawn
	ov      overlay
}

// Time per frame given to the full-resolution map while the user drags; when
// idle the map gets more.
const (
	busyBudget = 8 * time.Millisecond
	idleBudget = 40 * time.Millisecond
)

func (g *game) Update() error {
	t0 := time.Now()
	defer func() { g.br.Timing("update", time.Since(t0)) }()
	// Pointer input: ebiten samples it once per tick; positions are in layout
	// units, which are device pixels (see Layout).
	x, y := ebiten.CursorPosition()
	switch {
	case inpututil.IsMouseButtonJustPressed(ebiten.MouseButtonLeft):
		g.v.PointerDown(float64(x), float64(y))
		g.pressed = true
	case g.pressed && inpututil.IsMouseButtonJustReleased(ebiten.MouseButtonLeft):
		g.v.PointerMove(float64(x), float64(y))
		g.v.PointerUp()
		g.pressed = false
	case g.pressed && (x != g.lastX || y != g.lastY):
		g.v.PointerMove(float64(x), float64(y))
	}
	g.lastX, g.lastY = x, y
	if _, wy := ebiten.Wheel(); wy != 0 {
		g.v.Wheel(float64(x), float64(y), -wy*100)
	}
	budget := idleBudget
	if g.pressed {
		budget = busyBudget
	}
	if g.br.Step(g.v, budget).Any() {
		g.dirty = true
	}
	return nil
}

// upload copies newly computed map rows to the GPU images.
func (g *game) upload() {
	full, coarse := g.v.Maps()
	g.full, g.fullGen, g.fullRows = g.sync(g.full, full, g.fullGen, g.fullRows)
	g.coarse, g.coarseGen, g.coarseRows = g.sync(g.coarse, coarse, g.coarseGen, g.coarseRows)
}

// sync uploads the rows of m not yet in img (all of them after a restart).
func (g *game) sync(img *ebiten.Image, m *view.Map, gen, rows int) (*ebiten.Image, int, int) {
	if m == nil {
		return img, gen, rows
	}
	if img == nil || img.Bounds().Dx() != m.NX || img.Bounds().Dy() != m.NY {
		if img != nil {
			img.Deallocate()
		}
		img = ebiten.NewImage(m.NX, m.NY)
		rows = 0
	}
	if m.Gen != gen {
		gen, rows = m.Gen, 0
	}
	if m.Rows > rows {
		// map rows count up from Y0 (bottom); image rows count down from the top.
		g.px = colourRows(g.px[:0], m, rows, m.Rows)
		img.SubImage(image.Rect(0, m.NY-m.Rows, m.NX, m.NY-rows)).(*ebiten.Image).WritePixels(g.px)
		rows = m.Rows
	}
	return img, gen, rows
}

// colourRows appends the RGBA bytes of map rows [j0, j1), top image row first.
func colourRows(dst []byte, m *view.Map, j0, j1 int) []byte {
	for j := j1 - 1; j >= j0; j-- {
		dst = append(dst, m.RGBA[4*j*m.NX:4*(j+1)*m.NX]...)
	}
	return dst
}

func (g *game) Draw(screen *ebiten.Image) {
	if !g.ready {
		g.ready = true
		g.br.Ready(g.v)
	}
	if !g.dirty {
		return // the screen keeps its pixels (SetScreenClearedEveryFrame(false))
	}
	t0 := time.Now()
	defer func() { g.br.Timing("draw", time.Since(t0)) }()
	g.dirty = false
	g.upload()
	full, coarse := g.v.Maps()
	// With software WebGL every full-screen pass counts: skip the background
	// and the coarse preview when the finished full map covers the screen.
	covered := full != nil && g.fullRows == full.NY && g.fullGen == full.Gen && full.NX == g.v.T.W && full.NY == g.v.T.H
	if !covered {
		screen.Fill(view.Background0)
	}
	t := g.v.T
	draw := func(img *ebiten.Image, m *view.Map, rows int, filter ebiten.Filter) {
		if img == nil || m == nil || rows == 0 {
			return
		}
		dx, dy := (m.X1-m.X0)/float64(m.NX), (m.Y1-m.Y0)/float64(m.NY)
		sub := img.SubImage(image.Rect(0, m.NY-rows, m.NX, m.NY)).(*ebiten.Image)
		var op ebiten.DrawImageOptions
		op.GeoM.Scale(dx/t.Scale, dy/t.Scale)
		top := m.Y0 + float64(rows)*dy // plane y of the sub-image's top edge
		op.GeoM.Translate((m.X0-t.CX)/t.Scale+float64(t.W)/2, (t.CY-top)/t.Scale+float64(t.H)/2)
		op.Filter = filter
		screen.DrawImage(sub, &op)
	}
	if !covered {
		draw(g.coarse, coarse, g.coarseRows, ebiten.FilterLinear)
	}
	draw(g.full, full, g.fullRows, ebiten.FilterNearest)
	g.ov.draw(screen, g.v.Scene())
}

var (
	white    = ebiten.NewImage(3, 3)
	whiteSub = white.SubImage(image.Rect(1, 1, 2, 2)).(*ebiten.Image)
)

func init() { white.Fill(color.White) }

// overlay batches the overlay primitives into as few DrawTriangles calls as
// the 16-bit indices allow: with software WebGL every anti-aliased draw call
// costs a pass over an offscreen buffer, so one call per frame instead of one
// per primitive is what keeps dragging fluid.
type overlay struct {
	path vector.Path
	vs   []ebiten.Vertex
	is   []uint16
}

func (o *overlay) draw(dst *ebiten.Image, prims []view.Prim) {
	o.vs, o.is = o.vs[:0], o.is[:0]
	for i := range prims {
		p := &prims[i]
		o.path = vector.Path{}
		switch p.Kind {
		case view.Polyline, view.Polygon:
			for i, q := range p.Pts {
				if i == 0 {
					o.path.MoveTo(q.X, q.Y)
				} else {
					o.path.LineTo(q.X, q.Y)
				}
			}
		case view.Disk, view.Ring:
			o.path.Arc(p.Pts[0].X, p.Pts[0].Y, p.R, 0, 2*math.Pi, vector.Clockwise)
		}
		n0 := len(o.vs)
		var vs []ebiten.Vertex
		var is []uint16
		switch p.Kind {
		case view.Polygon, view.Disk:
			o.path.Close()
			vs, is = o.path.AppendVerticesAndIndicesForFilling(o.vs[n0:], nil)
		default:
			if p.Kind == view.Ring {
				o.path.Close()
			}
			vs, is = o.path.AppendVerticesAndIndicesForStroke(o.vs[n0:], nil, &vector.StrokeOptions{Width: p.Width, LineJoin: vector.LineJoinRound})
		}
		if n0+len(vs) > math.MaxUint16 { // flush and start a new batch
			o.flush(dst)
			n0 = 0
			o.vs = append(o.vs[:0], vs...)
		} else {
			o.vs = append(o.vs[:n0], vs...)
		}
		r, g, b, a := p.Col.RGBA()
		for k := n0; k < len(o.vs); k++ {
			v := &o.vs[k]
			v.SrcX, v.SrcY = 1, 1
			v.ColorR, v.ColorG, v.ColorB, v.ColorA = float32(r)/0xffff, float32(g)/0xffff, float32(b)/0xffff, float32(a)/0xffff
		}
		for _, ix := range is {
			o.is = append(o.is, ix+uint16(n0))
		}
	}
	o.flush(dst)
}

func (o *overlay) flush(dst *ebiten.Image) {
	if len(o.is) == 0 {
		return
	}
	dst.DrawTriangles(o.vs, o.is, whiteSub, &ebiten.DrawTrianglesOptions{AntiAlias: true, ColorScaleMode: ebiten.ColorScaleModePremultipliedAlpha})
	o.vs, o.is = o.vs[:0], o.is[:0]
}

// Layout follows ebiten's high-DPI example: the screen has one pixel per
// device pixel so lines stay crisp.
func (g *game) Layout(w, h int) (int, int) {
	s := ebiten.Monitor().DeviceScaleFactor()
	pw, ph := int(math.Ceil(float64(w)*s)), int(math.Ceil(float64(h)*s))
	if pw != g.v.T.W || ph != g.v.T.H || s != g.v.DPR {
		g.v.SetSize(pw, ph, s)
		g.dirty = true
	}
	return pw, ph
}

func main() {
	// A placeholder model until the host's init message arrives.
	m := lens.Model{Params: lens.Params{T0: 0, U0: 0.1, TE: 20, S: 1, Q: 0.1, Alpha: 0.5}}
	g := &game{v: view.New(m, 512, 512, 1)}
	g.br = bridge.New("webgl", nil)
	g.br.Attach(g.v)
	ebiten.SetTPS(ebiten.SyncWithFPS)
	ebiten.SetScreenClearedEveryFrame(false)
	ebiten.SetWindowTitle("lensbook magnification map")
	if err := ebiten.RunGame(g); err != nil {
		if !errors.Is(err, ebiten.Termination) {
			log.Print("mapview: ", err)
			g.br.Error(err)
		}
	}
	select {}
}
