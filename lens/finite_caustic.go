package lens

import (
	"math"
	"math/cmplx"
)

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
}

type causticTrack struct {
	pts    [causticSamples]complex128
	chunks [causticSamples / chunkLen]causticChunk
}

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
	var mon [6]complex128
	for k := 0; k < 4; k++ {
		mon[k] = c[k] / c[4]
	}
	mon[4] = 1
	if cold {
		for k := 0; k < 4; k++ {
			start[k] = cmplx.Rect(1.5+float64(k)*0.1, 0.4+1.3*float64(k)) + complex(l.z2, 0)
		}
	}
	fsAberth(&mon, 4, start, 500)
}

func (c *causticMap) build(b Binary) {
	l := newFSLens(b)
	var z [5]complex128
	for i := 0; i < causticSamples; i++ {
		l.criticalQuartic(cmplx.Rect(1, 2*math.Pi*float64(i)/causticSamples), &z, i == 0)
		for k := 0; k < 4; k++ {
			f, _, _ := l.lensEq(z[k], 0)
			c.tracks[k].pts[i] = f // ζ(z) − 0
		}
	}
	const n = causticSamples
	for k := range c.tracks {
		t := &c.tracks[k]
		for j := range t.chunks {
			ch := &t.chunks[j]
			ch.x0, ch.y0, ch.x1, ch.y1 = math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)
			ch.sag = 0
			for i := j * chunkLen; i <= (j+1)*chunkLen; i++ {
				p := t.pts[i%n]
				ch.x0, ch.x1 = math.Min(ch.x0, real(p)), math.Max(ch.x1, real(p))
				ch.y0, ch.y1 = math.Min(ch.y0, imag(p)), math.Max(ch.y1, imag(p))
				d2 := t.pts[(i+n-1)%n] - 2*p + t.pts[(i+1)%n]
				ch.sag = math.Max(ch.sag, fsAbs(d2)/4)
			}
		}
	}
	c.b, c.ok = b, true
}

// distance returns the distance from zeta to the sampled caustic of b, or a
// value > cutoff when it exceeds cutoff.
func (c *causticMap) distance(b Binary, zeta complex128, cutoff float64) float64 {
	if !c.ok || c.b != b {
		c.build(b)
	}
	x, y := real(zeta), imag(zeta)
	best := math.Inf(1)
	for k := range c.tracks {
		t := &c.tracks[k]
		for j := range t.chunks {
			ch := &t.chunks[j]
			dx := math.Max(0, math.Max(ch.x0-x, x-ch.x1))
			dy := math.Max(0, math.Max(ch.y0-y, y-ch.y1))
			lim := math.Min(cutoff, best) + ch.sag
			if dx > lim || dy > lim || dx*dx+dy*dy > lim*lim {
				continue
			}
			for i := j * chunkLen; i < (j+1)*chunkLen; i++ {
				d := segDist(zeta, t.pts[i], t.pts[(i+1)%causticSamples]) - ch.sag
				if d < best {
					best = d
				}
			}
		}
	}
	return math.Max(best, 0)
}

// segDist is the distance from p to the segment a–b.
func segDist(p, a, b complex128) float64 {
	ab := b - a
	l2 := fsAbs2(ab)
	if l2 == 0 {
		return fsAbs(p - a)
	}
	t := (real(p-a)*real(ab) + imag(p-a)*imag(ab)) / l2
	t = math.Max(0, math.Min(1, t))
	return fsAbs(p - (a + ab*complex(t, 0)))
}
