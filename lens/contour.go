package lens

import (
	"math"
	"math/bits"
)

// Contour integration of a uniform circular source.
//
// The magnification of a uniform source is the total area of its images divided
// by the source area. By Green's theorem each image area is ½∮ Im(z̄ dz) along the
// image boundary (Gould & Gaucherel 1997, ApJ 477, 580; Dominik 1998, A&A 333,
// L79). The image boundaries are the images of the source boundary
// ζ(θ) = ζc + r e^{iθ}: we sample θ, find the five roots of the lens polynomial
// at each sample and follow them from sample to sample. A positive-parity image
// runs along its boundary in the sense of θ, a negative one against it, so each
// true-image segment contributes its oriented area times its parity. Where the
// source boundary crosses a caustic two images (of opposite parity) appear or
// disappear on the critical curve; there the two tracks are joined through the
// critical curve by a parabola tangent to both (the quadratic Bézier through the
// intersection of the two tangents), which is the leading-order shape of the
// image boundary at a fold, or, where its error estimate is smaller, as one
// track of the curve through both images in w = √|θ − θc| (ctFoldJoin).
//
// Each segment's area is that of the quintic Hermite interpolant of the
// image position and its analytic first and second derivatives along the
// boundary at the two ends, a closed form in cross products of those data
// (ctSegment). Its error is estimated against a Taylor rule from the same
// data: the trapezoid term ½Im(z̄ₐ z_b), the parabolic correction
// (Δθ³/24)[Im(ż̄ z̈)ₐ + Im(ż̄ z̈)_b] of Bozza (2010, MNRAS 408, 2188) and the
// next (h⁵) term of the same expansion, derived here (ctTaylor); the Taylor
// rule's own estimate (its h⁵ term times the ratio to the h³ term) is a
// floor where the expansion converges poorly. The interval of θ with the
// largest estimate is bisected until the total estimate meets the tolerance.
//
// Robustness. The samples start at 8 equally spaced angles plus one between
// any two caustic crossings of the boundary (from the sampled caustics,
// causticMap.crossings) that they would not separate: two crossings between
// neighbouring samples leave the image count unchanged and the pair created
// and destroyed in between unseen. A join whose pair is not young (ctFresh)
// is charged the loop the pair may have swept. An interval whose roots cannot
// be matched consistently keeps best-guess terms, so that the image
// boundaries stay closed, and is charged a local bound (contour.local).
//
// Speed. A bisection point lies between two samples whose images are known
// with their derivatives: its images are found by Newton's method on the lens
// equation from cubic Hermite predictions and the two spurious roots from the
// quadratic left after dividing them out of the polynomial (fsLens.track);
// the Aberth iteration on all five roots (fsLens.solve) is the fallback.
// Most samples then cost a few lens-equation evaluations.

// ctSample is one point of the source boundary with its roots, and the interval
// of θ from it to the next sample.
type ctSample struct {
	th  float64 // boundary angle (rad), increasing along the list
	r   fsRoots
	dz  [5]complex128 // dz/dθ of each image
	d2z [5]complex128 // d²z/dθ² of each image
	pc  [5]float64    // Im(conj(ż)·z̈) of each image
	tau [5]complex128 // ż/(2z̈) of each image: θ* − θ for a square-root branch point θ* (see ctBranchSegment)
	// rule is the segment rule each track of the interval used (ctRule*),
	// which the two halves of a bisection try first (interval's rules).
	rule [5]uint8
	pos  uint8  // bit k: root k is an image of positive parity
	nxt  int32  // index of the next sample (the list is circular)
	ver  uint32 // bumped whenever the interval to nxt changes

	// perm[k] is the root at nxt that continues root k here (−1: none), as
	// matched by interval; track has bit k set when both are images of the
	// same parity (one image track). They seed the roots of a bisection.
	perm  [5]int8
	track uint8
	clean bool // the interval's tracks matched consistently (not broken)

	tracked bool // the roots were found by fsLens.track from the previous sample's

	area   float64 // parity-signed image area contributed by the interval
	err    float64 // its estimated absolute error
	jerr   float64 // the part of err from joins through critical curves
	frozen bool    // too short to bisect further
}

type ctItem struct {
	err float64
	i   int32
	ver uint32
}

// contour is the reusable workspace of one uniform-disk integration.
type contour struct {
	s     []ctSample
	heap  []ctItem
	ths   []float64 // initial sample angles
	cross []float64 // caustic crossings of the boundary
	// Samples counts the boundary points solved by the last integration.
	samples int
	// maxSamples overrides ctMaxSamples when > 0 (references in tests).
	maxSamples int
	negl       float64 // track error below which ctBranchSegment is not tried (ctNegligible)
}

const (
	ctInitial    = 8    // equally spaced initial samples on the boundary
	ctMaxSamples = 4000 // cap on boundary samples per contour (the error estimate is returned either way)
	// An interval is not bisected once its arc r·h on the source boundary is
	// below ctMinArc·(|zc| + r), about 50 units of round-off of the source
	// position in the working frame: next to a caustic crossing at θc the
	// merging pair sits δ ≈ r|θ − θc| from the caustic with positions
	// uncertain by ε/δ relative (ε that round-off), so closer samples are
	// noise.
	ctMinArc = 1e-14
	// The rules adapted to a branch point (ctBranchSegment) are not tried
	// on a track whose θ-rule error is below ctNegligible·tol·πr²·A0, 1 %
	// of the error budget at A0, the largest point magnification of the
	// initial boundary samples: they could only trim what is already small.
	// Skipping them leaves an estimate larger, never a value less accurate.
	// On the near-caustic benchmark points this costs a few samples (median
	// 38 → 41 for q = 1e-3) and saves 5–8 % of the time (paired runs).
	ctNegligible = 1e-2
	// ctCrossFloor: the floor of a segment's error estimate as a fraction
	// of the estimate without cancellation (see ctTaylor).
	ctCrossFloor = 0.1
)

// disk returns the parity-signed total image area of a uniform disk of radius r
// centred at zc and its estimated absolute error, refining until the error is
// at most tol times the area. warm, if not nil, seeds the first root solve.
// ok is false if a root solve failed.
func (c *contour) disk(l0 *fsLens, zc complex128, r, tol float64, warm *[5]complex128) (area, errEst float64, ok bool) {
	// Work in the frame of the polynomial, the lighter lens at the origin
	// (fsLens.o): the area terms ½Im(z̄a zb) of images next to a planet then
	// keep the digits that the centre-of-mass frame spends on the planet's
	// position. (The heavier lens's frame would resolve sources next to it
	// better, but it cannot resolve the image next to the lighter lens of a
	// small q, whose misclassification then pairs it with a far image
	// through a join.) Areas do not depend on the frame.
	o := l0.o
	lw := l0.shifted(o)
	l := &lw
	zc -= complex(o, 0)
	if warm != nil {
		w := *warm
		for k := range w {
			w[k] -= complex(o, 0)
		}
		warm = &w
	}
	// A boundary passing a lens closer than η·r (η = 1e-3·tol) is moved
	// out to 2η·r from it: at the lens the images of the boundary jump
	// around the lens's Einstein ring within a stretch of θ of the order of
	// the miss distance over r, which round-off cannot resolve. The mean
	// magnification of the disk changes by O(η log(1/η)) relative (the
	// circle-mean magnification diverges only logarithmically as the circle
	// nears a lens); the area is scaled back to radius r and the change is
	// charged to the error.
	r0 := r
	eta := 1e-3 * tol
	for _, zl := range [2]float64{l.z1, l.z2} {
		d := fsAbs(zc-complex(zl, 0)) - r
		if math.Abs(d) < eta*r0 {
			if d >= 0 {
				r = r0 - 2*eta*r0
			} else {
				r = r0 + 2*eta*r0
			}
		}
	}
	defer func() {
		if r != r0 && ok {
			scale := (r0 / r) * (r0 / r)
			area *= scale
			errEst = errEst*scale + math.Abs(area)*4*eta*(1+math.Log(1/eta))
		}
	}()
	c.s = c.s[:0]
	c.heap = c.heap[:0]
	c.samples = 0
	// A small irrational offset keeps the samples off the binary axis, where a
	// source boundary symmetric about the axis would put roots on symmetric
	// degenerate points.
	const off = 0.1234567
	ths := c.seeds(l0, zc+complex(o, 0), r, off)
	n := len(ths)
	for k, th := range ths {
		var w *[5]complex128
		var pred [5]complex128
		imgs := uint8(0)
		if k == 0 {
			w = warm
		} else {
			// Second-order Taylor steps of the previous sample's images,
			// for fsLens.track; its spurious roots stay where they were.
			p := &c.s[k-1]
			dh := th - p.th
			pred = p.r.z
			for j := 0; j < 5; j++ {
				pred[j] += (p.dz[j] + p.d2z[j]*complex(dh/2, 0)) * complex(dh, 0)
			}
			w, imgs = &pred, p.r.img
		}
		c.s = append(c.s, ctSample{th: th, nxt: int32((k + 1) % n)})
		if !c.solveAt(l, zc, r, int32(k), w, imgs) {
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
	c.negl = ctNegligible * tol * math.Pi * r * r * a0
	for k := range c.s {
		c.interval(int32(k), bad, nil, nil)
		c.push(int32(k))
	}
	// The totals are kept by differences while refining (summing afresh each
	// round would be O(n²)) and recomputed exactly at the end.
	area, errEst = c.totals()
	minArc := ctMinArc * (fsAbs(zc) + r)
	// The test is against the area less its error: intervals that cannot be
	// matched yet may carry terms far larger than the true total, which must
	// not make the tolerance look met.
	maxN := ctMaxSamples
	if c.maxSamples > 0 {
		maxN = c.maxSamples
	}
	for len(c.heap) > 0 && len(c.s) < maxN {
		if !(errEst > tol*(math.Abs(area)-errEst)) {
			// The running sums say done: confirm on the exact totals
			// (their round-off let the returned estimate exceed tol).
			if area, errEst = c.totals(); !(errEst > tol*(math.Abs(area)-errEst)) {
				break
			}
		}
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
		if r*h < minArc {
			// Round-off: no further bisection. The Taylor-based estimates
			// mean nothing at this scale; the local bound does (joins keep
			// their own estimate).
			a.frozen = true
			if l := c.local(a, &c.s[b]) + a.jerr; l < a.err {
				a.err = l
				area, errEst = c.totals()
			}
			continue
		}
		m := int32(len(c.s))
		c.s = append(c.s, ctSample{th: a.th + h/2, nxt: b})
		a = &c.s[it.i]
		pred := c.predict(a, &c.s[b], h)
		// fsLens.track when the images of a continue to b, also across a
		// caustic crossing (3 images at one end, 5 at the other, the three
		// continuing tracked): track's quadratic then says whether the
		// pair exists at the midpoint.
		imgs := a.track
		if n := bits.OnesCount8(imgs); n != min(bits.OnesCount8(a.r.img), bits.OnesCount8(c.s[b].r.img)) || !a.clean {
			imgs = 0
		}
		if !c.solveAt(l, zc, r, m, &pred, imgs) {
			return 0, 0, false
		}
		oldA, oldE := a.area, a.err
		a.nxt = m
		a.ver++
		if c.s[m].tracked && a.clean {
			// The new roots are in a's order and continue a's tracks
			// (fsLens.track checked it): no matching needed.
			perm := a.perm
			id := [5]int8{0, 1, 2, 3, 4}
			// The halves try first the rules the interval used.
			rules := a.rule
			c.interval(it.i, bad, &id, &rules)
			c.interval(m, bad, &perm, &rules)
		} else {
			c.interval(it.i, bad, nil, nil)
			c.interval(m, bad, nil, nil)
		}
		area += c.s[it.i].area + c.s[m].area - oldA
		errEst += c.s[it.i].err + c.s[m].err - oldE
		if oldE > 1e8*errEst || math.Abs(oldA) > 1e8*math.Abs(area) {
			// A huge term left the sums (an unresolved interval next to a
			// lens): the running differences have lost their digits.
			area, errEst = c.totals()
		}
		c.push(it.i)
		c.push(m)
	}
	area, errEst = c.totals()
	return area, errEst, true
}

// seeds returns the initial sample angles, increasing from off: ctInitial
// equally spaced, plus one between any two consecutive caustic crossings of
// the boundary (causticMap.crossings) that no other sample separates.
func (c *contour) seeds(l *fsLens, zc complex128, r, off float64) []float64 {
	const step = 2 * math.Pi / ctInitial
	th := c.ths[:0]
	for k := 0; k < ctInitial; k++ {
		th = append(th, off+step*float64(k))
	}
	// A map whose caustics lie within r/4 of the lens's serves (orbital
	// motion, see causticFor): the seeds need only separate the crossings.
	c.cross = causticFor(l.b, r/4).crossings(c.cross[:0], zc, r, off)
	nc := len(c.cross)
	for i := 0; i < nc && nc > 1; i++ {
		t0, t1 := c.cross[i], 0.0
		if i+1 < nc {
			t1 = c.cross[i+1]
		} else {
			t1 = c.cross[0] + 2*math.Pi
		}
		if t1-t0 < 1e-12 {
			continue
		}
		// The first equally spaced sample after t0.
		k := math.Floor((t0-off)/step) + 1
		if off+k*step < t1 {
			continue
		}
		m := (t0 + t1) / 2
		if m >= off+2*math.Pi {
			m -= 2 * math.Pi
		}
		th = append(th, m)
	}
	for i := ctInitial; i < len(th); i++ {
		for j := i; j > 0 && th[j] < th[j-1]; j-- {
			th[j], th[j-1] = th[j-1], th[j]
		}
	}
	c.ths = th
	return th
}

func (c *contour) totals() (area, errEst float64) {
	for k := range c.s {
		area += c.s[k].area
		errEst += c.s[k].err
	}
	return area, errEst
}

// solveAt solves the roots of sample i and their boundary derivatives.
//
// With imgs ≠ 0 the sample lies between two whose images in imgs continue
// along their tracks, and fsLens.track is tried first.
func (c *contour) solveAt(l *fsLens, zc complex128, r float64, i int32, warm *[5]complex128, imgs uint8) bool {
	p := &c.s[i]
	c.samples++
	var sn, cs float64
	for try := 0; ; try++ {
		sn, cs = math.Sincos(p.th)
		e := complex(cs, sn)
		zeta := zc + complex(r, 0)*e
		p.tracked = false
		if imgs != 0 && try == 0 && l.track(&p.r, zeta, warm, imgs) {
			// The matching to the neighbours is known only when no pair
			// appeared (see interval's hint).
			p.tracked = p.r.img == imgs
			break
		}
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
	e := complex(cs, sn)
	d1 := complex(0, r) * e // dζ/dθ
	d2 := -complex(r, 0) * e
	m1, m2 := complex(l.m1, 0), complex(l.m2, 0)
	// Boundary derivatives of the images: with ζ′ = ż + ḡ ż̄ (g = Σ mi/(z−zi)²)
	// ż = (ζ′ − ḡ ζ̄′)/det J, and likewise z̈ from ζ″ = z̈ + ḡ z̈̄ + ḡ′ ż̄²
	// (derived here). det J is recomputed at the final root.
	for k := 0; k < p.r.n; k++ {
		if !p.r.isImg(k) {
			continue
		}
		z := p.r.z[k]
		h1, h2 := fsInv(z-complex(l.z1, 0)), fsInv(z-complex(l.z2, 0))
		h12, h22 := h1*h1, h2*h2
		g := m1*h12 + m2*h22
		g1 := -2 * (m1*h12*h1 + m2*h22*h2)
		gb := fsConj(g)
		det := 1 - fsAbs2(g)
		p.r.det[k] = det
		iD := complex(1/det, 0)
		zp := (d1 - gb*fsConj(d1)) * iD
		czp := fsConj(zp)
		R := d2 - fsConj(g1)*czp*czp
		zpp := (R - gb*fsConj(R)) * iD
		p.dz[k] = zp
		p.d2z[k] = zpp
		p.pc[k] = fsCross(zp, zpp)
		p.tau[k] = ctTau(zp, zpp)
	}
	ctParity(&p.r)
	p.pos = 0
	for k := 0; k < 5; k++ {
		if !p.r.isImg(k) {
			p.dz[k], p.d2z[k], p.pc[k] = 0, 0, 0
		} else if p.r.det[k] > 0 {
			p.pos |= 1 << k
		}
	}
	return true
}

// ctParity enforces the image-parity rule n− − n+ = 1 of a two-point-mass
// lens (Burke 1981, ApJ 244, L1) on a boundary sample. A sample within
// round-off of a caustic has a pair of images on the critical curve whose
// det J signs are noise (both negative, say); such a pair has no extent yet,
// so it is taken as not created: the two images with the smallest |det J|
// become spurious roots when that leaves a valid set of three.
func ctParity(r *fsRoots) {
	npos, nneg := 0, 0
	i0, i1 := -1, -1
	for k := 0; k < r.n; k++ {
		if !r.isImg(k) {
			continue
		}
		if r.det[k] > 0 {
			npos++
		} else {
			nneg++
		}
		d := math.Abs(r.det[k])
		switch {
		case i0 < 0 || d < math.Abs(r.det[i0]):
			i0, i1 = k, i0
		case i1 < 0 || d < math.Abs(r.det[i1]):
			i1 = k
		}
	}
	if npos+nneg != 5 || nneg-npos == 1 {
		return
	}
	for _, k := range [2]int{i0, i1} {
		if r.det[k] > 0 {
			npos--
		} else {
			nneg--
		}
	}
	if nneg-npos == 1 {
		r.img &^= 1<<i0 | 1<<i1
	}
}

// predict returns starting roots for the midpoint of the interval from a to
// b (of length h), in the root order of a: the quintic Hermite midpoint
// (za+zb)/2 + 5(ża−żb)h/32 + (z̈a+z̈b)h²/64 on an image track, the mean of
// the two ends for other matched roots, a's root where no match is known.
// Good starts halve the Aberth sweeps of a boundary sample, and decide
// whether fsLens.track's Newton steps converge next to a critical curve.
func (c *contour) predict(a, b *ctSample, h float64) [5]complex128 {
	p := a.r.z
	for k := 0; k < a.r.n; k++ {
		j := a.perm[k]
		if j < 0 {
			continue
		}
		zb := b.r.z[j]
		if a.track&(1<<k) != 0 {
			p[k] = (p[k]+zb)*0.5 + (a.dz[k]-b.dz[j])*complex(5*h/32, 0) + (a.d2z[k]+b.d2z[j])*complex(h*h/64, 0)
		} else {
			p[k] = (p[k] + zb) * 0.5
		}
	}
	return p
}

// interval computes the area and error of the interval from sample i to its
// successor. bad is the error charged to an interval whose root tracks cannot
// be matched consistently (per radian of θ).
//
// hint, if not nil, is the matching of the roots at i to those at the next
// sample, known from the way the later was solved.
func (c *contour) interval(i int32, bad float64, hint *[5]int8, rules *[5]uint8) {
	a := &c.s[i]
	b := &c.s[a.nxt]
	h := b.th - a.th
	if h <= 0 {
		h += 2 * math.Pi
	}
	a.area, a.err, a.jerr = 0, 0, 0
	a.rule = [5]uint8{ctRuleAll, ctRuleAll, ctRuleAll, ctRuleAll, ctRuleAll}
	a.perm = [5]int8{-1, -1, -1, -1, -1}
	a.track = 0
	na, nbr := a.r.n, b.r.n
	imgA, imgB := a.r.img, b.r.img
	posA, posB := a.pos, b.pos
	// Match roots at a to roots at b by their predicted midpoints; two true
	// images of opposite parity are never the same track.
	var cost [5][5]float64
	var perm, inv [5]int8
	var usedB uint8
	inf := math.Inf(1)
	usedA := uint8(1)<<na - 1
	broken := false
	if hint != nil && na == 5 && nbr == 5 {
		perm, usedB = *hint, usedA
		goto matched
	}
	{
		var pa, pb [5]complex128
		hh := complex(h/2, 0)
		for k := 0; k < 5; k++ {
			pa[k] = a.r.z[k] + a.dz[k]*hh
			pb[k] = b.r.z[k] - b.dz[k]*hh
		}
		for ii := 0; ii < na; ii++ {
			best, bj := inf, 0
			// conflict: the roots at b of the opposite image parity
			conflict := uint8(0)
			if imgA&(1<<ii) != 0 {
				conflict = imgB & (posB ^ -((posA >> ii) & 1))
			}
			for jj := 0; jj < nbr; jj++ {
				d := fsAbs2(pa[ii] - pb[jj])
				if conflict&(1<<jj) != 0 {
					d = inf
				}
				cost[ii][jj] = d
				if d < best {
					best, bj = d, jj
				}
			}
			perm[ii] = int8(bj)
			usedB |= 1 << bj
		}
		if na != nbr || usedB != usedA {
			// The nearest partners are not a one-to-one map: greedy matching on
			// the cost, cheapest pair first.
			usedA, usedB = 0, 0
			for step := min(na, nbr); step > 0; step-- {
				best, bi, bj := inf, -1, -1
				for ii := 0; ii < na; ii++ {
					if usedA&(1<<ii) != 0 {
						continue
					}
					for jj := 0; jj < nbr; jj++ {
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
		}
		for ii := 0; ii < na; ii++ {
			if usedA&(1<<ii) != 0 {
				inv[perm[ii]] = int8(ii)
			}
		}
		// The matching must be unambiguous: each root's partner clearly nearer
		// than any rival root at b, unless exchanging the two partners changes
		// nothing (both a-roots spurious, or both b-roots spurious). Otherwise the
		// roots moved too far for the sampling and the interval must be bisected.
		for ii := 0; ii < na && !broken; ii++ {
			if usedA&(1<<ii) == 0 {
				continue
			}
			j := int(perm[ii])
			d1 := 4 * cost[ii][j]
			for jj := 0; jj < nbr; jj++ {
				if jj == j || usedB&(1<<jj) == 0 || d1 <= cost[ii][jj] {
					continue
				}
				ii2 := inv[jj]
				if (imgA&(1<<ii) == 0 && imgA&(1<<ii2) == 0) || (imgB&(1<<j) == 0 && imgB&(1<<jj) == 0) {
					continue
				}
				broken = true
				break
			}
		}
	}
matched:
	var die, born [2]int
	nd, nb := 0, 0
	h2 := h * h
	for k := 0; k < na; k++ {
		if usedA&(1<<k) == 0 {
			continue
		}
		j := int(perm[k])
		a.perm[k] = int8(j)
		ta, tb := imgA&(1<<k) != 0, imgB&(1<<j) != 0
		switch {
		case ta && tb:
			za, zb := a.r.z[k], b.r.z[j]
			sa := posA&(1<<k) != 0
			if sa != (posB&(1<<j) != 0) {
				// Parity flipped along a track: round-off at a critical
				// curve. Keep the chord with the parity at a.
				broken = true
				seg := 0.5 * fsCross(za, zb)
				if !sa {
					seg = -seg
				}
				a.area += seg
				continue
			}
			a.track |= 1 << k
			ua, ub := a.dz[k], b.dz[j]
			seg, e := ctSegment(za, zb, ua, ub, a.d2z[k], b.d2z[j], a.pc[k], b.pc[j], h)
			a.rule[k] = ctRuleTheta
			want := uint8(ctRuleAll)
			if rules != nil {
				want = rules[k]
			}
			if e <= c.negl || want == ctRuleTheta {
				// Already negligible, or the θ rule won on the whole
				// interval: no need for a better rule.
			} else if s2, e2, r, ok := c.branchSegment(a, b, k, j, h, want); ok && e2 < e {
				seg, e = s2, e2
				a.rule[k] = r
			}
			if e >= 0 && e < inf {
				a.err += e
			} else {
				broken = true
			}
			// An image that moved far more than its derivatives allow was
			// not followed (it swept round a lens or jumped between
			// tracks): the interval is unresolved.
			if dd := fsAbs2(zb - za); dd > 9*h2*max(fsAbs2(ua), fsAbs2(ub))+1e-30 {
				broken = true
			}
			if !sa {
				seg = -seg
			}
			a.area += seg
		case ta:
			if nd < 2 {
				die[nd] = k
			}
			nd++
		case tb:
			if nb < 2 {
				born[nb] = j
			}
			nb++
		}
	}
	// Creation and destruction come in pairs of opposite parity. Anything
	// else (an image and a spurious root exchanging labels next to a critical
	// curve, or a pair of each) is kept as continuing tracks, the image end
	// giving the parity, and the interval is bisected.
	if nd == 2 && nb == 0 && (posA>>die[0])&1 == (posA>>die[1])&1 ||
		nb == 2 && nd == 0 && (posB>>born[0])&1 == (posB>>born[1])&1 ||
		(nd > 0 && nb > 0) || nd == 1 || nb == 1 || nd > 2 || nb > 2 {
		broken = true
		for k := 0; k < na; k++ {
			j := a.perm[k]
			if j < 0 || (imgA>>k)&1 == (imgB>>j)&1 {
				continue
			}
			seg := 0.5 * fsCross(a.r.z[k], b.r.z[j])
			pos := posB&(1<<j) != 0
			if imgA&(1<<k) != 0 {
				pos = posA&(1<<k) != 0
			}
			if !pos {
				seg = -seg
			}
			a.area += seg
		}
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
		if ar2, e2, ok := ctFoldJoin(a, p, q, -1); ok && e2 < e {
			ar, e = ar2, e2
		}
		e += ctStale(a.r.z[p]-a.r.z[q], a.dz[p], a.dz[q], -h)
		a.area += ar
		a.err += e
		a.jerr += e
	}
	if nb == 2 {
		// Creation inside (a, b): the − image comes from the critical curve
		// and leaves as the + image.
		p, q := born[0], born[1]
		if b.r.det[p] < b.r.det[q] {
			p, q = q, p
		}
		ar, e := ctJoin(b.r.z[q], b.dz[q], b.r.z[p], b.dz[p], b.r.det[p]-b.r.det[q])
		if ar2, e2, ok := ctFoldJoin(b, q, p, 1); ok && e2 < e {
			ar, e = ar2, e2
		}
		e += ctStale(b.r.z[p]-b.r.z[q], b.dz[p], b.dz[q], h)
		a.area += ar
		a.err += e
		a.jerr += e
	}
	a.clean = !broken
	if broken {
		a.err += bad*h + c.local(a, b)
	}
	if !(a.err < ctHugeErr) || a.area-a.area != 0 {
		// Non-finite terms (roots at round-off from a lens or a critical
		// curve): keep the running totals of disk finite.
		a.area, a.err, a.jerr, a.clean = 0, ctHugeErr, 0, false
	}
}

// ctHugeErr is the error charged to an interval whose terms are not finite.
const ctHugeErr = 1e200

// ctSegment is the oriented area ½∫Im(z̄ dz) of an image track from za to zb
// over a parameter step h, from the end values, first derivatives ua, ub and
// second derivatives va, vb (pca, pcb = Im(conj(u)·v) at the ends), and its
// estimated error.
//
// The value is the exact area of the quintic Hermite interpolant of the end
// data (the polynomial matching z, ż and z̈ at both ends). Its error is
// estimated by comparing it with the Taylor rule below (trapezoid, Bozza's
// parabolic correction and the h⁵ term), which uses the same data to one
// order less: on the near-caustic benchmark points (ρ = 1e-3, q = 1e-3,
// s = 1.2, disks next to the central caustic) the difference is within a
// factor two of the Taylor rule's own true error on most segments (median
// ratio 0.98, measured against 64-step sub-integration) while the Hermite
// area's true error is ~13× smaller (median). Far from that asymptotic
// regime the difference can vanish by accident (on one segment in ten it was
// below half the Taylor rule's true error, and next to a branch point it fell
// below the Hermite area's own error, TestBranchPair), so the Taylor rule's
// estimate, which assumes nothing about convergence, is kept as a floor
// scaled by max(ctHermiteFloor, min(1, ρ²)), with ρ the ratio of the h⁵ to
// the h³ term: all of it where the expansion does not converge, a tenth
// where it clearly does. The reference table (3,040 rows, image-plane brute
// force) stays within 0.501·tol.
func ctSegment(za, zb, ua, ub, va, vb complex128, pca, pcb, h float64) (seg, e float64) {
	seg5, e5, ratio := ctTaylor(za, zb, ua, ub, va, vb, pca, pcb, h)
	// Σ w_km Im(conj(d_k) d_m) over the data d = (za, h·ua, h²·va, h²·vb,
	// h·ub, zb) with w_km = ½∫₀¹(H_k H_m′ − H_m H_k′)dt for the quintic
	// Hermite basis H_k (exact rationals), gathered so that only the
	// trapezoid depends on the origin.
	h2 := h * h
	dz := za - zb
	seg = 0.5*fsCross(za, zb) +
		(11.0/84)*h*fsCross(dz, ua-ub) + (1.0/84)*h2*fsCross(dz, va+vb) - (13.0/420)*h2*fsCross(ua, ub) +
		h2*h*((1.0/1008)*(fsCross(ua, va)-fsCross(vb, ub))+(13.0/5040)*(fsCross(ua, vb)-fsCross(va, ub))) +
		(1.0/5040)*h2*h2*fsCross(va, vb)
	f := 1.0 // also for ratio NaN (0/0 on a straight track)
	if ratio < 1 {
		f = max(ctHermiteFloor, ratio*ratio)
	}
	return seg, max(math.Abs(seg-seg5), f*e5)
}

// ctHermiteFloor is the smallest fraction of the Taylor rule's estimate
// charged to a segment (see ctSegment). Measured: with 0.03 instead, the
// smallest ratio of estimated to true error on the near-caustic benchmark
// points fell from 3.8 to 1.1 for one sample less (median).
const ctHermiteFloor = 0.1

// ctTaylor is the Taylor rule of ctSegment: the segment area from the
// trapezoid, the parabolic correction and the h⁵ term, its estimated error,
// and the ratio of the h⁵ to the h³ term (≥ 1: the expansion does not
// converge).
func ctTaylor(za, zb, ua, ub, va, vb complex128, pca, pcb, h float64) (seg, e, ratio float64) {
	// Trapezoid plus the parabolic correction of Bozza (2010), then
	// the next order, derived here by expanding the exact segment
	// area about the midpoint (c_n the n-th derivative of z there):
	// exact − Bozza = −(h⁵/240)[2 Im(c̄₁c₄) + 3 Im(c̄₂c₃)] + O(h⁷),
	// with c₁, c₂ the end means of ż, z̈, c₃ = (z̈_b − z̈_a)/h and
	// c₄ = −12(ż_b − ż_a − h c₂)/h³ from the end derivatives.
	h2 := h * h
	h3 := h2 * h
	ap := h3 / 24 * (pca + pcb)
	c1 := (ua + ub) * 0.5
	c2 := (va + vb) * 0.5
	c3h := vb - va
	c4h3 := -12 * (ub - ua - complex(h, 0)*c2)
	e5 := -(h2 / 240) * (2*fsCross(c1, c4h3) + 3*h2*fsCross(c2, c3h))
	seg = 0.5*fsCross(za, zb) + ap + e5
	// Error: after the h⁵ term the next is estimated as the h⁵ term times
	// its ratio to the h³ term (a geometric series; where it does not
	// converge, ratio ≥ 1, the h⁵ term itself is charged). Both terms are
	// areas, cross products of derivatives, and are taken with their two
	// parts not allowed to cancel: |2Im(c̄₁c₄)| + 3|Im(c̄₂c₃)|. Along a
	// nearly straight stretch of track (an arc stretched along a critical
	// curve) the derivatives are nearly parallel and the true error is as
	// small as these cross products; the bound without any cancellation,
	// 2|c₁||c₄| + 3|c₂||c₃|, runs ~100× above it there. A cross product
	// can vanish by accident where the next order does not, so a tenth of
	// that bound is the floor (ctCrossFloor). Measured on the 3,040 rows
	// of the reference table (finite_table_test.go, image-plane brute
	// force) with this rule as the value: every true error at most
	// 0.4·tol with the contour asked for tol itself; the bound alone
	// needed tol/3 for 0.92·tol and 17 % more samples on the near-caustic
	// benchmark points.
	e5abs := (h2 / 240) * (2*math.Sqrt(fsAbs2(c1)*fsAbs2(c4h3)) + 3*h2*math.Sqrt(fsAbs2(c2)*fsAbs2(c3h)))
	e5x := (h2 / 240) * (2*math.Abs(fsCross(c1, c4h3)) + 3*h2*math.Abs(fsCross(c2, c3h)))
	ab := math.Abs(h3) / 24 * (math.Abs(pca) + math.Abs(pcb))
	ratio = e5x / ab
	if e5abs < ab {
		e5abs *= e5abs / ab
	}
	e = e5x
	if e5x < ab {
		e *= e5x / ab
	}
	e = max(e, ctCrossFloor*e5abs) // both finite or +Inf here; NaN is caught by the caller
	return seg, e, ratio
}

// Next to a caustic the θ-expansion of ctSegment converges slowly: an image
// track near a fold crossing at θc behaves as z ≈ zc + c√(θc − θ), whose
// θ-derivatives diverge at θc, and a boundary passing close to a caustic
// without crossing it has branch points of the same kind off the real axis,
// at a distance of the order of √(miss distance / r). In a parameter w in
// which z(w) is smooth the same rule converges as it does far from caustics,
// and the area ½∫Im(z̄ dz) does not depend on the parameter. For a lone
// square-root branch point ż/(2z̈) = θ* − θ, which each sample records per
// image (tau), read from the end of the interval nearer the branch point
// (larger |ż|):
//
//   - θ* on the real axis (a crossing just outside the interval): θ = θc ± w²,
//     in which z(w) is analytic;
//   - θ* = x* + iy* off the axis by at most a quarter of the interval (a
//     larger y* leaves the map nearly linear): θ = x* + y*·sinh w,
//     in which both √(θ − θ*) and √(θ − θ̄*) are analytic within π/2 of the
//     real w axis whatever y*.
//
// Off the axis the branch points come in conjugate pairs, for which ż/(2z̈)
// locates them only roughly; a poor θ* merely makes the w rule's estimate
// larger. ctBranchSegment returns the better of the two by their error
// estimates, which are those of ctSegment in w; the caller keeps the θ rule
// when its own estimate is smaller. The branch point is trusted only within
// ctBranchReach intervals: beyond that the θ rule does as well.
//
// Measured on the near-caustic benchmark points (ρ = 1e-3 within 2ρ of a
// fold or cusp, tol 1e-3): median boundary samples 64 → 48 (q = 1e-3) and
// 57 → 31 (equal masses), with the same smallest ratio of estimated to true
// error (TestBranchSegment checks both rules against quadrature).

const (
	ctBranchReach = 4   // branch points farther than this many intervals are ignored
	ctFoldSlack   = 0.3 // |Im τ| ≤ ctFoldSlack·|Re τ|: a crossing on the real axis
)

// ctTau is ż/(2z̈), the offset θ* − θ of a square-root branch point of the
// track (0 if z̈ = 0).
func ctTau(zp, zpp complex128) complex128 {
	a2 := fsAbs2(zpp)
	if a2 == 0 {
		return 0
	}
	return zp * fsConj(zpp) * complex(0.5/a2, 0)
}

// ctNearBranch reads the branch point of the track from root k at a to root
// j at b from its end nearer to it (larger |ż|): τ = ż/(2z̈) there and that
// end's θ; near is false when the branch point lies farther than
// ctBranchReach intervals.
func ctNearBranch(a, b *ctSample, k, j int, h float64) (tau complex128, th float64, near bool) {
	tau, th = a.tau[k], a.th
	if fsAbs2(b.dz[j]) > fsAbs2(a.dz[k]) {
		tau, th = b.tau[j], a.th+h
	}
	return tau, th, math.Abs(real(tau)) <= ctBranchReach*h
}

// ctBranchSegment integrates the track from root k at a to root j at b
// (interval length h) in a parameter adapted to a nearby square-root branch
// point; ok is false when there is none.
func ctBranchSegment(a, b *ctSample, k, j int, h float64) (seg, e float64, rule uint8, ok bool) {
	tau, th, near := ctNearBranch(a, b, k, j, h)
	if !near {
		return 0, 0, 0, false
	}
	tha, thb := a.th, a.th+h
	xs, ys := th+real(tau), math.Abs(imag(tau))
	e = math.Inf(1)
	if ys <= ctFoldSlack*math.Abs(real(tau)) && (xs > thb || xs < tha) {
		// θ = xs + sg·w², w ≥ 0
		sg := 1.0
		if xs > thb {
			sg = -1
		}
		wa, wb := math.Sqrt(math.Abs(tha-xs)), math.Sqrt(math.Abs(thb-xs))
		seg, e = ctReparam(a, b, k, j, wb-wa, 2*sg*wa, 2*sg*wb, 2*sg, 2*sg)
		rule, ok = ctRuleFold, true
	}
	if ys > 0 && ys <= h/4 {
		// w_b − w_a = asinh(x_b√(1+x_a²) − x_a√(1+x_b²)), x = (θ − x*)/y*:
		// one asinh instead of two.
		xa, xb := (tha-xs)/ys, (thb-xs)/ys
		ca, cb := math.Sqrt(1+xa*xa), math.Sqrt(1+xb*xb)
		s2, e2 := ctReparam(a, b, k, j, math.Asinh(xb*ca-xa*cb), ys*ca, ys*cb, tha-xs, thb-xs)
		if e2 < e {
			seg, e, rule = s2, e2, ctRuleMiss
		}
		ok = true
	}
	return seg, e, rule, ok
}

// Segment rules of a track (ctSample.rule). The two halves of a bisected
// interval try the rule that won on the whole first, and only it: the branch
// point a rule adapts to is the same for the halves. This saves most of the
// rule trials (5–8 % of the time on the near-caustic benchmark points, one
// sample more in the median); an estimate left larger can only cost samples.
const (
	ctRuleTheta = iota // θ itself (ctSegment)
	ctRuleFold         // θ = θc ± w² (ctBranchSegment)
	ctRuleMiss         // θ = x* + y*·sinh w (ctBranchSegment)
	ctRulePair         // θ = θ1 + (θ2 − θ1)·sin²φ (contour.branchSegment)
	ctRuleAll   = 255  // not known: try every rule
)

// branchSegment is ctBranchSegment, and for an interval between two
// consecutive caustic crossings θ1 < θ2 of the boundary (c.cross), the
// double square-root map θ = θ1 + (θ2 − θ1)·sin²φ, in which
// √((θ − θ1)(θ2 − θ)) = (θ2 − θ1)·sin φ·cos φ is analytic: the tracks of a
// pair of images created at θ1 and destroyed at θ2, which near a cusp lie
// close together. The better estimate wins, as in ctBranchSegment. On the
// near-caustic benchmark points (q = 1e-3) median samples 41 → 38.
func (c *contour) branchSegment(a, b *ctSample, k, j int, h float64, want uint8) (seg, e float64, rule uint8, ok bool) {
	e = math.Inf(1)
	if want != ctRulePair {
		seg, e, rule, ok = ctBranchSegment(a, b, k, j, h)
		if !ok {
			e = math.Inf(1)
		}
	}
	if want != ctRulePair && want != ctRuleAll {
		return seg, e, rule, ok
	}
	if _, _, near := ctNearBranch(a, b, k, j, h); len(c.cross) < 2 || !near {
		return seg, e, rule, ok
	}
	tha, thb := a.th, a.th+h
	n := len(c.cross)
	for i := 0; i < n; i++ {
		t1 := c.cross[i]
		t2 := c.cross[(i+1)%n]
		if i+1 == n {
			t2 += 2 * math.Pi
		}
		for _, sh := range [2]float64{0, 2 * math.Pi} {
			x1, x2 := t1+sh, t2+sh
			if !(x1 < tha && thb < x2) {
				continue
			}
			L := x2 - x1
			// u = sin²φ; sin 2φ = 2√(u(1−u)), cos 2φ = 1 − 2u, and
			// φ_b − φ_a = asin(√(u_b(1−u_a)) − √(u_a(1−u_b))) (< π/2).
			ua, ub := (tha-x1)/L, (thb-x1)/L
			sa, sb := math.Sqrt(ua*(1-ua)), math.Sqrt(ub*(1-ub))
			hphi := math.Asin(math.Sqrt(ub*(1-ua)) - math.Sqrt(ua*(1-ub)))
			s2, e2 := ctReparam(a, b, k, j, hphi, 2*L*sa, 2*L*sb, 2*L*(1-2*ua), 2*L*(1-2*ub))
			if e2 < e {
				seg, e, rule, ok = s2, e2, ctRulePair, true
			}
		}
	}
	return seg, e, rule, ok
}

// ctReparam is ctSegment for the track from root k at a to root j at b in a
// parameter w of step hw, given dθ/dw (ta, tb) and d²θ/dw² (sa, sb) at the
// ends.
func ctReparam(a, b *ctSample, k, j int, hw, ta, tb, sa, sb float64) (seg, e float64) {
	ua, ub := a.dz[k]*complex(ta, 0), b.dz[j]*complex(tb, 0)
	va := a.d2z[k]*complex(ta*ta, 0) + a.dz[k]*complex(sa, 0)
	vb := b.d2z[j]*complex(tb*tb, 0) + b.dz[j]*complex(sb, 0)
	return ctSegment(a.r.z[k], b.r.z[j], ua, ub, va, vb, fsCross(ua, va), fsCross(ub, vb), hw)
}

// local bounds what a wrong matching or a dropped track can cost in the
// interval from a to b: for each matched root pair involving an image, its
// move times (its move plus its distance to the nearest other root), the area
// of the small polygon by which a different routing of the tracks would
// differ. Broken intervals keep best-guess terms (see interval), so that the
// image boundaries stay closed and this local bound holds.
func (c *contour) local(a, b *ctSample) float64 {
	sum := 0.0
	for k := 0; k < a.r.n; k++ {
		j := a.perm[k]
		if j < 0 || (!a.r.isImg(k) && !b.r.isImg(int(j))) {
			continue
		}
		za := a.r.z[k]
		near := math.Inf(1)
		for i := 0; i < a.r.n; i++ {
			if i != k {
				near = math.Min(near, fsAbs2(a.r.z[i]-za))
			}
		}
		dz := fsAbs(b.r.z[j] - za)
		sum += dz * (dz + math.Sqrt(near))
	}
	return sum
}

// ctFresh checks that a pair of images a fold created (h > 0) or is about to
// destroy (h < 0) within |h| of θ is young: at a fold the separation grows like
// L ∝ √|θ − θc|, so dL/dθ = L/(2(θ − θc)) has the sign of h and puts θc
// within the interval (allowing a factor 2 for the departure from the square
// root). A pair that instead converges came from a creation long before and is
// about to be destroyed again (the boundary clipped a caustic between the
// samples): joining it through the critical curve would leave out its whole
// track.
func ctFresh(d, dd complex128, h float64) bool {
	l2 := fsAbs2(d)
	rate := real(dd)*real(d) + imag(dd)*imag(d) // L·dL/dθ
	if h < 0 {
		rate, h = -rate, -h
	}
	// θ − θc = L²/(2 L dL/dθ) ≤ 2h
	return rate > 0 && l2 <= 4*h*rate
}

// ctStale is the error charged to a join whose pair (separation d, θ-velocities
// up and uq) is not young by ctFresh: the pair may have swept a loop since it
// was created, of an area up to the square of the way it can have travelled in
// the interval plus its separation. Bisection then brings its creation point
// next to a sample. A young pair is charged nothing here (ctJoin charges the
// parabola).
func ctStale(d, up, uq complex128, h float64) float64 {
	if ctFresh(d, up-uq, h) {
		return 0
	}
	l := math.Abs(h)*(fsAbs(up)+fsAbs(uq)) + fsAbs(d)
	return l * l
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

// ctFoldJoin is the join of ctJoin through the critical curve computed as
// one track: next to the fold crossing at θc the two images of the pair are
// the two branches z(±w) of one smooth curve in w = √|θ − θc| (see
// ctBranchSegment), so the path from root from to root to of sample s runs
// from w = −w₀ to w₀ and ctSegment integrates it with its error estimate.
// θc comes from the pair's separation L, which grows like √|θ − θc|:
// θ − θc = L²/(2L·dL/dθ). sg is +1 for a pair created before s (θ > θc),
// −1 for one destroyed after it; ok is false when the separation does not
// say so.
func ctFoldJoin(s *ctSample, from, to int, sg float64) (area, errEst float64, ok bool) {
	d := s.r.z[to] - s.r.z[from]
	dd := s.dz[to] - s.dz[from]
	rate := real(d)*real(dd) + imag(d)*imag(dd) // L·dL/dθ
	delta := fsAbs2(d) / (2 * rate)             // θ − θc
	if !(delta*sg > 0) || math.IsInf(delta, 0) {
		return 0, 0, false
	}
	// The same from each image's own square-root shape (ctTau): the two
	// must agree, and the change of the area between them is charged.
	delta2 := -0.5 * (real(s.tau[from]) + real(s.tau[to]))
	if !(delta2*sg > 0) {
		return 0, 0, false
	}
	area, errEst = ctFoldPath(s, from, to, sg, delta)
	a2, e2 := ctFoldPath(s, from, to, sg, delta2)
	return area, math.Max(errEst, e2) + math.Abs(a2-area), true
}

func ctFoldPath(s *ctSample, from, to int, sg, delta float64) (area, errEst float64) {
	// θ = θc + sg·w² from w = −w₀ (root from) to w₀ (root to), both roots
	// of the one sample s.
	w0 := math.Sqrt(math.Abs(delta))
	return ctReparam(s, s, from, to, 2*w0, -2*sg*w0, 2*sg*w0, 2*sg, 2*sg)
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
