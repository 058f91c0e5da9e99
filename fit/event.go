package fit

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"lensbook/lens"
)

// BlendMode says how a dataset's blend flux fb is determined.
type BlendMode int

const (
	// BlendFree solves fs and fb by weighted linear least squares (the default).
	BlendFree BlendMode = iota
	// BlendNonNegative is BlendFree, but when the free solution has fb < 0 the
	// fit is repeated with fb = 0 (the constrained least-squares optimum then lies
	// on the boundary because χ² is a convex quadratic in (fs, fb)).
	BlendNonNegative
	// BlendFixed holds fb at Blend.Fb and solves fs alone.
	BlendFixed
)

func (b BlendMode) String() string {
	switch b {
	case BlendFree:
		return "free"
	case BlendNonNegative:
		return "nonnegative"
	case BlendFixed:
		return "fixed"
	}
	return fmt.Sprintf("BlendMode(%d)", int(b))
}

// MarshalText encodes the mode by name.
func (b BlendMode) MarshalText() ([]byte, error) { return []byte(b.String()), nil }

// UnmarshalText decodes "free", "nonnegative" or "fixed".
func (b *BlendMode) UnmarshalText(t []byte) error {
	for _, v := range []BlendMode{BlendFree, BlendNonNegative, BlendFixed} {
		if v.String() == string(t) {
			*b = v
			return nil
		}
	}
	return fmt.Errorf("fit: unknown blend mode %q", t)
}

// Blend is the blend-flux rule of one dataset. The zero value solves fb freely.
type Blend struct {
	Mode BlendMode `json:"mode"`
	Fb   float64   `json:"fb"` // blend flux for BlendFixed (dataset flux units)
}

// Mask excludes data from the fit: the listed point indices and every point
// whose time falls in one of the ranges. Masks are kept in Event.Masks so the
// notebook shows exactly what was excluded and why.
type Mask struct {
	Dataset int          `json:"dataset"` // index into Event.Datasets
	Points  []int        `json:"points"`  // 0-based point indices
	Ranges  [][2]float64 `json:"ranges"`  // closed time intervals [t1, t2] (full JD)
	Reason  string       `json:"reason"`
}

// Event is the input of every fitting step: the datasets and the model
// conventions shared by all of them.
type Event struct {
	Name     string     `json:"name"`
	Datasets []*Dataset `json:"datasets"`
	// Blend holds one rule per dataset; nil or missing entries mean BlendFree.
	Blend []Blend `json:"blend"`
	// Ref is the reference point of t0 and u0. The zero value is lens's
	// CentreOfMass; NewEvent sets CentralCaustic, the choice for binary fits
	// because close/wide partners then share t0 and u0 (see lens.Reference).
	Ref lens.Reference `json:"ref"`
	// Tol is the relative accuracy of finite-source magnifications; 0 means
	// lens.DefaultTol.
	Tol float64 `json:"tol"`
	// Masks records every exclusion applied with Event.Mask.
	Masks []Mask `json:"masks"`
	// Coords is the event's sky position (ICRS degrees), needed for annual
	// parallax; nil when unknown (see parallax.go).
	Coords *Coords `json:"coords,omitempty"`
	// TRef is the reference epoch t0,par of parallax and orbital motion (full
	// JD), fixed during fits; 0 means the t0 of the starting solution (see
	// SetDefaultTRef).
	TRef float64 `json:"tref,omitempty"`
	// Observers holds, per dataset, the ephemeris of an observatory away from
	// the Earth (nil or missing entries: ground-based; see ObserverTable).
	Observers []*ObserverTable `json:"observers,omitempty"`
}

// ErrNoData reports an event without usable points.
var ErrNoData = errors.New("fit: no data points to fit")

// NewEvent returns an Event of the datasets with the central-caustic reference point.
func NewEvent(name string, ds ...*Dataset) *Event {
	return &Event{Name: name, Datasets: ds, Ref: lens.CentralCaustic}
}

// BlendOf returns the blend rule of dataset i.
func (e *Event) BlendOf(i int) Blend {
	if i < len(e.Blend) {
		return e.Blend[i]
	}
	return Blend{}
}

// Validate checks the datasets: equal slice lengths, finite values, positive
// uncertainties, and at least 3 used points in all (enough for fs, fb and one
// nonlinear parameter).
func (e *Event) Validate() error {
	if len(e.Datasets) == 0 {
		return ErrNoData
	}
	used := 0
	for k, d := range e.Datasets {
		if d == nil {
			return fmt.Errorf("fit: dataset %d is nil", k)
		}
		n := len(d.T)
		if len(d.Flux) != n || len(d.Err) != n || (d.Masked != nil && len(d.Masked) != n) {
			return fmt.Errorf("fit: dataset %q: slices T, Flux, Err, Masked differ in length", d.Name)
		}
		if d.ErrScale < 0 || d.ErrFloor < 0 || math.IsNaN(d.ErrScale) || math.IsNaN(d.ErrFloor) {
			return fmt.Errorf("fit: dataset %q: error scale %v and floor %v must be >= 0", d.Name, d.ErrScale, d.ErrFloor)
		}
		for i := 0; i < n; i++ {
			if !d.Used(i) {
				continue
			}
			if !isFinite(d.T[i]) || !isFinite(d.Flux[i]) || !(d.Err[i] > 0) || math.IsInf(d.Err[i], 0) {
				return fmt.Errorf("fit: dataset %q point %d (line %d): time %v, flux %v, uncertainty %v must be finite with uncertainty > 0",
					d.Name, i, lineOf(d, i), d.T[i], d.Flux[i], d.Err[i])
			}
			used++
		}
		if b := e.BlendOf(k); b.Mode == BlendFixed && !isFinite(b.Fb) {
			return fmt.Errorf("fit: dataset %q: fixed blend flux %v is not finite", d.Name, b.Fb)
		}
	}
	if used < 3 {
		return ErrNoData
	}
	if e.Tol < 0 || math.IsNaN(e.Tol) {
		return fmt.Errorf("fit: tolerance %v must be >= 0", e.Tol)
	}
	return nil
}

// Mask applies m: it marks the points in the dataset's Masked slice and records m
// in e.Masks. An index out of range or a reversed time range is an error and
// changes nothing. It returns the number of points newly masked.
func (e *Event) Mask(m Mask) (int, error) {
	if m.Dataset < 0 || m.Dataset >= len(e.Datasets) {
		return 0, fmt.Errorf("fit: mask: dataset index %d out of range [0, %d)", m.Dataset, len(e.Datasets))
	}
	d := e.Datasets[m.Dataset]
	for _, i := range m.Points {
		if i < 0 || i >= d.Len() {
			return 0, fmt.Errorf("fit: mask: point %d out of range [0, %d) in dataset %q", i, d.Len(), d.Name)
		}
	}
	for _, r := range m.Ranges {
		if !(r[0] <= r[1]) {
			return 0, fmt.Errorf("fit: mask: time range [%v, %v] is reversed or not a number", r[0], r[1])
		}
	}
	if d.Masked == nil {
		d.Masked = make([]bool, d.Len())
	}
	n := 0
	mark := func(i int) {
		if !d.Masked[i] {
			d.Masked[i] = true
			n++
		}
	}
	for _, i := range m.Points {
		mark(i)
	}
	for _, r := range m.Ranges {
		for i, t := range d.T {
			if t >= r[0] && t <= r[1] {
				mark(i)
			}
		}
	}
	e.Masks = append(e.Masks, m)
	return n, nil
}

// Unmask clears every mask of dataset k (or of all datasets when k < 0) and
// drops the matching records.
func (e *Event) Unmask(k int) {
	keep := e.Masks[:0]
	for _, m := range e.Masks {
		if k >= 0 && m.Dataset != k {
			keep = append(keep, m)
		}
	}
	e.Masks = keep
	for i, d := range e.Datasets {
		if k < 0 || i == k {
			d.Masked = nil
		}
	}
}

// TimeRange returns the first and last used time over all datasets.
func (e *Event) TimeRange() (t1, t2 float64) {
	t1, t2 = math.Inf(1), math.Inf(-1)
	for _, d := range e.Datasets {
		for i, t := range d.T {
			if d.Used(i) {
				t1 = math.Min(t1, t)
				t2 = math.Max(t2, t)
			}
		}
	}
	return t1, t2
}

// NumUsed returns the number of points that take part in the fit.
func (e *Event) NumUsed() int {
	n := 0
	for _, d := range e.Datasets {
		for i := range d.T {
			if d.Used(i) {
				n++
			}
		}
	}
	return n
}

func isFinite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func lineOf(d *Dataset, i int) int {
	if i < len(d.Line) {
		return d.Line[i]
	}
	return 0
}

// medianInPlace returns the median of x (x is reordered).
func medianInPlace(x []float64) float64 {
	if len(x) == 0 {
		return math.NaN()
	}
	sort.Float64s(x)
	n := len(x)
	if n%2 == 1 {
		return x[n/2]
	}
	return 0.5 * (x[n/2-1] + x[n/2])
}
