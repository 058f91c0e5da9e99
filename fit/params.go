package fit

import (
	"errors"
	"fmt"
	"math"

	"lensbook/lens"
)

// Param names one model parameter of lens.Params.
type Param int

const (
	T0       Param = iota // time of closest approach to the reference point (full JD, days)
	U0                    // impact parameter (θE)
	TE                    // Einstein time (days)
	Rho                   // source radius θ*/θE
	S                     // binary separation (θE)
	Q                     // mass ratio m2/m1
	Alpha                 // trajectory angle (radians)
	PiEN                  // parallax, north
	PiEE                  // parallax, east
	DsDt                  // ds/dt (θE per Julian year)
	DAlphaDt              // dα/dt (radians per Julian year)

	// NumParams is the number of parameters.
	NumParams
)

var paramNames = [NumParams]string{"t0", "u0", "tE", "rho", "s", "q", "alpha", "piEN", "piEE", "dsdt", "dalphadt"}

// String returns the parameter's short name ("t0", "u0", "tE", "rho", "s", "q",
// "alpha", "piEN", "piEE", "dsdt", "dalphadt"), the names used in JSON and exports.
func (p Param) String() string {
	if p >= 0 && p < NumParams {
		return paramNames[p]
	}
	return fmt.Sprintf("Param(%d)", int(p))
}

// ParseParam returns the Param with the short name s (see Param.String).
func ParseParam(s string) (Param, error) {
	for i, n := range paramNames {
		if n == s {
			return Param(i), nil
		}
	}
	return 0, fmt.Errorf("fit: unknown parameter %q", s)
}

// MarshalText encodes p by its short name.
func (p Param) MarshalText() ([]byte, error) {
	if p < 0 || p >= NumParams {
		return nil, fmt.Errorf("fit: invalid parameter %d", int(p))
	}
	return []byte(paramNames[p]), nil
}

// UnmarshalText decodes a short name.
func (p *Param) UnmarshalText(b []byte) error {
	v, err := ParseParam(string(b))
	if err != nil {
		return err
	}
	*p = v
	return nil
}

// Get returns parameter p of v.
func Get(v *lens.Params, p Param) float64 {
	switch p {
	case T0:
		return v.T0
	case U0:
		return v.U0
	case TE:
		return v.TE
	case Rho:
		return v.Rho
	case S:
		return v.S
	case Q:
		return v.Q
	case Alpha:
		return v.Alpha
	case PiEN:
		return v.PiEN
	case PiEE:
		return v.PiEE
	case DsDt:
		return v.DsDt
	case DAlphaDt:
		return v.DAlphaDt
	}
	panic("fit: invalid Param")
}

// Set sets parameter p of v to x.
func Set(v *lens.Params, p Param, x float64) {
	switch p {
	case T0:
		v.T0 = x
	case U0:
		v.U0 = x
	case TE:
		v.TE = x
	case Rho:
		v.Rho = x
	case S:
		v.S = x
	case Q:
		v.Q = x
	case Alpha:
		v.Alpha = x
	case PiEN:
		v.PiEN = x
	case PiEE:
		v.PiEE = x
	case DsDt:
		v.DsDt = x
	case DAlphaDt:
		v.DAlphaDt = x
	default:
		panic("fit: invalid Param")
	}
}

// Prior is the prior density of one parameter within its bounds.
type Prior int

const (
	// PriorDefault is flat in log10 for rho, s and q and flat in the value for
	// every other parameter (common practice: scale parameters spanning decades
	// get log-uniform priors).
	PriorDefault Prior = iota
	// PriorFlat is uniform in the parameter's value.
	PriorFlat
	// PriorLog is uniform in log10 of the value (the value must be > 0).
	PriorLog
)

func (p Prior) String() string {
	switch p {
	case PriorDefault:
		return "default"
	case PriorFlat:
		return "flat"
	case PriorLog:
		return "log"
	}
	return fmt.Sprintf("Prior(%d)", int(p))
}

// MarshalText encodes the prior by name.
func (p Prior) MarshalText() ([]byte, error) { return []byte(p.String()), nil }

// UnmarshalText decodes "default", "flat" or "log".
func (p *Prior) UnmarshalText(b []byte) error {
	for _, v := range []Prior{PriorDefault, PriorFlat, PriorLog} {
		if v.String() == string(b) {
			*p = v
			return nil
		}
	}
	return fmt.Errorf("fit: unknown prior %q", b)
}

// Spec is the role of one parameter in a fit. The zero value is a fixed
// parameter with default bounds and the default prior.
type Spec struct {
	Free bool `json:"free"`
	// Min and Max bound the parameter (natural units). Min == Max == 0 means the
	// defaults of DefaultBounds.
	Min float64 `json:"min"`
	Max float64 `json:"max"`
	// Prior is the prior density inside [Min, Max]; zero means PriorDefault.
	Prior Prior `json:"prior"`
}

// DefaultBounds returns the bounds used when a Spec leaves them zero. t0 is
// unbounded; the others span generous physical ranges (from memory: the ranges
// published binary-lens events fall in, widened by a decade).
func DefaultBounds(p Param) (lo, hi float64) {
	switch p {
	case T0:
		return math.Inf(-1), math.Inf(1)
	case U0:
		return -10, 10
	case TE:
		return 0.01, 10000
	case Rho:
		return 1e-6, 1
	case S:
		return 0.01, 100
	case Q:
		return 1e-8, 1
	case Alpha:
		return math.Inf(-1), math.Inf(1) // periodic; wrapped into [0, 2π) after fits
	case PiEN, PiEE:
		return -10, 10
	case DsDt, DAlphaDt:
		return -100, 100
	}
	panic("fit: invalid Param")
}

// Specs holds one Spec per parameter; the zero value fixes every parameter.
type Specs struct {
	T0       Spec `json:"t0"`
	U0       Spec `json:"u0"`
	TE       Spec `json:"tE"`
	Rho      Spec `json:"rho"`
	S        Spec `json:"s"`
	Q        Spec `json:"q"`
	Alpha    Spec `json:"alpha"`
	PiEN     Spec `json:"piEN"`
	PiEE     Spec `json:"piEE"`
	DsDt     Spec `json:"dsdt"`
	DAlphaDt Spec `json:"dalphadt"`
}

// At returns a pointer to the Spec of p.
func (s *Specs) At(p Param) *Spec {
	switch p {
	case T0:
		return &s.T0
	case U0:
		return &s.U0
	case TE:
		return &s.TE
	case Rho:
		return &s.Rho
	case S:
		return &s.S
	case Q:
		return &s.Q
	case Alpha:
		return &s.Alpha
	case PiEN:
		return &s.PiEN
	case PiEE:
		return &s.PiEE
	case DsDt:
		return &s.DsDt
	case DAlphaDt:
		return &s.DAlphaDt
	}
	panic("fit: invalid Param")
}

// FreeSpecs returns Specs with the listed parameters free and the others fixed,
// all with default bounds and priors.
func FreeSpecs(free ...Param) Specs {
	var s Specs
	for _, p := range free {
		s.At(p).Free = true
	}
	return s
}

// Free lists the free parameters in Param order.
func (s *Specs) Free() []Param {
	var out []Param
	for p := Param(0); p < NumParams; p++ {
		if s.At(p).Free {
			out = append(out, p)
		}
	}
	return out
}

// Bounds returns the effective bounds of p.
func (s *Specs) Bounds(p Param) (lo, hi float64) {
	sp := s.At(p)
	if sp.Min == 0 && sp.Max == 0 {
		return DefaultBounds(p)
	}
	return sp.Min, sp.Max
}

// IsLog reports whether p's effective prior is flat in log10.
func (s *Specs) IsLog(p Param) bool {
	switch s.At(p).Prior {
	case PriorLog:
		return true
	case PriorFlat:
		return false
	}
	return p == Rho || p == S || p == Q
}

// LogPrior returns the log prior density of v up to a constant: 0 per flat
// parameter, −ln x per log-flat one (uniform in log x means density ∝ 1/x),
// and −Inf when a free parameter lies outside its bounds. Fixed parameters do
// not contribute.
func (s *Specs) LogPrior(v *lens.Params) float64 {
	lp := 0.0
	for p := Param(0); p < NumParams; p++ {
		if !s.At(p).Free {
			continue
		}
		x := Get(v, p)
		lo, hi := s.Bounds(p)
		if !(x >= lo && x <= hi) {
			return math.Inf(-1)
		}
		if s.IsLog(p) {
			if x <= 0 {
				return math.Inf(-1)
			}
			lp -= math.Log(x)
		}
	}
	return lp
}

// Validate checks that bounds are ordered and that log priors have positive
// bounds.
func (s *Specs) Validate() error {
	for p := Param(0); p < NumParams; p++ {
		lo, hi := s.Bounds(p)
		if math.IsNaN(lo) || math.IsNaN(hi) || lo >= hi {
			return fmt.Errorf("fit: parameter %v: bounds [%v, %v] are not an interval", p, lo, hi)
		}
		if s.IsLog(p) && s.At(p).Free && lo <= 0 {
			return fmt.Errorf("fit: parameter %v: log prior needs a lower bound > 0, have %v", p, lo)
		}
	}
	return nil
}

// ErrNoFree reports a fit asked to optimise no parameter.
var ErrNoFree = errors.New("fit: no free parameter")

// Space maps between the vectors an optimiser or sampler works with and
// lens.Params: coordinate i is free parameter Free[i], in log10 for log-flat
// parameters and in natural units otherwise. Fixed parameters take their values
// from Base. A Space is immutable once built and safe for concurrent use.
type Space struct {
	Free  []Param     `json:"free"`
	Base  lens.Params `json:"base"`
	Specs Specs       `json:"specs"`
	isLog []bool
}

// NewSpace builds the Space of specs around base.
func NewSpace(base lens.Params, specs Specs) (*Space, error) {
	if err := specs.Validate(); err != nil {
		return nil, err
	}
	free := specs.Free()
	if len(free) == 0 {
		return nil, ErrNoFree
	}
	sp := &Space{Free: free, Base: base, Specs: specs, isLog: make([]bool, len(free))}
	for i, p := range free {
		sp.isLog[i] = specs.IsLog(p)
		if sp.isLog[i] && Get(&base, p) <= 0 {
			return nil, fmt.Errorf("fit: parameter %v = %v must be > 0 for its log prior", p, Get(&base, p))
		}
	}
	return sp, nil
}

// Dim is the number of free parameters.
func (sp *Space) Dim() int { return len(sp.Free) }

// IsLog reports whether coordinate i is log10 of its parameter.
func (sp *Space) IsLog(i int) bool { return sp.isLog[i] }

// Vector writes the coordinates of v into dst (length Dim) and returns it; a
// nil dst is allocated.
func (sp *Space) Vector(dst []float64, v lens.Params) []float64 {
	if dst == nil {
		dst = make([]float64, len(sp.Free))
	}
	if len(dst) != len(sp.Free) {
		panic("fit: Space.Vector length mismatch")
	}
	for i, p := range sp.Free {
		x := Get(&v, p)
		if sp.isLog[i] {
			x = math.Log10(x)
		}
		dst[i] = x
	}
	return dst
}

// Params returns the parameters at coordinates x (length Dim).
func (sp *Space) Params(x []float64) lens.Params {
	if len(x) != len(sp.Free) {
		panic("fit: Space.Params length mismatch")
	}
	v := sp.Base
	for i, p := range sp.Free {
		xi := x[i]
		if sp.isLog[i] {
			xi = math.Pow(10, xi)
		}
		Set(&v, p, xi)
	}
	return v
}

// InBounds reports whether every coordinate of x lies within its bounds.
func (sp *Space) InBounds(x []float64) bool {
	for i, p := range sp.Free {
		lo, hi := sp.Specs.Bounds(p)
		xi := x[i]
		if sp.isLog[i] {
			xi = math.Pow(10, xi)
		}
		if !(xi >= lo && xi <= hi) {
			return false
		}
	}
	return true
}

// Clamp moves each coordinate of x into its bounds.
func (sp *Space) Clamp(x []float64) {
	for i, p := range sp.Free {
		lo, hi := sp.Specs.Bounds(p)
		if sp.isLog[i] {
			lo, hi = math.Log10(lo), math.Log10(hi)
		}
		x[i] = math.Min(math.Max(x[i], lo), hi)
	}
}

// scale returns a typical step for each coordinate around v: the size of change
// that moves χ² noticeably for a typical event. Optimisers work in units of these
// steps so that every coordinate has a comparable scale.
func (sp *Space) scale(dst []float64, v lens.Params) {
	for i, p := range sp.Free {
		var h float64
		switch p {
		case T0:
			h = 0.05 * v.TE * math.Max(math.Abs(v.U0), 0.01)
		case U0:
			h = 0.05 * math.Max(math.Abs(v.U0), 0.002)
		case TE:
			h = 0.03 * v.TE
		case Rho:
			h = 0.05
		case S:
			h = 0.01
		case Q:
			h = 0.05
		case Alpha:
			h = 0.02
		case PiEN, PiEE:
			h = 0.05
		case DsDt, DAlphaDt:
			h = 0.05
		}
		if sp.isLog[i] {
			switch p {
			case Rho, S, Q:
			default:
				h = 0.05
			}
		} else if p == Rho {
			h = 0.05 * math.Max(v.Rho, 1e-4)
		}
		if !(h > 0) || math.IsInf(h, 0) {
			h = 1e-3
		}
		dst[i] = h
	}
}

// WrapAlpha returns a in [0, 2π).
func WrapAlpha(a float64) float64 {
	a = math.Mod(a, 2*math.Pi)
	if a < 0 {
		a += 2 * math.Pi
	}
	return a
}
