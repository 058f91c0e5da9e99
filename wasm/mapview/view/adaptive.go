package view

import (
	"math"
	"math/cmplx"
	"slices"

	"lensbook/lens"
)

// Adaptive map sampling. Solving the binary-lens equation at every pixel of a
// 512×512 map takes seconds in WebAssembly, yet away from the caustics the
// magnification is a smooth function of the source position. The sampler
// therefore solves the lens exactly on a lattice of every blockPx-th pixel,
// at every pixel within maskPx of a caustic (where the magnification jumps by
// the two extra images), and at the centre and edge midpoints of every block; a block where these agree
// with the bilinear interpolation of its corners to relTol is
// filled by interpolation, any other block is split in four and treated the
// same way, down to single pixels. This is quadtree refinement with an
// interpolation-error test, a standard technique of adaptive rendering; the
// caustic mask comes from lens.Binary.Caustics.
//
// relTol = 5e-3 keeps interpolated pixels of the full map within about a
// quarter of one step of the colour scale (DefaultScale has 255 steps over two
// decades of A, 1.8 % each); the package tests compare every pixel with
// lens.MagMap. The coarse preview, replaced within a few frames, allows
// coarseTol at the tested points; between them the error was seen to reach
// about twice that (its test allows 2·coarseTol, a little over one colour step).
const (
	blockPx   = 8
	maskPx    = 1
	relTol    = 5e-3
	coarseTol = 2e-2
)

// Pixel states of a sampler.
const (
	unknown uint8 = iota
	interpolated
	exact
)

// sampler fills one Map adaptively.
type sampler struct {
	m      *Map
	st     []uint8
	sat    []int32 // summed-area table of the caustic mask, (NX+1)×(NY+1)
	sv     *lens.Solver
	bs     int     // block size: blockPx, or blockPx/2 for maps under 256 pixels a side
	single bool    // point lens: A = PointMag(|ζ|)
	tol    float64 // relative interpolation tolerance
	dx, dy float64
	blocks []blk // work lists of rows, reused
	next   []blk
	pts    [][2]int
	Exact  int   // pixels solved exactly so far
	Failed int   // pixels whose images could not be found
	err    error // first solver error
}

// newSampler prepares adaptive filling of m for lens (s, q) with caustics curves.
func newSampler(old *sampler, m *Map, s, q float64, curves []lens.Curve, tol float64) (*sampler, error) {
	sp := old
	if sp == nil {
		sp = &sampler{}
	}
	n := m.NX * m.NY
	if cap(sp.st) < n {
		sp.st = make([]uint8, n)
	}
	sp.st = sp.st[:n]
	clear(sp.st)
	sp.m, sp.Exact, sp.Failed, sp.err, sp.tol = m, 0, 0, nil, tol
	sp.bs = blockPx
	if min(m.NX, m.NY) < 256 {
		sp.bs = blockPx / 2 // small maps: a block is a large part of the pattern
	}
	sp.dx, sp.dy = (m.X1-m.X0)/float64(m.NX), (m.Y1-m.Y0)/float64(m.NY)
	sp.single = q == 0
	if !sp.single {
		b, err := lens.NewBinary(s, q)
		if err != nil {
			return nil, err
		}
		if sp.sv == nil {
			sp.sv = lens.NewSolver(b)
		} else {
			sp.sv.SetBinary(b)
			sp.sv.Reset()
		}
	}
	// Caustic mask: pixels within maskPx of a caustic (or of the point caustic
	// of a single lens), found by walking each caustic in half-pixel steps.
	mask := make([]bool, n)
	mark := func(fx, fy float64) {
		ci, cj := int(math.Floor(fx)), int(math.Floor(fy))
		for j := cj - maskPx; j <= cj+maskPx; j++ {
			for i := ci - maskPx; i <= ci+maskPx; i++ {
				if i >= 0 && j >= 0 && i < m.NX && j < m.NY {
					mask[j*m.NX+i] = true
				}
			}
		}
	}
	toPix := func(z complex128) (float64, float64) {
		return (real(z) - m.X0) / sp.dx, (imag(z) - m.Y0) / sp.dy
	}
	if sp.single {
		mark(toPix(0))
	}
	for _, c := range curves {
		k := len(c.Caustic)
		for i := range k {
			x0, y0 := toPix(c.Caustic[i])
			x1, y1 := toPix(c.Caustic[(i+1)%k])
			// skip segments entirely outside the map (with margin)
			if math.Max(x0, x1) < -2 || math.Min(x0, x1) > float64(m.NX)+2 || math.Max(y0, y1) < -2 || math.Min(y0, y1) > float64(m.NY)+2 {
				continue
			}
			steps := int(math.Ceil(2 * math.Hypot(x1-x0, y1-y0)))
			for s := 0; s <= steps; s++ {
				f := float64(s) / float64(max(steps, 1))
				mark(x0+f*(x1-x0), y0+f*(y1-y0))
			}
		}
	}
	w := m.NX + 1
	if cap(sp.sat) < w*(m.NY+1) {
		sp.sat = make([]int32, w*(m.NY+1))
	}
	sp.sat = sp.sat[:w*(m.NY+1)]
	clear(sp.sat[:w])
	for j := range m.NY {
		row := int32(0)
		sp.sat[(j+1)*w] = 0
		for i := range m.NX {
			if mask[j*m.NX+i] {
				row++
			}
			sp.sat[(j+1)*w+i+1] = sp.sat[j*w+i+1] + row
		}
	}
	return sp, nil
}

// masked reports whether any pixel of [i0, i1]×[j0, j1] (inclusive) is near a caustic.
func (sp *sampler) masked(i0, j0, i1, j1 int) bool {
	w := sp.m.NX + 1
	return sp.sat[(j1+1)*w+i1+1]-sp.sat[j0*w+i1+1]-sp.sat[(j1+1)*w+i0]+sp.sat[j0*w+i0] > 0
}

// at returns the exact magnification of pixel (i, j), solving it if needed.
func (sp *sampler) at(i, j int) float32 {
	m := sp.m
	k := j*m.NX + i
	if sp.st[k] == exact {
		return m.A[k]
	}
	z := complex(m.X0+(float64(i)+0.5)*sp.dx, m.Y0+(float64(j)+0.5)*sp.dy)
	var a float64
	if sp.single {
		a = lens.PointMag(cmplx.Abs(z))
	} else {
		var err error
		a, err = sp.sv.Mag(z)
		if err != nil {
			sp.Failed++
			if sp.err == nil {
				sp.err = err
			}
			sp.sv.Reset()
			a = math.NaN()
		}
	}
	m.A[k] = float32(a)
	sp.st[k] = exact
	sp.Exact++
	return m.A[k]
}

// rows fills rows [j0, j1) of the map (j0 a multiple of blockPx). Pixels of
// row j1 may also be solved, as corners of the last blocks.
//
// The quadtree is walked level by level across the whole band rather than
// depth first: at each level the points to solve are sorted into rows walked
// in alternating directions, so that every solve warm-starts from a nearby
// source position (a cold start of the image solver costs several warm ones).
func (sp *sampler) rows(j0, j1 int) {
	m := sp.m
	blocks := sp.blocks[:0]
	for jb := j0; jb < j1; jb += sp.bs {
		jt := min(jb+sp.bs, m.NY-1)
		if jb == jt || m.NX == 1 { // a single last row or column: solve it all
			for j := jb; j <= jt; j++ {
				for i := range m.NX {
					sp.at(i, j)
				}
			}
			continue
		}
		for ib := 0; ib < m.NX-1; ib += sp.bs {
			blocks = append(blocks, blk{ib, jb, min(ib+sp.bs, m.NX-1), jt})
		}
	}
	for len(blocks) > 0 {
		// Points this level needs: corners of every block, and the test points
		// of unmasked blocks larger than a pixel step.
		pts := sp.pts[:0]
		for _, b := range blocks {
			pts = append(pts, [2]int{b.i0, b.j0}, [2]int{b.i1, b.j0}, [2]int{b.i0, b.j1}, [2]int{b.i1, b.j1})
			if b.small() || sp.masked(b.i0, b.j0, b.i1, b.j1) {
				continue
			}
			ic, jc := (b.i0+b.i1)/2, (b.j0+b.j1)/2
			pts = append(pts, [2]int{ic, jc}, [2]int{ic, b.j0}, [2]int{ic, b.j1}, [2]int{b.i0, jc}, [2]int{b.i1, jc})
		}
		slices.SortFunc(pts, func(a, b [2]int) int {
			if a[1] != b[1] {
				return a[1] - b[1]
			}
			if a[1]%2 == 1 {
				return b[0] - a[0]
			}
			return a[0] - b[0]
		})
		for _, p := range pts {
			sp.at(p[0], p[1])
		}
		sp.pts = pts
		next := sp.next[:0]
		for _, b := range blocks {
			if b.small() {
				continue // all its pixels are corners, now solved
			}
			if !sp.masked(b.i0, b.j0, b.i1, b.j1) && sp.smooth(b) {
				sp.fill(b)
				continue
			}
			next = b.split(next)
		}
		sp.next = blocks
		blocks = next
	}
	sp.blocks = blocks
}

// blk is an inclusive pixel rectangle [i0, i1]×[j0, j1].
type blk struct{ i0, j0, i1, j1 int }

func (b blk) small() bool { return b.i1-b.i0 <= 1 && b.j1-b.j0 <= 1 }

// split appends the four (or two) halves of b.
func (b blk) split(dst []blk) []blk {
	im, jm := (b.i0+b.i1)/2, (b.j0+b.j1)/2
	switch {
	case b.i1-b.i0 <= 1:
		return append(dst, blk{b.i0, b.j0, b.i1, jm}, blk{b.i0, jm, b.i1, b.j1})
	case b.j1-b.j0 <= 1:
		return append(dst, blk{b.i0, b.j0, im, b.j1}, blk{im, b.j0, b.i1, b.j1})
	}
	return append(dst, blk{b.i0, b.j0, im, jm}, blk{im, b.j0, b.i1, jm}, blk{b.i0, jm, im, b.j1}, blk{im, jm, b.i1, b.j1})
}

// smooth tests the centre and the four edge midpoints of b (already solved)
// against the bilinear interpolation of its corners: the centre alone misses
// saddle-shaped fields, whose two curvatures cancel there.
func (sp *sampler) smooth(b blk) bool {
	m := sp.m
	a00, a10 := float64(m.A[b.j0*m.NX+b.i0]), float64(m.A[b.j0*m.NX+b.i1])
	a01, a11 := float64(m.A[b.j1*m.NX+b.i0]), float64(m.A[b.j1*m.NX+b.i1])
	ic, jc := (b.i0+b.i1)/2, (b.j0+b.j1)/2
	for _, p := range [5][2]int{{ic, jc}, {ic, b.j0}, {ic, b.j1}, {b.i0, jc}, {b.i1, jc}} {
		fx, fy := float64(p[0]-b.i0)/float64(b.i1-b.i0), float64(p[1]-b.j0)/float64(b.j1-b.j0)
		want := bilinear(a00, a10, a01, a11, fx, fy)
		if got := float64(m.A[p[1]*m.NX+p[0]]); !(math.Abs(got-want) <= sp.tol*got) {
			return false
		}
	}
	return true
}

func bilinear(a00, a10, a01, a11, fx, fy float64) float64 {
	return (a00*(1-fx)+a10*fx)*(1-fy) + (a01*(1-fx)+a11*fx)*fy
}

// fill interpolates the pixels of b not solved exactly.
func (sp *sampler) fill(b blk) {
	m := sp.m
	a00, a10 := float64(m.A[b.j0*m.NX+b.i0]), float64(m.A[b.j0*m.NX+b.i1])
	a01, a11 := float64(m.A[b.j1*m.NX+b.i0]), float64(m.A[b.j1*m.NX+b.i1])
	for j := b.j0; j <= b.j1; j++ {
		fy := float64(j-b.j0) / float64(b.j1-b.j0)
		for i := b.i0; i <= b.i1; i++ {
			k := j*m.NX + i
			if sp.st[k] == exact {
				continue
			}
			fx := float64(i-b.i0) / float64(b.i1-b.i0)
			m.A[k] = float32(bilinear(a00, a10, a01, a11, fx, fy))
			sp.st[k] = interpolated
		}
	}
}
