package lens

import (
	"math"
)

// Contour integration of a uniform circular source.
//
// The magnification of a uniform source is the total area of its images divided
// by the source area. By Green's theorem each image area is ½∮ Im(z̄ dz) along the
// image boundary (Gould & Gaucherel 1997, ApJ 477, 580; Dominik 1998, A&A 333,
// L79). The image boundaries are the images of the source boundary
// ζ(θ) = ζc + r e^{iθ}: we sample θ, solve the five roots of the lens polynomial
// at each sample and follow them from sample to sample. A positive-parity image
// runs along its boundary in the sense of θ, a negative one against it, so each
// true-image segment contributes its oriented area times its parity. Where the
// source boundary crosses a caustic two images (of opposite parity) appear or
// disappear on the critical curve; there the two tracks are joined through the
// critical curve by a parabola tangent to both (the quadratic Bézier through the
// intersection of the two tangents), which is the leading-order shape of the
// image boundary at a fold.
//
// Each segment uses the trapezoid term ½Im(z̄ₐ z_b) plus the parabolic
// correction (Δθ³/24)[Im(ż̄ z̈)ₐ + Im(ż̄ z̈)_b] of Bozza (2010, MNRAS 408, 2188),
// with ż and z̈ the analytic derivatives of the image position along the
// boundary. The error of a segment is estimated, after Bozza (2010), from the
// disagreement of the two end-point curvature terms and from the mismatch
// between the chord and the tangents; the interval of θ with the largest
// estimate is bisected until the total estimate meets the tolerance.

// ctSample is one point of the source boundary with its roots, and the interval
// of θ from it to the next sample.
type ctSample struct {
	th  float64 // boundary angle (rad), increasing along the list
	r   fsRoots
	dz  [5]complex128 // dz/dθ of each image
	pc  [5]float64    // Im(conj(ż)·z̈) of each image
	nxt int32         // index of the next sample (the list is circular)
	ver uint32        // bumped whenever the interval to nxt changes

	area   float64 // parity-signed image area contributed by the interval
	err    float64 // its estimated absolute error
	frozen bool    // too short to bisect further
}

type ctItem struct {
	err float64
	i   int32
	ver uint32
}

// contour is the reusable workspace of one uniform-disk integration.
type contour struct {
	s    []ctSample
	heap []ctItem
	// Samples counts the boundary points solved by the last integration.
	samples int
}

const (
	ctInitial    = 8    // initial samples on the boundary
	ctMaxSamples = 4000 // cap on boundary samples per contour (the error estimate is returned either way)
	ctMinStep    = 1e-7 // rad: intervals shorter than this are not bisected (below it the image/ghost call near a caustic is round-off)
)

// disk returns the parity-signed total image area of a uniform disk of radius r
// centred at zc and its estimated absolute error, refining until the error is
// at most tol times the area. warm, if not nil, seeds the first root solve.
// ok is false if a root solve failed.
func (c *contour) disk(l *fsLens, zc complex128, r, tol float64, warm *[5]complex128) (area, errEst float64, ok bool) {
	c.s = c.s[:0]
	c.heap = c.heap[:0]
	c.samples = 0
	// A small irrational offset keeps the samples off the binary axis, where a
	// source boundary symmetric about the axis would put roots on symmetric
	// degenerate points.
	const off = 0.1234567
	n := ctInitial
	for k := 0; k < n; k++ {
		th := off + 2*math.Pi*float64(k)/float64(n)
		var w *[5]complex128
		if k == 0 {
			w = warm
		} else {
			w = &c.s[k-1].r.z
		}
		c.s = append(c.s, ctSample{th: th, nxt: int32((k + 1) % n)})
		if !c.solveAt(l, zc, r, int32(k), w) {
			return 0, 0, false
		}
	}
	// Scale for intervals the error estimate cannot judge.
	a0 := 1.0
	for k := range c.s {
		if m := c.s[k].r.mag(); m > a0 {
			a0 = m
		}
	}
	bad := r * r * a0
	for k := range c.s {
		c.interval(int32(k), bad)
		c.push(int32(k))
	}
	// The totals are kept by differences while refining (summing afresh each
	// round would be O(n²)) and recomputed exactly at the end.
	area, errEst = c.totals()
	for errEst > tol*math.Abs(area) && len(c.heap) > 0 && len(c.s) < ctMaxSamples {
		it := c.pop()
		a := &c.s[it.i]
		if it.ver != a.ver || a.frozen {
			continue
		}
		b := a.nxt
		thb := c.s[b].th
		if thb <= a.th {
			thb += 2 * math.Pi
		}
		h := thb - a.th
		if h < ctMinStep {
			a.frozen = true
			continue
		}
		m := int32(len(c.s))
		c.s = append(c.s, ctSample{th: a.th + h/2, nxt: b})
		a = &c.s[it.i]
		if !c.solveAt(l, zc, r, m, &a.r.z) {
			return 0, 0, false
		}
		oldA, oldE := a.area, a.err
		a.nxt = m
		a.ver++
		c.interval(it.i, bad)
		c.interval(m, bad)
		area += c.s[it.i].area + c.s[m].area - oldA
		errEst += c.s[it.i].err + c.s[m].err - oldE
		c.push(it.i)
		c.push(m)
	}
	area, errEst = c.totals()
	return area, errEst, true
}

func (c *contour) totals() (area, errEst float64) {
	for k := range c.s {
		area += c.s[k].area
		errEst += c.s[k].err
	}
	return area, errEst
}

// solveAt solves the roots of sample i and their boundary derivatives.
func (c *contour) solveAt(l *fsLens, zc complex128, r float64, i int32, warm *[5]complex128) bool {
	p := &c.s[i]
	c.samples++
	for try := 0; ; try++ {
		sn, cs := math.Sincos(p.th)
		e := complex(cs, sn)
		zeta := zc + complex(r, 0)*e
		if !l.solve(&p.r, zeta, warm) {
			return false
		}
		if p.r.n == 5 || try == 3 {
			break
		}
		// The boundary point sits exactly on a lens (degree drop): move it a
		// hair along the boundary.
		p.th += 1e-9
	}
	sn, cs := math.Sincos(p.th)
	e := complex(cs, sn)
	d1 := complex(0, r) * e // dζ/dθ
	d2 := -complex(r, 0) * e
	m1, m2 := complex(l.m1, 0), complex(l.m2, 0)
	for k := 0; k < p.r.n; k++ {
		if !p.r.isImg(k) {
			p.dz[k], p.pc[k] = 0, 0
			continue
		}
		z := p.r.z[k]
		h1, h2 := fsInv(z-complex(l.z1, 0)), fsInv(z-complex(l.z2, 0))
		h12, h22 := h1*h1, h2*h2
		g := m1*h12 + m2*h22
		g1 := -2 * (m1*h12*h1 + m2*h22*h2)
		gb := fsConj(g)
		iD := complex(1/(1-fsAbs2(g)), 0)
		zp := (d1 - gb*fsConj(d1)) * iD
		czp := fsConj(zp)
		R := d2 - fsConj(g1)*czp*czp
		zpp := (R - gb*fsConj(R)) * iD
		p.dz[k] = zp
		p.pc[k] = fsCross(zp, zpp)
	}
	return true
}

// interval computes the area and error of the interval from sample i to its
// successor. bad is the error charged to an interval whose root tracks cannot
// be matched consistently (per radian of θ).
func (c *contour) interval(i int32, bad float64) {
	a := &c.s[i]
	b := &c.s[a.nxt]
	h := b.th - a.th
	if h <= 0 {
		h += 2 * math.Pi
	}
	a.area, a.err = 0, 0
	n := a.r.n
	if b.r.n < n {
		n = b.r.n
	}
	// Match roots at a to roots at b: predicted midpoints, greedy on distance.
	var pa, pb [5]complex128
	for k := 0; k < 5; k++ {
		pa[k] = a.r.z[k] + a.dz[k]*complex(h/2, 0)
		pb[k] = b.r.z[k] - b.dz[k]*complex(h/2, 0)
	}
	// Cost: distance between predicted positions; two true images of
	// opposite parity are never the same track.
	var cost [5][5]float64
	for ii := 0; ii < a.r.n; ii++ {
		for jj := 0; jj < b.r.n; jj++ {
			d := fsAbs2(pa[ii] - pb[jj])
			if a.r.isImg(ii) && b.r.isImg(jj) && (a.r.det[ii] > 0) != (b.r.det[jj] > 0) {
				d = math.Inf(1)
			}
			cost[ii][jj] = d
		}
	}
	var perm [5]int8
	var usedA, usedB uint8
	for step := 0; step < n; step++ {
		best, bi, bj := math.Inf(1), -1, -1
		for ii := 0; ii < a.r.n; ii++ {
			if usedA&(1<<ii) != 0 {
				continue
			}
			for jj := 0; jj < b.r.n; jj++ {
				if usedB&(1<<jj) != 0 {
					continue
				}
				if d := cost[ii][jj]; d < best || bi < 0 {
					best, bi, bj = d, ii, jj
				}
			}
		}
		perm[bi] = int8(bj)
		usedA |= 1 << bi
		usedB |= 1 << bj
	}
	broken := false
	// The matching must be unambiguous: each root's partner clearly nearer
	// than any rival root at b, unless exchanging the two partners changes
	// nothing (both a-roots spurious, or both b-roots spurious). Otherwise the
	// roots moved too far for the sampling and the interval must be bisected.
	var inv [5]int8
	for ii := 0; ii < a.r.n; ii++ {
		inv[perm[ii]] = int8(ii)
	}
	for ii := 0; ii < a.r.n && !broken; ii++ {
		j := int(perm[ii])
		d1 := fsAbs2(pa[ii] - pb[j])
		for jj := 0; jj < b.r.n; jj++ {
			if jj == j {
				continue
			}
			ii2 := int(inv[jj])
			if (!a.r.isImg(ii) && !a.r.isImg(ii2)) || (!b.r.isImg(j) && !b.r.isImg(jj)) {
				continue
			}
			if 4*d1 > fsAbs2(pa[ii]-pb[jj]) {
				broken = true
				break
			}
		}
	}
	var die, born [2]int
	nd, nb := 0, 0
	h3 := h * h * h
	for k := 0; k < a.r.n; k++ {
		if usedA&(1<<k) == 0 {
			continue
		}
		j := int(perm[k])
		ta, tb := a.r.isImg(k), b.r.isImg(j)
		switch {
		case ta && tb:
			sa, sb := a.r.det[k] > 0, b.r.det[j] > 0
			if sa != sb {
				broken = true
				continue
			}
			za, zb := a.r.z[k], b.r.z[j]
			ap := h3 / 24 * (a.pc[k] + b.pc[j])
			seg := 0.5*fsCross(za, zb) + ap
			// Error terms after Bozza (2010): end-point curvature disagreement,
			// chord against tangents, and the next order of the correction.
			e1 := math.Abs(a.pc[k]-b.pc[j]) * h3 / 48
			dd := fsAbs2(zb - za)
			ta := fsAbs(a.dz[k]) * fsAbs(b.dz[j]) * h * h
			e2 := 0.0
			if ta > 0 {
				e2 = 1.5 * math.Abs(ap) * math.Abs(dd/ta-1)
			} else {
				e2 = math.Abs(ap)
			}
			e3 := math.Abs(ap) * h * h / 10
			// An image that moved far more than its derivatives allow was
			// not followed (it swept round a lens or jumped between
			// tracks): the interval is unresolved.
			if l2 := h * math.Max(fsAbs(a.dz[k]), fsAbs(b.dz[j])); dd > 9*l2*l2+1e-30 {
				broken = true
			}
			if !sa {
				seg = -seg
			}
			a.area += seg
			a.err += e1 + e2 + e3
		case ta && !tb:
			if nd == 2 {
				broken = true
				continue
			}
			die[nd] = k
			nd++
		case !ta && tb:
			if nb == 2 {
				broken = true
				continue
			}
			born[nb] = j
			nb++
		}
	}
	if nd == 1 && nb == 1 {
		// An image and a spurious root exchanged their labels (they are close
		// near a critical curve): take it as one continuing track.
		k, j := die[0], born[0]
		seg := 0.5 * fsCross(a.r.z[k], b.r.z[j])
		if a.r.det[k] < 0 {
			seg = -seg
		}
		a.area += seg
		broken = true
		nd, nb = 0, 0
	}
	if nd == 1 || nb == 1 || (nd == 2 && nb == 2) {
		broken = true
		nd, nb = 0, 0
	}
	if nd == 2 {
		// Destruction inside (a, b): + image runs into the critical curve and
		// comes back as the − image.
		p, q := die[0], die[1]
		if a.r.det[p] < a.r.det[q] {
			p, q = q, p
		}
		ar, e := ctJoin(a.r.z[p], a.dz[p], a.r.z[q], a.dz[q], a.r.det[p]-a.r.det[q])
		a.area += ar
		a.err += e
	}
	if nb == 2 {
		// Creation inside (a, b): the − image comes from the critical curve
		// and leaves as the + image.
		p, q := born[0], born[1]
		if b.r.det[p] < b.r.det[q] {
			p, q = q, p
		}
		ar, e := ctJoin(b.r.z[q], b.dz[q], b.r.z[p], b.dz[p], b.r.det[p]-b.r.det[q])
		a.area += ar
		a.err += e
	}
	if broken {
		a.err += bad * h
	}
}

// ctJoin is the oriented-area term ½∫Im(z̄ dz) of the image boundary from A
// to C through a critical curve, where A and C are the last samples of two
// merging images and u, v the tangents there. The boundary is taken as the
// parabola tangent to u at A and to v at C, whose area beyond the chord is 2/3
// of the triangle A, P, C (P the intersection of the tangents). The parabola
// is the leading-order shape only when both ends are close to the critical
// curve, so the error estimate is a quarter of the correction plus
// 0.1·|C−A|²·ddet, with ddet the difference of det J across the pair (both
// scale as the cube of the distance to the critical curve at a fold); a
// degenerate tangent geometry falls back to the chord and charges the whole
// triangle.
func ctJoin(A, u, C, v complex128, ddet float64) (area, errEst float64) {
	d := C - A
	area = 0.5 * fsCross(A, C)
	den := fsCross(u, v)
	if den == 0 || d == 0 {
		return area, 0.5 * fsAbs2(d)
	}
	s := fsCross(d, v) / den
	P := A + u*complex(s, 0)
	L := fsAbs(d)
	tri := fsCross(P-A, d)
	if fsAbs(P-A) > 4*L || fsAbs(P-C) > 4*L {
		// Tangents nearly parallel: the parabola picture does not hold.
		return area, math.Max(math.Abs(tri)/2, 0.25*L*L)
	}
	corr := tri / 3
	return area + corr, 0.25*math.Abs(corr) + 0.1*L*L*math.Abs(ddet)
}

func (c *contour) push(i int32) {
	it := ctItem{err: c.s[i].err, i: i, ver: c.s[i].ver}
	h := append(c.heap, it)
	j := len(h) - 1
	for j > 0 {
		p := (j - 1) / 2
		if h[p].err >= h[j].err {
			break
		}
		h[p], h[j] = h[j], h[p]
		j = p
	}
	c.heap = h
}

func (c *contour) pop() ctItem {
	h := c.heap
	top := h[0]
	last := len(h) - 1
	h[0] = h[last]
	h = h[:last]
	j := 0
	for {
		l := 2*j + 1
		if l >= len(h) {
			break
		}
		m := l
		if r := l + 1; r < len(h) && h[r].err > h[l].err {
			m = r
		}
		if h[j].err >= h[m].err {
			break
		}
		h[j], h[m] = h[m], h[j]
		j = m
	}
	c.heap = h
	return top
}
