package lens

import (
	"errors"
	"fmt"
	"math"
)

// Params are the parameters of a single- or binary-lens event. Q == 0 means a
// single lens, in which case S and Alpha only orient the (trivial) frame.
type Params struct {
	T0    float64 // time of closest approach to the reference point (full JD, days)
	U0    float64 // impact parameter relative to the reference point (θE), signed as in the package doc
	TE    float64 // Einstein time (days), > 0
	Rho   float64 // source radius θ*/θE; 0 means a point source
	S     float64 // projected binary separation (θE), > 0 when Q > 0
	Q     float64 // mass ratio m2/m1, 0 for a single lens
	Alpha float64 // direction of source motion relative to the binary axis (radians)

	PiEN float64 // microlens parallax, north component (Gould 2004 geocentric frame)
	PiEE float64 // microlens parallax, east component

	DsDt     float64 // linear change of S (θE per year, Julian year 365.25 d)
	DAlphaDt float64 // linear rotation of the binary axis (radians per year)
}

// Reference selects the point c of the source plane that t0 and u0 refer to.
// The zero value is the centre of mass.
type Reference int

const (
	// CentreOfMass puts c at the binary's centre of mass (the origin).
	CentreOfMass Reference = iota
	// CentralCaustic puts c at the centre of the magnification pattern around the
	// primary: the centre of mass for s ≤ 1 and the primary shifted by m2/s towards
	// the secondary for s > 1. The shift comes from expanding the secondary's
	// deflection to first order about the primary (derived here; it is the constant
	// term of −m2/(z̄ − s) ≈ m2/s). With it, close and wide partners (s ↔ 1/s) share
	// t0 and u0, which the centre-of-mass choice splits.
	CentralCaustic
)

func (r Reference) String() string {
	switch r {
	case CentreOfMass:
		return "centre-of-mass"
	case CentralCaustic:
		return "central-caustic"
	}
	return fmt.Sprintf("Reference(%d)", int(r))
}

// Model is everything needed to compute a light curve: the parameters, the
// reference point, the source's limb darkening and the finite-source accuracy.
type Model struct {
	Params
	Ref Reference
	// LD is the linear limb-darkening coefficient u of the package doc; 0 means a
	// uniform disk. Valid range [0, 1].
	LD float64
	// Tol is the relative accuracy asked of finite-source magnifications; 0 means 1e-3.
	Tol float64
	// TRef is the reference epoch (full JD) of parallax and orbital motion (t0,par);
	// 0 means T0.
	TRef float64
}

// DefaultTol is the finite-source relative accuracy used when Model.Tol is 0
// (common practice for ground-based data: see the package tests).
const DefaultTol = 1e-3

// julianYear is the number of days per year in DsDt and DAlphaDt.
const julianYear = 365.25

// ErrParams reports a model outside its physical domain.
var ErrParams = errors.New("lens: invalid model parameters")

// Validate returns an error naming the first invalid parameter, wrapping ErrParams.
func (m *Model) Validate() error {
	bad := func(name string, v float64, why string) error {
		return fmt.Errorf("%w: %s = %v (%s)", ErrParams, name, v, why)
	}
	fields := []struct {
		name string
		v    float64
	}{{"t0", m.T0}, {"u0", m.U0}, {"tE", m.TE}, {"rho", m.Rho}, {"s", m.S}, {"q", m.Q},
		{"alpha", m.Alpha}, {"piEN", m.PiEN}, {"piEE", m.PiEE}, {"ds/dt", m.DsDt},
		{"dalpha/dt", m.DAlphaDt}, {"limb darkening", m.LD}, {"tolerance", m.Tol}, {"tref", m.TRef}}
	for _, f := range fields {
		if math.IsNaN(f.v) || math.IsInf(f.v, 0) {
			return bad(f.name, f.v, "not finite")
		}
	}
	switch {
	case m.TE <= 0:
		return bad("tE", m.TE, "must be > 0")
	case m.Rho < 0:
		return bad("rho", m.Rho, "must be >= 0")
	case m.Q < 0:
		return bad("q", m.Q, "must be >= 0")
	case m.Q > 0 && m.S <= 0:
		return bad("s", m.S, "must be > 0 for a binary lens")
	case m.LD < 0 || m.LD > 1:
		return bad("limb darkening", m.LD, "linear-law u must lie in [0, 1]")
	case m.Tol < 0:
		return bad("tolerance", m.Tol, "must be >= 0")
	}
	return nil
}

// tol returns the effective finite-source tolerance.
func (m *Model) tol() float64 {
	if m.Tol == 0 {
		return DefaultTol
	}
	return m.Tol
}

// tref returns the effective reference epoch of parallax and orbital motion.
func (m *Model) tref() float64 {
	if m.TRef == 0 {
		return m.T0
	}
	return m.TRef
}

// ReferencePoint returns c for separation s and mass ratio q (see Reference).
func ReferencePoint(ref Reference, s, q float64) complex128 {
	if ref != CentralCaustic || q == 0 || s <= 1 {
		return 0
	}
	m2 := q / (1 + q)
	// primary at −m2·s, shifted by +m2/s towards the secondary.
	return complex(-m2*(s-1/s), 0)
}

// Offset is the annual-parallax displacement of the Sun as seen from the
// observer, projected on the sky and with its position and velocity at the
// reference epoch removed (Gould 2004, ApJ 606, 319): north and east components in AU.
// The zero value means no parallax.
type Offset struct{ N, E float64 }

// Geometry is the lens configuration and source position at one epoch: the binary
// separation and mass ratio at that time, and the source position ζ in the frame
// of the package doc (binary axis on the real axis).
type Geometry struct {
	S, Q float64
	Zeta complex128
}

// At returns the geometry at time t (full JD) for parallax offset off (the zero
// Offset means none). Orbital motion changes s and rotates the binary axis
// linearly in time about TRef; parallax shifts τ and β by
// δτ = πE·Δs and δβ = πE×Δs with πE = (πE,N, πE,E) (Gould 2004, sign fixed here:
// δβ = πE,N·ΔsE − πE,E·ΔsN).
func (m *Model) At(t float64, off Offset) Geometry {
	dt := (t - m.tref()) / julianYear
	s := m.S + m.DsDt*dt
	alpha := m.Alpha + m.DAlphaDt*dt
	tau := (t - m.T0) / m.TE
	beta := m.U0
	if off != (Offset{}) {
		tau += m.PiEN*off.N + m.PiEE*off.E
		beta += m.PiEN*off.E - m.PiEE*off.N
	}
	sin, cos := math.Sincos(alpha)
	c := ReferencePoint(m.Ref, s, m.Q)
	zeta := c + complex(tau*cos-beta*sin, tau*sin+beta*cos)
	return Geometry{S: s, Q: m.Q, Zeta: zeta}
}
