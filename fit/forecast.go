package fit

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
)

// DrawCurve computes the model of one posterior draw x at times: the
// magnification into amp and, for each dataset d, the model magnitude
// ZP_d − 2.5 log10(fs_d·A + fb_d) into mags[d] (fluxes solved against the data
// for that draw). Every slice has len(times).
type DrawCurve func(amp []float64, mags [][]float64, x, times []float64) error

// ImageCounter returns the number of point-source images of draw x's source
// centre at time t (3 or 5 for a binary lens). The count changes exactly when
// the source centre crosses a caustic, which is how forecasts find crossings.
type ImageCounter func(x []float64, t float64) (int, error)

// ForecastSettings configure Forecast.
type ForecastSettings struct {
	T1, T2 float64 // time range (full JD), T1 < T2
	// Points is the number of grid times in [T1, T2]; 0 means 2000. Features
	// shorter than the grid step (T2−T1)/(Points−1) can be missed: a pair of
	// crossings within one step leaves the image count unchanged.
	Points int
	// Now: the next peak and caustic crossing are searched in (Now, T2]; 0 means T1.
	Now float64
	// Prominence is the smallest relative rise of a magnification maximum above
	// the higher of the minima on either side for it to count as a peak (so that
	// the finite-source integration's numerical ripple is not a peak); 0 means 0.01.
	Prominence float64
	// Progress, when set, is called after each draw with the number of draws
	// done and the total (for a progress bar); it must not block.
	Progress func(done, total int) `json:"-"`
}

// TimeDistribution summarises the posterior of an event time over draws.
type TimeDistribution struct {
	Median, Lower, Upper float64 // quantiles over draws that have the event (NaN if none)
	Fraction             float64 // fraction of draws with the event in (Now, T2]
}

// Forecast is a model light curve with its posterior band, and the posterior
// of the next peak and next caustic crossing after Now.
type Forecast struct {
	Times []float64
	// Amp is the median magnification over draws; AmpLower and AmpUpper the
	// LowerQuantile and UpperQuantile at each time.
	Amp, AmpLower, AmpUpper []float64
	// Mag[d], MagLower[d], MagUpper[d]: dataset d's model magnitude, same quantiles.
	Mag, MagLower, MagUpper [][]float64
	Draws                   int
	Now                     float64
	// NextPeak and NextCrossing hold, per draw, the time of the first
	// magnification peak and caustic crossing after Now (NaN when there is none
	// up to T2). NextCrossing is nil without an ImageCounter.
	NextPeak, NextCrossing []float64
	Peak, Crossing         TimeDistribution
	// Method states how peaks and crossings were found, for display.
	Method []string
	// Warnings: points where the image count could not be decided, etc.
	Warnings []string
}

// ErrForecast reports unusable forecast settings.
var ErrForecast = errors.New("fit: forecast")

// ForecastCurves evaluates curve for every draw on a uniform grid of [T1, T2]
// and returns the pointwise posterior band and the distribution of the next
// peak and crossing. A cancelled context returns the error of ctx.
//
// Peaks: a grid maximum of the magnification (strictly above its left
// neighbour, not below its right one) whose rise above the higher of the
// lowest points on either side, searched until the curve exceeds it, is at
// least Prominence times its value; its time is refined by the parabola
// through the three grid points. Crossings: the source centre's point-source
// image count is evaluated at every grid time after Now; where it changes, the
// time is bisected to 10⁻⁶ d. With a finite source the light curve starts to
// rise about ρ·tE/sin(angle to the caustic) before the centre's crossing.
func ForecastCurves(ctx context.Context, draws [][]float64, curve DrawCurve, images ImageCounter, nData int, set ForecastSettings) (*Forecast, error) {
	if len(draws) == 0 {
		return nil, fmt.Errorf("%w: no posterior draws", ErrForecast)
	}
	if !(set.T2 > set.T1) || math.IsInf(set.T1, 0) || math.IsInf(set.T2, 0) {
		return nil, fmt.Errorf("%w: time range [%v, %v] is empty or not finite", ErrForecast, set.T1, set.T2)
	}
	if set.Points == 0 {
		set.Points = 2000
	}
	if set.Points < 3 {
		return nil, fmt.Errorf("%w: %d grid points, need ≥ 3", ErrForecast, set.Points)
	}
	if set.Now == 0 {
		set.Now = set.T1
	}
	if set.Prominence == 0 {
		set.Prominence = 0.01
	}
	n := set.Points
	times := make([]float64, n)
	for i := range times {
		times[i] = set.T1 + (set.T2-set.T1)*float64(i)/float64(n-1)
	}
	nd := len(draws)
	amps := make([]float64, nd*n)
	mags := make([][]float64, nData)
	for d := range mags {
		mags[d] = make([]float64, nd*n)
	}
	f := &Forecast{Times: times, Draws: nd, Now: set.Now, NextPeak: make([]float64, nd)}
	if images != nil {
		f.NextCrossing = make([]float64, nd)
	}
	row := make([][]float64, nData)
	undecided := 0
	for k, x := range draws {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		for d := range row {
			row[d] = mags[d][k*n : (k+1)*n]
		}
		a := amps[k*n : (k+1)*n]
		if err := curve(a, row, x, times); err != nil {
			return nil, fmt.Errorf("fit: forecast draw %d: %w", k, err)
		}
		f.NextPeak[k] = nextPeak(times, a, set.Now, set.Prominence)
		if images != nil {
			t, bad := nextCrossing(x, times, set.Now, images)
			f.NextCrossing[k] = t
			undecided += bad
		}
		if set.Progress != nil {
			set.Progress(k+1, nd)
		}
	}
	f.Amp, f.AmpLower, f.AmpUpper = pointwiseBand(amps, nd, n)
	f.Mag, f.MagLower, f.MagUpper = make([][]float64, nData), make([][]float64, nData), make([][]float64, nData)
	for d := range nData {
		f.Mag[d], f.MagLower[d], f.MagUpper[d] = pointwiseBand(mags[d], nd, n)
	}
	f.Peak = timeDistribution(f.NextPeak)
	f.Method = []string{
		fmt.Sprintf("band: %.2f, 50 and %.2f %% quantiles over %d posterior draws at each of %d times", 100*LowerQuantile, 100*UpperQuantile, nd, n),
		fmt.Sprintf("peak: first grid maximum of the magnification after now with a prominence of at least %g of its value, refined by a parabola through three grid points", set.Prominence),
	}
	if images != nil {
		f.Crossing = timeDistribution(f.NextCrossing)
		f.Method = append(f.Method, "caustic crossing: first change of the point-source image count of the source centre after now, bisected to 1e-6 d; grid step "+fmt.Sprintf("%.4g d", times[1]-times[0])+": crossing pairs closer than a step are missed")
	} else {
		f.Crossing = TimeDistribution{Median: math.NaN(), Lower: math.NaN(), Upper: math.NaN()}
		f.Method = append(f.Method, "caustic crossing: not searched (single lens, no caustic)")
	}
	if undecided > 0 {
		f.Warnings = append(f.Warnings, fmt.Sprintf("the image count could not be decided at %d grid times (source within round-off of a caustic); those times were skipped", undecided))
	}
	return f, nil
}

// pointwiseBand returns the median and the ±1σ-equivalent quantiles over the
// nd rows of v (row-major nd × n) at each column; non-finite values are left out.
func pointwiseBand(v []float64, nd, n int) (med, lo, hi []float64) {
	med, lo, hi = make([]float64, n), make([]float64, n), make([]float64, n)
	col := make([]float64, 0, nd)
	for i := range n {
		col = col[:0]
		for k := range nd {
			if x := v[k*n+i]; !math.IsNaN(x) && !math.IsInf(x, 0) {
				col = append(col, x)
			}
		}
		slices.Sort(col)
		med[i], lo[i], hi[i] = sortedQuantile(col, 0.5), sortedQuantile(col, LowerQuantile), sortedQuantile(col, UpperQuantile)
	}
	return med, lo, hi
}

func timeDistribution(t []float64) TimeDistribution {
	var have []float64
	for _, v := range t {
		if !math.IsNaN(v) {
			have = append(have, v)
		}
	}
	slices.Sort(have)
	return TimeDistribution{Median: sortedQuantile(have, 0.5), Lower: sortedQuantile(have, LowerQuantile),
		Upper: sortedQuantile(have, UpperQuantile), Fraction: float64(len(have)) / float64(len(t))}
}

// nextPeak returns the time of the first prominent maximum of a after now (NaN if none).
func nextPeak(t, a []float64, now, prom float64) float64 {
	n := len(a)
	for i := 1; i < n-1; i++ {
		if t[i] <= now || !(a[i] > a[i-1] && a[i] >= a[i+1]) {
			continue
		}
		// Prominence: lowest point on each side before the curve exceeds a[i].
		lmin, rmin := a[i], a[i]
		for j := i - 1; j >= 0 && a[j] <= a[i]; j-- {
			lmin = min(lmin, a[j])
		}
		j := i + 1
		for ; j < n && a[j] <= a[i]; j++ {
			rmin = min(rmin, a[j])
		}
		if j == n && a[n-1] == a[i] {
			continue // plateau reaching the end: not a peak inside the window
		}
		if a[i]-max(lmin, rmin) < prom*a[i] {
			continue
		}
		h := t[1] - t[0]
		den := a[i-1] - 2*a[i] + a[i+1]
		if den >= 0 {
			return t[i]
		}
		return t[i] + h*(a[i-1]-a[i+1])/(2*den)
	}
	return math.NaN()
}

// nextCrossing returns the first time after now where the image count changes
// (NaN if none) and the number of grid times whose count was undecided.
func nextCrossing(x, t []float64, now float64, images ImageCounter) (float64, int) {
	bad := 0
	prevT, prevN := math.NaN(), 0
	for _, ti := range t {
		if ti < now {
			continue
		}
		ni, err := images(x, ti)
		if err != nil {
			bad++
			continue
		}
		if !math.IsNaN(prevT) && ni != prevN {
			lo, hi := prevT, ti
			for hi-lo > 1e-6 {
				mid := (lo + hi) / 2
				nm, err := images(x, mid)
				if err != nil {
					break
				}
				if nm == prevN {
					lo = mid
				} else {
					hi = mid
				}
			}
			return (lo + hi) / 2, bad
		}
		prevT, prevN = ti, ni
	}
	return math.NaN(), bad
}
