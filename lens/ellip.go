package lens

import "math"

// cel is Bulirsch's general complete elliptic integral
//
//	cel(kc, p, a, b) = ∫₀^{π/2} (a cos²θ + b sin²θ) / ((cos²θ + p sin²θ) √(cos²θ + kc² sin²θ)) dθ
//
// for kc > 0 and p > 0, computed by the arithmetic–geometric-mean iteration of
// Bulirsch (1969, Numer. Math. 13, 305, "Numerical calculation of elliptic
// integrals and elliptic functions. III", algorithm cel). With the parameter
// m = 1 − kc² of the usual notation,
//
//	K(m)   = cel(kc, 1, 1, 1)
//	E(m)   = cel(kc, 1, 1, kc²)
//	Π(n|m) = cel(kc, 1−n, 1, 1)
//
// and, cel being linear in (a, b), any combination αE + βK is one call. Passing
// kc and p instead of m and n lets callers supply the complements 1−m and 1−n
// from exact expressions, which is what keeps the finite-source formula accurate
// near u = ρ (see DiskMag).
//
// The iteration converges quadratically; stopping when the AGM pair agrees to
// celTol (≈ √ε) leaves an error near machine precision, as Bulirsch prescribes
// (tolerance 10^(−D/2) for D digits).
func cel(kc, p, a, b float64) float64 {
	const celTol = 1.5e-8
	e := kc
	m := 1.0
	p = math.Sqrt(p)
	b /= p
	for {
		f := a
		a += b / p
		g := e / p
		b += f * g
		b += b
		p += g
		g = m
		m += kc
		if math.Abs(g-kc) <= g*celTol {
			break
		}
		kc = 2 * math.Sqrt(e)
		e = kc * m
	}
	return math.Pi / 2 * (b + a*m) / (m * (m + p))
}
