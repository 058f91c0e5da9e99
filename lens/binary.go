package lens

import (
	"errors"
	"math"
)

// STUB FILE owned by the binary-lens helper: replace every body; keep the signatures.

// Binary is a two-point-mass lens in the frame of the package doc.
type Binary struct {
	S, Q float64
}

// NewBinary validates s and q (both finite, > 0).
func NewBinary(s, q float64) (Binary, error) { return Binary{S: s, Q: q}, nil }

// Image is one image of a point source.
type Image struct {
	Z   complex128 // position in the lens plane (θE)
	Mag float64    // signed magnification 1/det J (negative parity < 0)
}

// ErrImages reports that the images found are not a valid set (count not 3 or 5).
var ErrImages = errors.New("lens: binary image count is not 3 or 5")

// Solver finds the images of a binary lens; it keeps the previous roots to warm
// start the next source position (reuse one Solver along a trajectory).
// A Solver is not safe for concurrent use.
type Solver struct {
	b Binary
}

// NewSolver returns a solver for b.
func NewSolver(b Binary) *Solver { return &Solver{b: b} }

// SetBinary changes the lens (orbital motion) keeping the warm start.
func (s *Solver) SetBinary(b Binary) { s.b = b }

// Reset forgets the warm start.
func (s *Solver) Reset() {}

// Images appends the true images of source position zeta to dst[:0].
func (s *Solver) Images(dst []Image, zeta complex128) ([]Image, error) { return dst[:0], nil }

// Mag is the point-source magnification at zeta: Σ|Mag| over the true images.
func (s *Solver) Mag(zeta complex128) (float64, error) { return math.NaN(), nil }
