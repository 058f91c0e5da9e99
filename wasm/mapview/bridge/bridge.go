//go:build js && wasm

// Package bridge is the JavaScript side shared by the two map-view programs
// (ebiten on WebGL2, and the 2-D canvas fallback): it receives the host page's
// messages, queues them as commands for the frame loop, posts the model state
// back, and exposes input functions and timings on the frame's window as the
// namespace object lensMapView. It only translates; all state lives in package
// view.
//
// Protocol (version 1), host → frame with postMessage:
//
//	{type:"init", v:1, model, data:[{name, t, flux, err: Float64Array, masked, errScale, errFloor, ld, zeroPoint}], tmin, tmax, coords}
//	{type:"model", model, coords}   replace the model (e.g. after a fit)
//	{type:"lens", s, q, rho}        slider values
//	{type:"cursor", t}              time under the cursor in the light curve (full JD; null = none)
//	{type:"data", data, tmin, tmax} new data
//	{type:"fit"}                    fit the view to the caustics and trajectory
//
// frame → host (window.parent.postMessage):
//
//	{type:"ready", v:1, mode:"webgl"|"canvas", ramp:[r,g,b,…]×256, lo, hi, ticks}
//	{type:"state", v:1, model, chi2, error, t, a, y: Float64Array, fits, stats}
//	                                t: plot times (full JD), a: magnification, y: magnitude on the
//	                                first dataset's scale (its fs, fb, zero point), fits: per dataset χ², fs, fb
//	{type:"error", v:1, message}
//
// model = {t0, u0, tE, rho, s, q, alpha (radians), piEN, piEE, dsdt, dalphadt, ld, ref, tref (t0,par, full JD; 0 = t0)}.
// coords = {ra_deg, dec_deg} (ICRS) or null; optional (absent keeps the last): with it, parallax
// enters the curve and χ² and the drawn trajectory bends (fields added within version 1).
package bridge

import (
	"encoding/binary"
	"fmt"
	"math"
	"sync"
	"syscall/js"
	"time"

	"lensbook/fit"
	"lensbook/lens"
	"lensbook/wasm/mapview/view"
)

// Version of the message protocol.
const Version = 1

// Bridge connects a view.View to the page.
type Bridge struct {
	Mode string // "webgl" or "canvas"

	mu   sync.Mutex
	cmds []func(*view.View)

	data   *view.Data
	parent js.Value
	buf    []byte
	posted int

	frames []float64 // time (performance.timeOrigin + now(), ms) of frames whose Step recomputed the model
	grips  map[string]any
	mags   []float64
	timing map[string][]float64
	stats  view.Stats
	done   bool
	perf   js.Value
	funcs  []js.Func
}

// New registers the message listener and the lensMapView namespace.
// extra functions (mode-specific input and drawing) are added to the namespace.
func New(mode string, extra map[string]func(args []js.Value) any) *Bridge {
	b := &Bridge{Mode: mode, parent: js.Global().Get("parent"), perf: js.Global().Get("performance")}
	b.data = &view.Data{}
	fn := func(f func(args []js.Value) any) js.Func {
		jf := js.FuncOf(func(_ js.Value, a []js.Value) any { return f(a) })
		b.funcs = append(b.funcs, jf)
		return jf
	}
	js.Global().Call("addEventListener", "message", fn(func(a []js.Value) any {
		b.onMessage(a[0])
		return nil
	}))
	ns := js.Global().Get("Object").New()
	ns.Set("key", fn(func(a []js.Value) any {
		k, ok := keyOf(a[0].String())
		if ok {
			shift := len(a) > 1 && a[1].Truthy()
			b.Do(func(v *view.View) { v.Key(k, shift) })
		}
		return ok
	}))
	ns.Set("stats", fn(func(a []js.Value) any { return b.statsJS() }))
	ns.Set("resetFrames", fn(func(a []js.Value) any {
		b.mu.Lock()
		b.frames = b.frames[:0]
		b.mu.Unlock()
		return nil
	}))
	for name, f := range extra {
		ns.Set(name, fn(f))
	}
	js.Global().Set("lensMapView", ns)
	return b
}

func keyOf(s string) (view.Key, bool) {
	switch s {
	case "ArrowLeft":
		return view.KeyLeft, true
	case "ArrowRight":
		return view.KeyRight, true
	case "ArrowUp":
		return view.KeyUp, true
	case "ArrowDown":
		return view.KeyDown, true
	}
	return 0, false
}

// Do queues a command for the frame loop (safe from JS callbacks).
func (b *Bridge) Do(f func(*view.View)) {
	b.mu.Lock()
	b.cmds = append(b.cmds, f)
	b.mu.Unlock()
}

// Drain runs the queued commands on v; call it at the start of each frame.
func (b *Bridge) Drain(v *view.View) {
	b.mu.Lock()
	cmds := b.cmds
	b.cmds = nil
	b.mu.Unlock()
	for _, f := range cmds {
		f(v)
	}
}

// Attach makes v compute χ² against the bridge's data.
func (b *Bridge) Attach(v *view.View) {
	v.Chi2Func = b.data.Chi2
}

// Step drains commands, runs v.Step and posts the state when the model
// changed. It returns what changed.
func (b *Bridge) Step(v *view.View, budget time.Duration) view.Changed {
	b.Drain(v)
	ch := v.Step(budget)
	line, handle, ok := v.Grips()
	b.mu.Lock()
	b.grips = map[string]any{"line": []any{line[0], line[1]}, "handle": []any{handle[0], handle[1]}, "visible": ok, "dpr": v.DPR,
		"u0": v.Model.U0, "t0": v.Model.T0, "alpha": v.Model.Alpha, "scale": v.T.Scale}
	b.stats, b.done = v.Stats, v.MapDone()
	b.mu.Unlock()
	if ch.Model {
		b.mu.Lock()
		// wall-clock ms (timeOrigin + now), comparable with the host page's clock
		b.frames = append(b.frames, b.perf.Get("timeOrigin").Float()+b.perf.Call("now").Float())
		if len(b.frames) > 4096 {
			b.frames = append(b.frames[:0], b.frames[2048:]...)
		}
		b.mu.Unlock()
		b.PostState(v)
	}
	return ch
}

// Timing records the duration of one piece of frame work under name (for the
// tests: lensMapView.stats().timing[name] holds the last 256 in ms).
func (b *Bridge) Timing(name string, d time.Duration) {
	b.mu.Lock()
	defer b.mu.Unlock()
	if b.timing == nil {
		b.timing = map[string][]float64{}
	}
	ts := append(b.timing[name], float64(d.Microseconds())/1000)
	if len(ts) > 256 {
		ts = ts[len(ts)-256:]
	}
	b.timing[name] = ts
}

// Post sends a message to the host page.
func (b *Bridge) Post(m map[string]any) {
	m["v"] = Version
	b.parent.Call("postMessage", js.ValueOf(m), "*")
}

// Ready announces the frame with its colour scale.
func (b *Bridge) Ready(v *view.View) {
	ramp := make([]any, 0, 3*len(view.Ramp))
	for _, c := range view.Ramp {
		ramp = append(ramp, int(c.R), int(c.G), int(c.B))
	}
	var ticks []any
	for _, t := range v.Scale.Ticks() {
		ticks = append(ticks, t)
	}
	b.Post(map[string]any{"type": "ready", "mode": b.Mode, "ramp": ramp, "lo": v.Scale.Lo, "hi": v.Scale.Hi, "ticks": ticks})
}

// Error reports a fatal problem to the host.
func (b *Bridge) Error(err error) {
	b.Post(map[string]any{"type": "error", "message": err.Error()})
}

// PostState sends the model, χ² and light curve to the host.
func (b *Bridge) PostState(v *view.View) {
	b.posted++
	msg := map[string]any{
		"type":  "state",
		"model": modelJS(&v.Model),
		"chi2":  nanNull(v.Chi2),
		"ndata": b.data.N(),
		"t":     b.f64(v.TGrid),
		"a":     b.f64(v.AGrid),
		"seq":   b.posted,
		"stats": statsMap(v.Stats),
	}
	if v.Err != nil {
		msg["error"] = v.Err.Error()
	}
	if !math.IsNaN(v.Chi2) {
		b.mags = b.data.Mags(b.mags, v.AGrid)
		msg["y"] = b.f64(b.mags)
		var fits []any
		for _, f := range b.data.Fits() {
			fits = append(fits, map[string]any{"name": f.Name, "chi2": f.Chi2, "fs": f.Fs, "fb": f.Fb, "n": f.N})
		}
		msg["fits"] = fits
	}
	b.Post(msg)
}

func nanNull(x float64) any {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return nil
	}
	return x
}

func statsMap(s view.Stats) map[string]any {
	return map[string]any{
		"curveMs": s.CurveMs, "coarseMs": s.CoarseMs, "fullMs": s.FullMs, "fullWallMs": s.FullWallMs,
		"fullN": s.FullN, "coarseNX": s.CoarseNX, "coarseNY": s.CoarseNY, "fullNX": s.FullNX, "fullNY": s.FullNY,
	}
}

func (b *Bridge) statsJS() any {
	b.mu.Lock()
	fr := make([]any, len(b.frames))
	for i, f := range b.frames {
		fr[i] = f
	}
	b.mu.Unlock()
	tm := map[string]any{}
	for k, ts := range b.timing {
		a := make([]any, len(ts))
		for i, x := range ts {
			a[i] = x
		}
		tm[k] = a
	}
	return js.ValueOf(map[string]any{"mode": b.Mode, "modelFrames": fr, "posted": b.posted, "grips": b.grips,
		"map": statsMap(b.stats), "mapDone": b.done, "timing": tm})
}

// f64 copies xs into a new Float64Array through one reused byte buffer.
func (b *Bridge) f64(xs []float64) js.Value {
	n := 8 * len(xs)
	if cap(b.buf) < n {
		b.buf = make([]byte, n)
	}
	buf := b.buf[:n]
	for i, x := range xs {
		binary.LittleEndian.PutUint64(buf[8*i:], math.Float64bits(x))
	}
	u8 := js.Global().Get("Uint8Array").New(n)
	js.CopyBytesToJS(u8, buf)
	return js.Global().Get("Float64Array").New(u8.Get("buffer"))
}

// floats reads a Float64Array (or a plain array of numbers) into a new slice.
func (b *Bridge) floats(v js.Value) []float64 {
	if v.IsUndefined() || v.IsNull() {
		return nil
	}
	if v.InstanceOf(js.Global().Get("Float64Array")) {
		n := v.Get("length").Int()
		if cap(b.buf) < 8*n {
			b.buf = make([]byte, 8*n)
		}
		buf := b.buf[:8*n]
		js.CopyBytesToGo(buf, js.Global().Get("Uint8Array").New(v.Get("buffer"), v.Get("byteOffset"), 8*n))
		out := make([]float64, n)
		for i := range out {
			out[i] = math.Float64frombits(binary.LittleEndian.Uint64(buf[8*i:]))
		}
		return out
	}
	n := v.Get("length").Int()
	out := make([]float64, n)
	for i := range out {
		out[i] = v.Index(i).Float()
	}
	return out
}

func num(v js.Value, name string, def float64) float64 {
	x := v.Get(name)
	if x.Type() != js.TypeNumber {
		return def
	}
	return x.Float()
}

// modelOf reads a model message field.
func modelOf(v js.Value) lens.Model {
	m := lens.Model{Params: lens.Params{
		T0: num(v, "t0", 0), U0: num(v, "u0", 0), TE: num(v, "tE", 0), Rho: num(v, "rho", 0),
		S: num(v, "s", 0), Q: num(v, "q", 0), Alpha: num(v, "alpha", 0),
		PiEN: num(v, "piEN", 0), PiEE: num(v, "piEE", 0), DsDt: num(v, "dsdt", 0), DAlphaDt: num(v, "dalphadt", 0),
	}, LD: num(v, "ld", 0), TRef: num(v, "tref", 0)}
	if r := v.Get("ref"); r.Type() == js.TypeString && r.String() == lens.CentralCaustic.String() {
		m.Ref = lens.CentralCaustic
	}
	return m
}

// coordsOf reads the optional "coords" field of a message: {"ra_deg": …,
// "dec_deg": …} in ICRS degrees, or null for an event without a position.
func coordsOf(d js.Value) (*fit.Coords, error) {
	c := d.Get("coords")
	if c.IsUndefined() || c.IsNull() {
		return nil, nil
	}
	ra, dec := num(c, "ra_deg", math.NaN()), num(c, "dec_deg", math.NaN())
	if !(ra >= 0 && ra < 360) || !(dec >= -90 && dec <= 90) {
		return nil, fmt.Errorf("mapview: event coordinates RA %v°, Dec %v° out of range (RA in [0, 360), Dec in [−90, 90])", ra, dec)
	}
	return &fit.Coords{RA: ra, Dec: dec}, nil
}

func modelJS(m *lens.Model) map[string]any {
	return map[string]any{
		"t0": m.T0, "u0": m.U0, "tE": m.TE, "rho": m.Rho, "s": m.S, "q": m.Q, "alpha": m.Alpha,
		"piEN": m.PiEN, "piEE": m.PiEE, "dsdt": m.DsDt, "dalphadt": m.DAlphaDt, "ld": m.LD, "ref": m.Ref.String(),
		"tref": m.TRef,
	}
}

func (b *Bridge) onMessage(ev js.Value) {
	d := ev.Get("data")
	if d.Type() != js.TypeObject || d.Get("type").Type() != js.TypeString {
		return
	}
	switch d.Get("type").String() {
	case "init", "model":
		m := modelOf(d.Get("model"))
		if err := m.Validate(); err != nil {
			b.Error(err)
			return
		}
		if d.Get("type").String() == "init" {
			b.setData(d)
		}
		coords, cerr := coordsOf(d)
		if cerr != nil {
			b.Error(cerr)
			return
		}
		b.Do(func(v *view.View) {
			if !d.Get("coords").IsUndefined() {
				v.Coords, b.data.Coords = coords, coords
			}
			v.SetModel(m)
			b.applyRange(v, d)
			v.DataChanged()
		})
	case "data":
		b.setData(d)
		b.Do(func(v *view.View) { b.applyRange(v, d); v.DataChanged() })
	case "lens":
		s, q, rho := num(d, "s", math.NaN()), num(d, "q", math.NaN()), num(d, "rho", math.NaN())
		b.Do(func(v *view.View) {
			if err := v.SetLens(s, q, rho); err != nil {
				b.Post(map[string]any{"type": "invalid", "message": err.Error()})
			}
		})
	case "cursor":
		t := num(d, "t", math.NaN())
		b.Do(func(v *view.View) { v.SetCursorTime(t) })
	case "fit":
		b.Do(func(v *view.View) { v.Fit() })
	}
}

func (b *Bridge) applyRange(v *view.View, d js.Value) {
	lo, hi := num(d, "tmin", 0), num(d, "tmax", 0)
	if lo == 0 && hi == 0 && b.data.N() > 0 {
		lo, hi = b.data.Range()
	}
	if hi > lo {
		v.TMin, v.TMax = lo, hi
	}
}

func (b *Bridge) setData(d js.Value) {
	arr := d.Get("data")
	if arr.Type() != js.TypeObject {
		return
	}
	var sets []view.Series
	for i := range arr.Length() {
		e := arr.Index(i)
		s := view.Series{Name: e.Get("name").String(), T: b.floats(e.Get("t")), Flux: b.floats(e.Get("flux")), Err: b.floats(e.Get("err")),
			ErrScale: num(e, "errScale", 0), ErrFloor: num(e, "errFloor", 0), LD: num(e, "ld", 0), ZeroPoint: num(e, "zeroPoint", 0)}
		if mk := e.Get("masked"); mk.Type() == js.TypeObject {
			s.Masked = make([]bool, mk.Length())
			for j := range s.Masked {
				s.Masked[j] = mk.Index(j).Truthy()
			}
		}
		sets = append(sets, s)
	}
	if err := b.data.Set(sets); err != nil {
		b.Error(err)
	}
}
