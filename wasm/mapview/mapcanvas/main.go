//go:build js && wasm

// Command canvas is the map view for browsers without WebGL2: the same view
// state as the ebiten program, drawn by Go into an RGBA buffer that the frame
// page puts on a plain 2-D canvas with putImageData. The page forwards pointer,
// wheel and key events through the lensMapView namespace (see package bridge),
// so the interactions are the same as in the WebGL2 view.
package main

import (
	"syscall/js"
	"time"

	"lensbook/lens"
	"lensbook/wasm/mapview/bridge"
	"lensbook/wasm/mapview/view"
)

// Time per frame given to the full-resolution map while the user drags; when idle the map gets more.
const (
	busyBudget = 8 * time.Millisecond
	idleBudget = 40 * time.Millisecond
)

func main() {
	m := lens.Model{Params: lens.Params{T0: 0, U0: 0.1, TE: 20, S: 1, Q: 0.1, Alpha: 0.5}}
	v := view.New(m, 512, 512, 1)
	var (
		f       view.Frame
		pixels  js.Value // Uint8ClampedArray handed to ImageData
		bytes   js.Value // Uint8Array over the same buffer (CopyBytesToJS needs one)
		pressed bool
		dirty   = true
		br      *bridge.Bridge
	)
	pos := func(a []js.Value) (float64, float64) { return a[0].Float(), a[1].Float() }
	br = bridge.New("canvas", map[string]func([]js.Value) any{
		// resize(w, h, dpr): canvas size in device pixels.
		"resize": func(a []js.Value) any {
			w, h, dpr := a[0].Int(), a[1].Int(), a[2].Float()
			br.Do(func(v *view.View) { v.SetSize(w, h, dpr); dirty = true })
			return nil
		},
		"pointerDown": func(a []js.Value) any {
			x, y := pos(a)
			br.Do(func(v *view.View) { v.PointerDown(x, y); pressed = true })
			return nil
		},
		"pointerMove": func(a []js.Value) any {
			x, y := pos(a)
			br.Do(func(v *view.View) { v.PointerMove(x, y) })
			return nil
		},
		"pointerUp": func(a []js.Value) any {
			x, y := pos(a)
			br.Do(func(v *view.View) { v.PointerMove(x, y); v.PointerUp(); pressed = false })
			return nil
		},
		"wheel": func(a []js.Value) any {
			x, y := pos(a)
			dy := a[2].Float()
			br.Do(func(v *view.View) { v.Wheel(x, y, dy) })
			return nil
		},
		// frame() runs one frame of work and returns the pixels to draw
		// (a Uint8ClampedArray of 4·w·h bytes) or null when nothing changed.
		"frame": func(a []js.Value) any {
			t0 := time.Now()
			defer func() { br.Timing("frame", time.Since(t0)) }()
			budget := idleBudget
			if pressed {
				budget = busyBudget
			}
			ch := br.Step(v, budget)
			if !ch.Any() && !dirty {
				return nil
			}
			dirty = false
			v.Paint(&f)
			if pixels.IsUndefined() || pixels.Length() != len(f.Pix) {
				pixels = js.Global().Get("Uint8ClampedArray").New(len(f.Pix))
				bytes = js.Global().Get("Uint8Array").New(pixels.Get("buffer"))
			}
			js.CopyBytesToJS(bytes, f.Pix)
			return js.ValueOf(map[string]any{"w": f.W, "h": f.H, "pixels": pixels})
		},
	})
	br.Attach(v)
	br.Ready(v)
	select {}
}
