package lens

import (
	"math"
	"math/cmplx"
	"sync"
	"sync/atomic"
)

// causticCache keeps the sampled caustics of the last few lenses (a light
// curve or a fit revisits the same lens thousands of times; building one map
// costs ~1 ms). A built map is never modified, so it is shared read-only.
var causticCache struct {
	sync.Mutex
	maps [8]*causticMap
	next int
}

// causticBuilds counts the maps built (benchmarks report it).
var causticBuilds atomic.Int64

// causticFor returns sampled caustics for b, building them when no cached map
// will do. A map built for the same q and a nearby separation s′ serves when
// its caustics lie within shift of those of b: every caustic point moves at
// most rate·|s − s′| (causticMap.rate), and distance subtracts that bound, so
// the method switch stays on the safe side. With orbital motion (s changing
// linearly in time) every epoch has its own s; without this a light curve
// rebuilt the map (~1 ms) at every point.
func causticFor(b Binary, shift float64) *causticMap {
	causticCache.Lock()
	var best *causticMap
	bestShift := math.Inf(1)
	for _, m := range causticCache.maps {
		if m == nil || m.b.Q != b.Q {
			continue
		}
		if d := m.shift(b); d <= shift && d < bestShift {
			best, bestShift = m, d
		}
	}
	causticCache.Unlock()
	if best != nil {
		return best
	}
	m := new(causticMap)
	m.build(b)
	causticBuilds.Add(1)
	causticCache.Lock()
	causticCache.maps[causticCache.next] = m
	causticCache.next = (causticCache.next + 1) % len(causticCache.maps)
	causticCache.Unlock()
	return m
}

// causticMap is a sampled copy of the caustics of one binary, used by the
// method switch for the distance from a source to the nearest caustic. The
// distance decides whether a Taylor expansion of the point-source
// magnification over the disk is meaningful at all: from outside a fold the
// point-source map is smooth up to the caustic, so no local quantity at the
// source centre reveals a caustic just inside the disk.
//
// The critical curves are the solutions of Σ mi/(z−zi)² = e^{iφ} (|det J| = 0,
// references.md §3 [W90]): for each φ a quartic, solved warm-started from the
// previous φ; the caustic is their image under the lens equation.
type causticMap struct {
	b      Binary
	ok     bool
	tracks [4]causticTrack
	// rate bounds |∂ζ/∂s| over the caustic points, with a factor 2 for the
	// change of the rate itself over the separations one map serves.
	rate float64
}

// shift bounds how far the caustics of b lie from those of the map (b must
// have the map's q).
func (c *causticMap) shift(b Binary) float64 {
	if b.S == c.b.S {
		return 0
	}
	return c.rate * math.Abs(b.S-c.b.S)
}

// closing returns the segment that closes track k across φ = 2π: its last
// point and the nearest first point of any track (the quartic's roots come
// back permuted there).
func (c *causticMap) closing(k int) (a, b complex128) {
	a = c.tracks[k].pts[causticSamples-1]
	best := math.Inf(1)
	for j := range c.tracks {
		if d := fsAbs2(c.tracks[j].pts[0] - a); d < best {
			best, b = d, c.tracks[j].pts[0]
		}
	}
	return a, b
}

// crossings appends to dst the angles θ ∈ [th0, th0 + 2π) at which the circle
// zc + r·e^{iθ} crosses the sampled caustic (the polyline through the
// samples), in increasing order. The contour integration seeds its samples
// with them so that no interval of θ holds two crossings: two crossings
// between neighbouring samples leave the image count the same at both ends,
// and the pair of images created and destroyed in between would be missed
// whatever the error estimate says. Crossings closer to tangency than the
// polyline's sagitta (its distance from the true curve) can be missed or
// invented; the area such a graze adds is of the order of the sagitta times
// the local magnification.
func (c *causticMap) crossings(dst []float64, zc complex128, r, th0 float64) []float64 {
	n0 := len(dst)
	x, y := real(zc), imag(zc)
	seg := func(p, q complex128) {
		d := q - p
		f := p - zc
		a := fsAbs2(d)
		if a == 0 {
			return
		}
		b := real(f)*real(d) + imag(f)*imag(d) // half the linear coefficient
		cc := fsAbs2(f) - r*r
		disc := b*b - a*cc
		if disc < 0 {
			return
		}
		sq := math.Sqrt(disc)
		for _, t := range [2]float64{(-b - sq) / a, (-b + sq) / a} {
			if t < 0 || t >= 1 {
				continue
			}
			w := f + d*complex(t, 0)
			th := math.Atan2(imag(w), real(w))
			for th < th0 {
				th += 2 * math.Pi
			}
			for th >= th0+2*math.Pi {
				th -= 2 * math.Pi
			}
			dst = append(dst, th)
		}
	}
	for k := range c.tracks {
		t := &c.tracks[k]
		if !boxMeetsCircle(&t.box, x, y, r) {
			continue
		}
		for g := range t.groups {
			if !boxMeetsCircle(&t.groups[g], x, y, r) {
				continue
			}
			for j := g * groupLen; j < (g+1)*groupLen; j++ {
				if !boxMeetsCircle(&t.chunks[j], x, y, r) {
					continue
				}
				for i := j * chunkLen; i < (j+1)*chunkLen && i < causticSamples-1; i++ {
					seg(t.pts[i], t.pts[i+1])
				}
			}
		}
	}
	for k := range c.tracks {
		p, q := c.closing(k)
		seg(p, q)
	}
	out := dst[n0:]
	for i := 1; i < len(out); i++ {
		for j := i; j > 0 && out[j] < out[j-1]; j-- {
			out[j], out[j-1] = out[j-1], out[j]
		}
	}
	return dst
}

// boxMeetsCircle reports whether the circle of radius r about (x, y) can pass
// through the box of ch: the box reaches within r of the centre and not all of
// it lies inside the circle.
func boxMeetsCircle(ch *causticChunk, x, y, r float64) bool {
	if boxFar(ch, x, y, r) {
		return false
	}
	dx := math.Max(math.Abs(ch.x0-x), math.Abs(ch.x1-x))
	dy := math.Max(math.Abs(ch.y0-y), math.Abs(ch.y1-y))
	return dx*dx+dy*dy >= r*r
}

type causticTrack struct {
	box    causticChunk // bounding box and largest sagitta of the whole track
	pts    [causticSamples]complex128
	chunks [causticSamples / chunkLen]causticChunk
	// groups are the boxes of groupLen consecutive chunks: a source next
	// to one caustic skips most of the track with a few box tests instead
	// of one per chunk (distance was 5.7 µs per call before).
	groups [causticSamples / chunkLen / groupLen]causticChunk
}

const groupLen = 8

// merge grows the box a to hold b.
func (a *causticChunk) merge(b *causticChunk) {
	a.x0, a.x1 = math.Min(a.x0, b.x0), math.Max(a.x1, b.x1)
	a.y0, a.y1 = math.Min(a.y0, b.y0), math.Max(a.y1, b.y1)
	a.sag = math.Max(a.sag, b.sag)
}

// emptyBox is the box that merge grows from.
var emptyBox = causticChunk{x0: math.Inf(1), y0: math.Inf(1), x1: math.Inf(-1), y1: math.Inf(-1)}

// causticChunk is a run of chunkLen segments with its bounding box and the
// largest deviation of the curve from its chords there (the second difference
// |p(i−1) − 2p(i) + p(i+1)|/4 bounds the sagitta), which is subtracted from the
// distance so that the polyline never makes a caustic look farther than it is.
type causticChunk struct {
	x0, y0, x1, y1 float64
	sag            float64
}

const chunkLen = 16

// causticSamples per root track: segments between samples are then shorter
// than ~1% of the caustic for the lenses of the tests; the distance is to the
// polyline, whose deviation from the curve is second order in that.
const causticSamples = 2048

// criticalQuartic returns the four roots z of m1(z−z2)² + m2(z−z1)² =
// e(z−z1)²(z−z2)², refining from start.
func (l *fsLens) criticalQuartic(e complex128, start *[5]complex128, cold bool) {
	z1, z2 := complex(l.z1, 0), complex(l.z2, 0)
	p1 := [3]complex128{z1 * z1, -2 * z1, 1}
	p2 := [3]complex128{z2 * z2, -2 * z2, 1}
	var c [6]complex128
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			c[a+b] += e * p1[a] * p2[b]
		}
	}
	for a := 0; a < 3; a++ {
		c[a] -= complex(l.m1, 0)*p2[a] + complex(l.m2, 0)*p1[a]
	}
	if cold {
		for k := 0; k < 4; k++ {
			start[k] = cmplx.Rect(1.5+float64(k)*0.1, 0.4+1.3*float64(k)) + complex(l.z2, 0)
		}
	}
	aberth(&c, 4, start, 500)
}

func (c *causticMap) build(b Binary) {
	l := newFSLens(b)
	var z [5]complex128
	rate := 0.0
	// The lenses move with s: z1 = −m2·s, z2 = m1·s.
	dz1, dz2 := complex(-l.m2, 0), complex(l.m1, 0)
	m1, m2 := complex(l.m1, 0), complex(l.m2, 0)
	for i := 0; i < causticSamples; i++ {
		l.criticalQuartic(cmplx.Rect(1, 2*math.Pi*float64(i)/causticSamples), &z, i == 0)
		for k := 0; k < 4; k++ {
			f, _ := l.lensEq(z[k], 0)
			c.tracks[k].pts[i] = f // ζ(z) − 0
			// ∂ζ/∂s of the caustic point for this φ (derived here): the
			// critical point obeys F = Σ mi/(z−zi)² − e^{iφ} = 0, so
			// dz/ds = −F_s/F_z with F_z = −2Σ mi/(z−zi)³ and
			// F_s = 2Σ mi ż_i/(z−zi)³; then ζ = z − Σ mi/(z̄−z̄i) gives
			// dζ/ds = ż + Σ mi(ż̄ − ż_i)/(z̄−z̄i)².
			h1, h2 := fsInv(z[k]-complex(l.z1, 0)), fsInv(z[k]-complex(l.z2, 0))
			h13, h23 := m1*h1*h1*h1, m2*h2*h2*h2
			fz := -2 * (h13 + h23)
			if fz == 0 {
				continue
			}
			dz := cdiv(2*(h13*dz1+h23*dz2), fz)
			cdz := fsConj(dz)
			ch1, ch2 := fsConj(h1), fsConj(h2)
			dzeta := dz + m1*(cdz-dz1)*ch1*ch1 + m2*(cdz-dz2)*ch2*ch2
			if r := fsAbs(dzeta); r > rate {
				rate = r
			}
		}
	}
	c.rate = 2 * rate
	const n = causticSamples
	for k := range c.tracks {
		t := &c.tracks[k]
		defer func() {
			t.box = emptyBox
			for g := range t.groups {
				t.groups[g] = emptyBox
				for j := g * groupLen; j < (g+1)*groupLen; j++ {
					t.groups[g].merge(&t.chunks[j])
				}
				t.box.merge(&t.groups[g])
			}
		}()
		for j := range t.chunks {
			ch := &t.chunks[j]
			ch.x0, ch.y0, ch.x1, ch.y1 = math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)
			ch.sag = 0
			// The track is not continued across φ = 2π (the quartic's roots
			// come back permuted), so indices stay inside [0, n).
			for i := j * chunkLen; i <= (j+1)*chunkLen && i < n; i++ {
				p := t.pts[i]
				ch.x0, ch.x1 = math.Min(ch.x0, real(p)), math.Max(ch.x1, real(p))
				ch.y0, ch.y1 = math.Min(ch.y0, imag(p)), math.Max(ch.y1, imag(p))
				if i > 0 && i < n-1 {
					d2 := t.pts[i-1] - 2*p + t.pts[i+1]
					ch.sag = math.Max(ch.sag, fsAbs(d2)/4)
				}
			}
		}
	}
	c.b, c.ok = b, true
}

// distance returns the distance from zeta to the sampled caustic of b, or a
// value > cutoff when it exceeds cutoff. For a map built at another s (see
// causticFor) it is less the bound on the caustics' shift: never more than
// the true distance.
func (c *causticMap) distance(b Binary, zeta complex128, cutoff float64) float64 {
	if !c.ok || c.b.Q != b.Q {
		c.build(b)
	}
	shift := c.shift(b)
	cutoff += shift
	x, y := real(zeta), imag(zeta)
	best := math.Inf(1)
	for k := range c.tracks {
		t := &c.tracks[k]
		if boxFar(&t.box, x, y, math.Min(cutoff, best)+t.box.sag) {
			continue
		}
		for g := range t.groups {
			if boxFar(&t.groups[g], x, y, math.Min(cutoff, best)+t.groups[g].sag) {
				continue
			}
			for j := g * groupLen; j < (g+1)*groupLen; j++ {
				ch := &t.chunks[j]
				if boxFar(ch, x, y, math.Min(cutoff, best)+ch.sag) {
					continue
				}
				// d − sag < best ⟺ d² < (best + sag)²: one square root
				// per chunk instead of one per segment.
				lim := best + ch.sag
				lim2 := lim * lim
				if math.IsInf(best, 1) {
					lim2 = math.Inf(1)
				}
				d2min := lim2
				for i := j * chunkLen; i < (j+1)*chunkLen && i < causticSamples-1; i++ {
					if d2 := segDist2(zeta, t.pts[i], t.pts[i+1]); d2 < d2min {
						d2min = d2
					}
				}
				if d2min < lim2 {
					best = math.Sqrt(d2min) - ch.sag
				}
			}
		}
	}
	return math.Max(best-shift, 0)
}

// boxFar reports whether (x, y) is farther than lim from the box of ch.
func boxFar(ch *causticChunk, x, y, lim float64) bool {
	dx, dy := 0.0, 0.0
	if x < ch.x0 {
		dx = ch.x0 - x
	} else if x > ch.x1 {
		dx = x - ch.x1
	}
	if y < ch.y0 {
		dy = ch.y0 - y
	} else if y > ch.y1 {
		dy = y - ch.y1
	}
	return dx*dx+dy*dy > lim*lim
}

// segDist2 is the squared distance from p to the segment a–b.
func segDist2(p, a, b complex128) float64 {
	ab := b - a
	pa := p - a
	l2 := fsAbs2(ab)
	t := real(pa)*real(ab) + imag(pa)*imag(ab)
	switch {
	case t <= 0 || l2 == 0:
		return fsAbs2(pa)
	case t >= l2:
		return fsAbs2(p - b)
	}
	t /= l2
	return fsAbs2(pa - ab*complex(t, 0))
}
