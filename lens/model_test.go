package lens

import (
	"errors"
	"math"
	"math/cmplx"
	"strings"
	"testing"
)

func validModel() Model {
	return Model{Params: Params{T0: 2461000, U0: 0.1, TE: 25, S: 1.2, Q: 1e-3, Alpha: 0.7}}
}

// TestValidate: every invalid parameter is named in an error wrapping
// ErrParams (the bad-input list: s ≤ 0, q ≤ 0 for a binary, ρ < 0,
// NaN anywhere, tE ≤ 0; plus the limb-darkening and tolerance domains).
func TestValidate(t *testing.T) {
	m := validModel()
	if err := m.Validate(); err != nil {
		t.Fatalf("valid model: %v", err)
	}
	single := Model{Params: Params{T0: 1, U0: 0.1, TE: 10}}
	if err := single.Validate(); err != nil {
		t.Fatalf("single lens with S = Q = 0: %v", err)
	}
	nan := math.NaN()
	for _, c := range []struct {
		name string
		set  func(*Model)
	}{
		{"tE", func(m *Model) { m.TE = 0 }},
		{"tE", func(m *Model) { m.TE = -3 }},
		{"rho", func(m *Model) { m.Rho = -1e-3 }},
		{"q", func(m *Model) { m.Q = -1 }},
		{"s", func(m *Model) { m.S = 0 }},
		{"s", func(m *Model) { m.S = -1 }},
		{"limb darkening", func(m *Model) { m.LD = 1.5 }},
		{"limb darkening", func(m *Model) { m.LD = -0.1 }},
		{"tolerance", func(m *Model) { m.Tol = -1 }},
		{"t0", func(m *Model) { m.T0 = nan }},
		{"u0", func(m *Model) { m.U0 = math.Inf(1) }},
		{"alpha", func(m *Model) { m.Alpha = nan }},
		{"piEN", func(m *Model) { m.PiEN = nan }},
		{"ds/dt", func(m *Model) { m.DsDt = nan }},
		{"dalpha/dt", func(m *Model) { m.DAlphaDt = nan }},
		{"tref", func(m *Model) { m.TRef = math.Inf(-1) }},
	} {
		m := validModel()
		c.set(&m)
		err := m.Validate()
		if err == nil || !errors.Is(err, ErrParams) || !strings.Contains(err.Error(), c.name) ||
			!strings.HasPrefix(err.Error(), "lens: ") {
			t.Errorf("%s: err = %v", c.name, err)
		}
		// LightCurve refuses the same model.
		if err := LightCurve(make([]float64, 1), &m, []float64{m.T0}, nil); !errors.Is(err, ErrParams) {
			t.Errorf("%s: LightCurve err = %v", c.name, err)
		}
	}
}

// TestTrajectory checks the convention of the design page and the package doc:
// ζ(t) = c + τ(cos α, sin α) + u0(−sin α, cos α), τ = (t − t0)/tE.
func TestTrajectory(t *testing.T) {
	m := validModel()
	for _, alpha := range []float64{0, math.Pi / 2, 2.3, -1} {
		m.Alpha = alpha
		for _, tau := range []float64{-1.5, 0, 0.4} {
			g := m.At(m.T0+tau*m.TE, Offset{})
			sn, cs := math.Sincos(alpha)
			want := complex(tau*cs-m.U0*sn, tau*sn+m.U0*cs)
			if cmplx.Abs(g.Zeta-want) > 1e-14 || g.S != m.S || g.Q != m.Q {
				t.Errorf("α=%v τ=%v: %v, want %v", alpha, tau, g, want)
			}
		}
	}
	// α = 0: the source moves along +x, passing at y = u0.
	m.Alpha = 0
	if g := m.At(m.T0+m.TE, Offset{}); cmplx.Abs(g.Zeta-complex(1, m.U0)) > 1e-15 {
		t.Errorf("α = 0: %v", g.Zeta)
	}
	// α = π/2: along +y, passing at x = −u0.
	m.Alpha = math.Pi / 2
	if g := m.At(m.T0+m.TE, Offset{}); cmplx.Abs(g.Zeta-complex(-m.U0, 1)) > 1e-15 {
		t.Errorf("α = π/2: %v", g.Zeta)
	}
}

// TestOrbitalMotion: s and α change linearly in time about TRef (per Julian
// year of 365.25 d, the unit of the Params doc).
func TestOrbitalMotion(t *testing.T) {
	m := validModel()
	m.DsDt, m.DAlphaDt, m.TRef = 0.3, -0.5, m.T0+10
	g := m.At(m.TRef+365.25, Offset{})
	if math.Abs(g.S-(m.S+0.3)) > 1e-12 {
		t.Errorf("s after one year: %v", g.S)
	}
	// At t = TRef the geometry is the static one; one year later the source
	// direction has rotated by DAlphaDt: |ζ| is unchanged, its angle is not.
	m2 := m
	m2.DsDt, m2.DAlphaDt = 0, 0
	g0, g1 := m.At(m.TRef, Offset{}), m2.At(m.TRef, Offset{})
	if g0 != g1 {
		t.Errorf("at TRef: %v vs %v", g0, g1)
	}
	tt := m.T0 + 365.25 + 10
	ga, gb := m.At(tt, Offset{}), m2.At(tt, Offset{})
	if math.Abs(cmplx.Abs(ga.Zeta)-cmplx.Abs(gb.Zeta)) > 1e-12 {
		t.Errorf("|ζ| changed by the rotation: %v vs %v", ga.Zeta, gb.Zeta)
	}
	if d := cmplx.Phase(ga.Zeta / gb.Zeta); math.Abs(d-(-0.5)) > 1e-12 {
		t.Errorf("rotation %v, want −0.5", d)
	}
	// TRef = 0 means T0.
	m.TRef = 0
	if g := m.At(m.T0, Offset{}); g.S != m.S {
		t.Errorf("TRef = 0: s(t0) = %v", g.S)
	}
}

// TestModelParallaxShift checks the sign convention stated in Model.At:
// δτ = πE·Δs, δβ = πE,N·ΔsE − πE,E·ΔsN (Gould 2004, ApJ 606, 319; the sign of
// δβ is the project's choice, references.md §8).
func TestModelParallaxShift(t *testing.T) {
	m := validModel()
	m.Alpha = 0
	m.PiEN, m.PiEE = 0.2, -0.1
	off := Offset{N: 0.5, E: 0.3}
	g0 := m.At(m.T0, Offset{})
	g := m.At(m.T0, off)
	dtau := 0.2*0.5 + (-0.1)*0.3
	dbeta := 0.2*0.3 - (-0.1)*0.5
	if d := g.Zeta - g0.Zeta; cmplx.Abs(d-complex(dtau, dbeta)) > 1e-15 {
		t.Errorf("parallax shift %v, want (%v, %v)", d, dtau, dbeta)
	}
}

// TestReferencePoint: the central-caustic reference sits at the same offset
// from the primary for s and 1/s (m2·s from the primary for s ≤ 1, the centre
// of mass; m2/s for s > 1), which is what lets close and wide partners share
// t0 and u0 (Griest & Safizadeh 1998; Dominik 1999).
func TestReferencePoint(t *testing.T) {
	for _, q := range []float64{1e-4, 1e-3, 0.05} {
		for _, s := range []float64{0.5, 0.8, 0.95} {
			close, wide := Binary{S: s, Q: q}, Binary{S: 1 / s, Q: q}
			zc, _, _, _ := close.Lenses()
			zw, _, _, _ := wide.Lenses()
			oc := ReferencePoint(CentralCaustic, s, q) - complex(zc, 0)
			ow := ReferencePoint(CentralCaustic, 1/s, q) - complex(zw, 0)
			if cmplx.Abs(oc-ow) > 1e-15 {
				t.Errorf("q=%v s=%v: offsets from the primary %v (close) vs %v (wide)", q, s, oc, ow)
			}
		}
	}
	if ReferencePoint(CentreOfMass, 2, 0.1) != 0 || ReferencePoint(CentralCaustic, 0.7, 0.1) != 0 ||
		ReferencePoint(CentralCaustic, 2, 0) != 0 {
		t.Error("reference point defaults")
	}
	if CentreOfMass.String() != "centre-of-mass" || CentralCaustic.String() != "central-caustic" {
		t.Error("Reference names")
	}
	// A model with the central-caustic reference passes at u0 from that point.
	m := validModel()
	m.S, m.Ref = 1.5, CentralCaustic
	c := ReferencePoint(CentralCaustic, m.S, m.Q)
	if g := m.At(m.T0, Offset{}); math.Abs(cmplx.Abs(g.Zeta-c)-m.U0) > 1e-15 {
		t.Errorf("closest approach %v from c, want u0 = %v", cmplx.Abs(g.Zeta-c), m.U0)
	}
}
