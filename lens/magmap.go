package lens

// STUB FILE owned by the binary-lens helper: replace every body; keep the signatures.

// Rect is an axis-aligned rectangle of the source plane (θE).
type Rect struct{ X0, Y0, X1, Y1 float64 }

// MagMap fills dst (length nx·ny, row-major, row 0 at Y0) with the point-source
// magnification of b at pixel centres over r. It panics if len(dst) != nx*ny.
func MagMap(dst []float32, b Binary, r Rect, nx, ny int) error { return nil }
