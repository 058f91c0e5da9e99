package lens

import "math"

// STUB FILE owned by the single-lens helper: replace every body; keep the signatures.

// PointMag is the point-source point-lens magnification A(u) = (u²+2)/(u√(u²+4))
// (Paczynski 1986, ApJ 304, 1). +Inf at u = 0; NaN for u < 0 or NaN.
func PointMag(u float64) float64 { return math.NaN() }

// DiskMag is the exact magnification of a uniform disk of radius rho centred at
// distance u from a point lens (Witt & Mao 1994, ApJ 430, 505).
func DiskMag(u, rho float64) float64 { return math.NaN() }

// LimbDiskMag is DiskMag for a linearly limb-darkened disk with coefficient ld (u law).
func LimbDiskMag(u, rho, ld float64) float64 { return math.NaN() }

// SingleMag is the magnification of a single lens for a source of radius rho
// (0 = point) with limb darkening ld, choosing the cheapest method that meets the
// relative accuracy tol.
func SingleMag(u, rho, ld, tol float64) float64 { return math.NaN() }

// GammaFromLD converts the linear-law coefficient u to the flux-normalised Γ.
func GammaFromLD(u float64) float64 { return 2 * u / (3 - u) }

// LDFromGamma converts Γ back to the linear-law coefficient u.
func LDFromGamma(g float64) float64 { return 3 * g / (2 + g) }
