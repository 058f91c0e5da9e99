package fit

import (
	"fmt"
	"math"
	"sort"

	"lensbook/lens"
)

// ObserverTable is the ephemeris of an observatory away from the Earth (a
// spacecraft), so that its data get their own parallax offsets. Positions are
// of the observatory relative to the Earth's centre, in AU, in ICRS (J2000
// equatorial) axes — the frame the user states by choosing this type; tables
// in other frames must be rotated first. Times are full Julian dates in the
// time system of the dataset.
//
// In the geocentric formalism (Gould 2004, ApJ 606, 319) the Sun as seen from
// the observatory is the Sun as seen from the Earth minus the observatory's
// geocentric position r, so its offset is Δs_obs(t) = Δs⊕(t) − r⊥(t), with r⊥
// the projection of r on the sky (north, east); the reference terms at t0,par
// stay the Earth's, so one πE and one t0, u0, tE describe every observatory.
// Positions between table rows come from 4-point Lagrange interpolation
// (cubic; exact for positions cubic in time over the four rows).
type ObserverTable struct {
	Name string    `json:"name"`
	T    []float64 `json:"t"` // full JD, strictly increasing, ≥ 4 rows
	X    []float64 `json:"x"` // AU, ICRS axes, relative to the Earth's centre
	Y    []float64 `json:"y"`
	Z    []float64 `json:"z"`
}

// Validate checks lengths, finiteness and increasing times.
func (o *ObserverTable) Validate() error {
	n := len(o.T)
	if len(o.X) != n || len(o.Y) != n || len(o.Z) != n {
		return fmt.Errorf("fit: observatory %q: columns t, x, y, z differ in length (%d, %d, %d, %d)", o.Name, n, len(o.X), len(o.Y), len(o.Z))
	}
	if n < 4 {
		return fmt.Errorf("fit: observatory %q: %d rows, need at least 4 for interpolation", o.Name, n)
	}
	for i := 0; i < n; i++ {
		if !isFinite(o.T[i]) || !isFinite(o.X[i]) || !isFinite(o.Y[i]) || !isFinite(o.Z[i]) {
			return fmt.Errorf("fit: observatory %q: row %d is not finite", o.Name, i+1)
		}
		if i > 0 && !(o.T[i] > o.T[i-1]) {
			return fmt.Errorf("fit: observatory %q: row %d time %v does not increase (previous %v)", o.Name, i+1, o.T[i], o.T[i-1])
		}
	}
	return nil
}

// Position returns the interpolated geocentric position (AU) at time t, or an
// error when t lies outside the table.
func (o *ObserverTable) Position(t float64) ([3]float64, error) {
	n := len(o.T)
	if n < 4 || !(t >= o.T[0] && t <= o.T[n-1]) {
		var lo, hi float64 = math.NaN(), math.NaN()
		if n > 0 {
			lo, hi = o.T[0], o.T[n-1]
		}
		return [3]float64{}, fmt.Errorf("fit: observatory %q: time %v outside its ephemeris [%v, %v]", o.Name, t, lo, hi)
	}
	j := sort.SearchFloat64s(o.T, t) - 2 // rows j..j+3 around t
	j = max(0, min(j, n-4))
	var out [3]float64
	for a := j; a < j+4; a++ {
		w := 1.0
		for b := j; b < j+4; b++ {
			if b != a {
				w *= (t - o.T[b]) / (o.T[a] - o.T[b])
			}
		}
		out[0] += w * o.X[a]
		out[1] += w * o.Y[a]
		out[2] += w * o.Z[a]
	}
	return out, nil
}

// DatasetOffsets returns the parallax offsets of dataset k of e at the given
// times for t0,par = tref: the Earth's (ParallaxOffsets) minus the projected
// position of the dataset's observatory when e.Observers names one.
func (e *Event) DatasetOffsets(k int, times []float64, tref float64) ([]lens.Offset, error) {
	off, err := e.ParallaxOffsets(times, tref)
	if err != nil || off == nil {
		return off, err
	}
	if k < 0 || k >= len(e.Observers) || e.Observers[k] == nil {
		return off, nil
	}
	o := e.Observers[k]
	if err := o.Validate(); err != nil {
		return nil, err
	}
	north, east := skyAxes(*e.Coords)
	for i, t := range times {
		r, err := o.Position(t)
		if err != nil {
			return nil, fmt.Errorf("%w (dataset %d)", err, k)
		}
		off[i].N -= dot3(r, north)
		off[i].E -= dot3(r, east)
	}
	return off, nil
}
