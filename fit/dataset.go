package fit

import (
	"math"
	"strconv"
)

// Dataset is the photometry of one telescope in one band, in flux units.
// All slices have the same length, one entry per accepted data point; rows the
// parser rejected are listed in Rejected with their line and reason, never dropped
// silently.
type Dataset struct {
	Name       string  // user's name for the dataset (telescope, site)
	Band       string  // photometric band label, e.g. "I"
	TimeSystem string  // label such as "HJD-UTC" or "BJD-TDB"; set by the user
	ZeroPoint  float64 // magnitude zero point ZP in m = ZP − 2.5 log10 F
	LD         float64 // linear limb-darkening coefficient u for this band (0 = uniform)

	T    []float64 // full Julian date of each point (days)
	Flux []float64 // flux in the units implied by ZeroPoint
	Err  []float64 // 1σ flux uncertainty as read (before renormalisation)
	Line []int     // 1-based line number in the source file of each point

	// Masked marks points the user excluded from the fit (nil means none).
	Masked []bool

	// ErrScale k and ErrFloor e_min (magnitudes) renormalise uncertainties as
	// σ' = k·√(σ² + (e_min·F·ln10/2.5)²); k == 0 means 1 (no renormalisation).
	ErrScale, ErrFloor float64

	// Source records where the data came from: file name and any problems found.
	Source Provenance
}

// Provenance is where a dataset came from and what the parser did with it.
type Provenance struct {
	File     string    // file name as given by the user
	Rejected []Problem // rows not accepted, each with its line and reason
	Notes    []string  // non-fatal observations (ignored columns, proposed time offset)

	// Lines accounts for every line of the source file (see LineCount).
	Lines LineCount
	// Options are the import choices the user confirmed (columns, kind, time
	// offset, zero point), kept so the same file can be re-read identically,
	// e.g. when a model link asks for the data again.
	Options ImportOptions
}

// Problem is one issue found in an input file.
type Problem struct {
	File   string
	Line   int    // 1-based; 0 when the problem concerns the whole file
	Column int    // 1-based field index; 0 when not specific to a field
	Reason string // human-readable, e.g. "uncertainty must be > 0"
}

func (p Problem) Error() string {
	s := p.File
	if p.Line > 0 {
		s += ":" + strconv.Itoa(p.Line)
	}
	if p.Column > 0 {
		s += ":" + strconv.Itoa(p.Column)
	}
	return "fit: " + s + ": " + p.Reason
}

// Len is the number of points.
func (d *Dataset) Len() int { return len(d.T) }

// Sigma returns the renormalised uncertainty of point i (see ErrScale).
func (d *Dataset) Sigma(i int) float64 {
	s := d.Err[i]
	if d.ErrScale == 0 {
		return s
	}
	if d.ErrFloor != 0 {
		f := d.ErrFloor * math.Abs(d.Flux[i]) * math.Ln10 / 2.5
		s = math.Sqrt(s*s + f*f)
	}
	return d.ErrScale * s
}

// Used reports whether point i takes part in the fit (not masked).
func (d *Dataset) Used(i int) bool { return d.Masked == nil || !d.Masked[i] }

// Mag converts a flux to magnitude with the dataset's zero point.
func (d *Dataset) Mag(f float64) float64 { return d.ZeroPoint - 2.5*math.Log10(f) }

// FluxOf converts a magnitude to flux with the dataset's zero point.
func (d *Dataset) FluxOf(m float64) float64 { return math.Pow(10, 0.4*(d.ZeroPoint-m)) }
