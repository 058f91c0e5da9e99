package lens

// STUB FILE owned by the finite-source binary helper: replace every body; keep the signatures.

// Method says how a finite-source magnification was computed.
type Method int

const (
	PointSource Method = iota
	Quadrupole
	Hexadecapole
	Contour
)

// Finite is a finite-source magnification with its estimated error.
type Finite struct {
	Mag    float64
	Err    float64 // estimated absolute error of Mag
	Method Method
}

// FiniteMag is the magnification of a source of radius rho at zeta with linear
// limb darkening ld, to relative accuracy tol (0 means DefaultTol).
func (s *Solver) FiniteMag(zeta complex128, rho, ld, tol float64) (Finite, error) {
	m, err := s.Mag(zeta)
	return Finite{Mag: m, Method: PointSource}, err
}
