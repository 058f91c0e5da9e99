package lens

// multipole is the quadrupole and hexadecapole finite-source approximation of
// Gould (2008, ApJ 681, 1593), derived independently with limb darkening by
// Pejcha & Heyrovsky (2009, ApJ 690, 1772), in the 13-point form of
// references.md §7 [G08], [PH09]:
//
//	A_{r,+} = ¼ Σ_j A(w + r·i^j) − A₀, A_{r,×} the same rotated by 45°,
//	A₂ρ² = (16 A_{ρ/2,+} − A_{ρ,+})/3,  A₄ρ⁴ = (A_{ρ,+} + A_{ρ,×})/2 − A₂ρ²,
//	A_quad = A₀ + (A₂ρ²/2)(1 − Γ/5),  A_hex = A_quad + (A₄ρ⁴/3)(1 − 11Γ/35),
//
// with Γ the flux-normalised linear limb-darkening coefficient (GammaFromLD).
type multipole struct {
	quad, hex float64 // A_quad and A_hex
	q, h      float64 // the quadrupole and hexadecapole terms: quad = A₀+q, hex = quad+h
	// sameCount reports that all 12 outer stencil points have as many images
	// as the centre: no caustic cuts through the stencil.
	sameCount bool
}

// stencil offsets (units of ρ): ρ·i^j, (ρ/2)·i^j, ρ·e^{iπ/4}·i^j.
var mpOffsets = [12]complex128{
	1, 1i, -1, -1i,
	0.5, 0.5i, -0.5, -0.5i,
	complex(0.7071067811865476, 0.7071067811865476), complex(-0.7071067811865476, 0.7071067811865476),
	complex(-0.7071067811865476, -0.7071067811865476), complex(0.7071067811865476, -0.7071067811865476),
}

// mpCount is the number of true images in r.
func mpCount(r *fsRoots) int {
	n := 0
	for k := 0; k < r.n; k++ {
		if r.isImg(k) {
			n++
		}
	}
	return n
}

// computeMultipole evaluates the 12 outer stencil points around zeta, warm
// started from the central roots r0 whose magnification is a0.
func computeMultipole(l *fsLens, r0 *fsRoots, zeta complex128, rho, gamma, a0 float64) (multipole, bool) {
	var a [12]float64
	var r fsRoots
	n0 := mpCount(r0)
	same := true
	for k, o := range mpOffsets {
		if !l.solve(&r, zeta+o*complex(rho, 0), &r0.z) {
			return multipole{}, false
		}
		a[k] = r.mag()
		if mpCount(&r) != n0 {
			same = false
		}
	}
	plus := (a[0]+a[1]+a[2]+a[3])/4 - a0
	half := (a[4]+a[5]+a[6]+a[7])/4 - a0
	cross := (a[8]+a[9]+a[10]+a[11])/4 - a0
	a2 := (16*half - plus) / 3
	a4 := (plus+cross)/2 - a2
	m := multipole{sameCount: same}
	m.q = a2 / 2 * (1 - gamma/5)
	m.h = a4 / 3 * (1 - 11*gamma/35)
	m.quad = a0 + m.q
	m.hex = m.quad + m.h
	return m, true
}
