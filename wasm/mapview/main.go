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
}

// Time per frame given to the full-resolution map while the user drags; when
// idle the map gets more.
const (
	busyBudget = 8 * time.Millisecond
	idleBudget = 40 * time.Millisecond
)

func (g *game) Update() error {
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
	g.br.Step(g.v, budget)
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
	g.upload()
	screen.Fill(view.Background0)
	full, coarse := g.v.Maps()
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
	draw(g.coarse, coarse, g.coarseRows, ebiten.FilterLinear)
	draw(g.full, full, g.fullRows, ebiten.FilterNearest)
	for _, p := range g.v.Scene() {
		drawPrim(screen, &p)
	}
}

var (
	path     vector.Path
	vs       []ebiten.Vertex
	is       []uint16
	white    = ebiten.NewImage(3, 3)
	whiteSub = white.SubImage(image.Rect(1, 1, 2, 2)).(*ebiten.Image)
)

func init() { white.Fill(color.White) }

// drawPrim draws one overlay primitive. Paths become triangles with vector's
// tessellation, drawn from a white texel scaled by the colour (the approach of
// ebiten's own vector helpers).
func drawPrim(dst *ebiten.Image, p *view.Prim) {
	var c color.Color = p.Col
	switch p.Kind {
	case view.Polyline, view.Polygon:
		path = vector.Path{}
		for i, q := range p.Pts {
			if i == 0 {
				path.MoveTo(q.X, q.Y)
			} else {
				path.LineTo(q.X, q.Y)
			}
		}
		op := &ebiten.DrawTrianglesOptions{AntiAlias: true, ColorScaleMode: ebiten.ColorScaleModePremultipliedAlpha}
		if p.Kind == view.Polygon {
			path.Close()
			vs, is = path.AppendVerticesAndIndicesForFilling(vs[:0], is[:0])
			op.FillRule = ebiten.FillRuleNonZero
		} else {
			vs, is = path.AppendVerticesAndIndicesForStroke(vs[:0], is[:0], &vector.StrokeOptions{Width: p.Width, LineJoin: vector.LineJoinRound})
		}
		r, g, b, a := c.RGBA()
		for i := range vs {
			vs[i].SrcX, vs[i].SrcY = 1, 1
			vs[i].ColorR, vs[i].ColorG, vs[i].ColorB, vs[i].ColorA = float32(r)/0xffff, float32(g)/0xffff, float32(b)/0xffff, float32(a)/0xffff
		}
		dst.DrawTriangles(vs, is, whiteSub, op)
	case view.Disk:
		vector.DrawFilledCircle(dst, p.Pts[0].X, p.Pts[0].Y, p.R, c, true)
	case view.Ring:
		vector.StrokeCircle(dst, p.Pts[0].X, p.Pts[0].Y, p.R, p.Width, c, true)
	}
}

// Layout follows ebiten's high-DPI example: the screen has one pixel per
// device pixel so lines stay crisp.
func (g *game) Layout(w, h int) (int, int) {
	s := ebiten.Monitor().DeviceScaleFactor()
	pw, ph := int(math.Ceil(float64(w)*s)), int(math.Ceil(float64(h)*s))
	g.v.SetSize(pw, ph, s)
	return pw, ph
}

func main() {
	// A placeholder model until the host's init message arrives.
	m := lens.Model{Params: lens.Params{T0: 0, U0: 0.1, TE: 20, S: 1, Q: 0.1, Alpha: 0.5}}
	g := &game{v: view.New(m, 512, 512, 1)}
	g.br = bridge.New("webgl", nil)
	g.br.Attach(g.v)
	ebiten.SetTPS(ebiten.SyncWithFPS)
	ebiten.SetScreenClearedEveryFrame(true)
	ebiten.SetWindowTitle("lensbook magnification map")
	if err := ebiten.RunGame(g); err != nil {
		if !errors.Is(err, ebiten.Termination) {
			log.Print("mapview: ", err)
			g.br.Error(err)
		}
	}
	select {}
}
