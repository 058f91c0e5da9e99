package lens

// STUB FILE owned by the binary-lens helper: replace every body; keep the signatures.

// Curve is one closed critical curve and its caustic, as ordered polylines.
type Curve struct {
	Critical []complex128 // lens plane
	Caustic  []complex128 // source plane, Caustic[i] is the image of Critical[i]
}

// Topology is the caustic topology of a binary lens.
type Topology int

const (
	Close        Topology = iota + 1 // three caustics: central + two off-axis triangles
	Intermediate                     // one six-cusp (resonant) caustic
	Wide                             // two four-cusp caustics
)

// Caustics returns the closed critical curves and caustics of b sampled at about
// n points per curve (0 means a display density default).
func (b Binary) Caustics(n int) []Curve { return nil }

// Topology classifies b (Erdl & Schneider 1993; Dominik 1999).
func (b Binary) Topology() Topology { return 0 }

// TopologyBoundaries returns the close/intermediate and intermediate/wide
// separations for mass ratio q.
func TopologyBoundaries(q float64) (sClose, sWide float64) { return 0, 0 }
