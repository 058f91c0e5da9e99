// Package lens is the physics of lensbook: point and binary gravitational lenses,
// their images, magnification, caustics and critical curves, finite sources, the
// source trajectory and light curves. It does no I/O and knows nothing of files,
// JSON or browsers; callers in package fit and the wasm shells translate.
//
// # Conventions
//
// Lengths in the lens and source planes are in units of the angular Einstein
// radius θE of the total lens mass. Positions are complex numbers x + iy.
//
// Binary lens frame: the binary axis lies on the real axis with the centre of mass
// at the origin. The primary (mass fraction m1 = 1/(1+q)) sits at z1 = −qs/(1+q),
// the secondary (m2 = q/(1+q)) at z2 = +s/(1+q). q = m2/m1 and s is the projected
// separation. The lens equation is ζ = z − m1/(z̄ − z1) − m2/(z̄ − z2) (Witt 1990,
// A&A 236, 311).
//
// Source trajectory: ζ(t) = c + τ·(cos α, sin α) + u0·(−sin α, cos α) with
// τ = (t − t0)/tE and c the reference point (centre of mass by default, see
// Reference). Angles are radians inside Go.
//
// Annual parallax (Gould 2004, ApJ 606, 319, geocentric formalism): the
// trajectory is shifted by δτ = πE·Δs and δβ = πE×Δs = πE,N·ΔsE − πE,E·ΔsN, where
// Δs(t) is the Sun's position seen from Earth projected on the sky in (N, E)
// components (AU) minus its value and velocity at the reference epoch t0,par (see
// ParallaxOffsets and Model.At). Read on the sky, the model frame has x towards
// north and y towards east, so α is measured from north through east, and u0 > 0
// means the source passes the reference point on the side reached by turning the
// direction of motion from north towards east. TestParallaxGeometry builds an
// event from its physical geometry and pins this sign.
//
// Source size: ρ = θ*/θE. Limb darkening follows the linear law
// I(μ)/I(1) = 1 − u(1 − μ); we store the coefficient u and convert to the
// flux-normalised Γ = 2u/(3 − u) where a formula needs Γ (derived from ⟨μ⟩ = 2/3
// over the disk; the Γ form is the one of Yoo et al. 2004, ApJ 603, 139).
//
// Times are full Julian dates as read from the data; the time system is a label
// kept by package fit.
//
// # Errors and special values
//
// Low-level formula functions (PointMag, DiskMag, …) follow the standard library:
// they return NaN outside their documented domain and never panic. The model-level
// API (Model.Validate, LightCurve, NewBinary) returns errors whose text starts
// with "lens:". The only panics are for destination slices of the wrong length, a
// programmer mistake, and each such function says so.
package lens
