package fit

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"
)

// paczynski is the point-source point-lens magification of references.md §1
// [P86]: A(u) = (u²+2)/(u√(u²+4)).
func paczynski(u float64) float64 { return (u*u + 2) / (u * math.Sqrt(u*u+4)) }

// pacCurve is a DrawCurve for x = (t0, u0, tE) with one dataset of fs = 100,
// fb = 20 and zero point 25.
func pacCurve(amp []float64, mags [][]float64, x, times []float64) error {
	for i, t := range times {
		tau := (t - x[0]) / x[2]
		amp[i] = paczynski(math.Hypot(tau, x[1]))
		mags[0][i] = 25 - 2.5*math.Log10(100*amp[i]+20)
	}
	return nil
}

func TestForecastPeaks(t *testing.T) {
	r := rand.New(rand.NewPCG(8, 8))
	draws := make([][]float64, 400)
	for k := range draws {
		draws[k] = []float64{100 + 0.5*r.NormFloat64(), 0.1, 20}
	}
	f, err := ForecastCurves(context.Background(), draws, pacCurve, nil, 1, ForecastSettings{T1: 80, T2: 120, Points: 801, Now: 90})
	if err != nil {
		t.Fatal(err)
	}
	// The Paczyński curve peaks at t0 exactly; the parabola through grid points
	// 0.05 d apart locates it to much better than the step.
	for k, x := range draws {
		if math.Abs(f.NextPeak[k]-x[0]) > 2e-3 {
			t.Fatalf("draw %d: peak at %v, t0 = %v", k, f.NextPeak[k], x[0])
		}
	}
	// The peak-time distribution is the t0 distribution N(100, 0.5²): median and
	// ±1σ quantiles within 4 standard errors of a quantile of 400 draws
	// (≈ 1.25σ/√n for the median, ≈ 1.4σ/√n for the 16/84 % quantiles).
	se := 0.5 / math.Sqrt(400)
	if math.Abs(f.Peak.Median-100) > 4*1.25*se || math.Abs(f.Peak.Lower-99.5) > 4*1.4*se || math.Abs(f.Peak.Upper-100.5) > 4*1.4*se || f.Peak.Fraction != 1 {
		t.Errorf("peak distribution %+v, want N(100, 0.5²)", f.Peak)
	}
	if !math.IsNaN(f.Crossing.Median) || f.NextCrossing != nil {
		t.Errorf("crossings reported without an image counter: %+v", f.Crossing)
	}
	// After every peak: none found.
	f2, err := ForecastCurves(context.Background(), draws, pacCurve, nil, 1, ForecastSettings{T1: 80, T2: 120, Points: 801, Now: 103})
	if err != nil {
		t.Fatal(err)
	}
	if f2.Peak.Fraction != 0 || !math.IsNaN(f2.Peak.Median) {
		t.Errorf("peaks found after now: %+v", f2.Peak)
	}
}

func TestForecastBand(t *testing.T) {
	// Identical draws: the band collapses onto the exact curve.
	draws := [][]float64{{100, 0.2, 20}, {100, 0.2, 20}, {100, 0.2, 20}}
	f, err := ForecastCurves(context.Background(), draws, pacCurve, nil, 1, ForecastSettings{T1: 90, T2: 110, Points: 41})
	if err != nil {
		t.Fatal(err)
	}
	for i, tt := range f.Times {
		want := paczynski(math.Hypot((tt-100)/20, 0.2))
		if f.Amp[i] != want || f.AmpLower[i] != want || f.AmpUpper[i] != want {
			t.Fatalf("t = %v: band [%v, %v, %v], want %v", tt, f.AmpLower[i], f.Amp[i], f.AmpUpper[i], want)
		}
		if m := 25 - 2.5*math.Log10(100*want+20); f.Mag[0][i] != m || f.MagLower[0][i] != m {
			t.Fatalf("t = %v: magnitude %v, want %v", tt, f.Mag[0][i], m)
		}
	}
	// Two different draws: the band spans them.
	f, _ = ForecastCurves(context.Background(), [][]float64{{100, 0.2, 20}, {100, 0.4, 20}}, pacCurve, nil, 1, ForecastSettings{T1: 90, T2: 110, Points: 41})
	for i := range f.Times {
		if !(f.AmpLower[i] < f.Amp[i] && f.Amp[i] < f.AmpUpper[i]) {
			t.Fatalf("band at %v not ordered: %v %v %v", f.Times[i], f.AmpLower[i], f.Amp[i], f.AmpUpper[i])
		}
	}
}

func TestForecastCrossings(t *testing.T) {
	draws := [][]float64{{100, 0.1, 20}, {101.3, 0.1, 20}}
	// A caustic interior from t0+1 to t0+2: 5 images inside, 3 outside.
	images := func(x []float64, t float64) (int, error) {
		if t >= x[0]+1 && t < x[0]+2 {
			return 5, nil
		}
		return 3, nil
	}
	for _, c := range []struct {
		now  float64
		want [2]float64
	}{{90, [2]float64{101, 102.3}}, {101.5, [2]float64{102, 102.3}}} {
		f, err := ForecastCurves(context.Background(), draws, pacCurve, images, 1, ForecastSettings{T1: 90, T2: 110, Points: 401, Now: c.now})
		if err != nil {
			t.Fatal(err)
		}
		for k := range draws {
			if math.Abs(f.NextCrossing[k]-c.want[k]) > 1e-6 {
				t.Errorf("now %v draw %d: crossing at %.8f, want %v", c.now, k, f.NextCrossing[k], c.want[k])
			}
		}
	}
}

func TestForecastBadInput(t *testing.T) {
	d := [][]float64{{100, 0.1, 20}}
	for _, set := range []ForecastSettings{{T1: 10, T2: 10}, {T1: 0, T2: math.Inf(1)}, {T1: 0, T2: 1, Points: 2}} {
		if _, err := ForecastCurves(context.Background(), d, pacCurve, nil, 1, set); err == nil {
			t.Errorf("settings %+v accepted", set)
		}
	}
	if _, err := ForecastCurves(context.Background(), nil, pacCurve, nil, 1, ForecastSettings{T1: 0, T2: 1}); err == nil {
		t.Error("no draws accepted")
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := ForecastCurves(ctx, d, pacCurve, nil, 1, ForecastSettings{T1: 0, T2: 1}); err == nil {
		t.Error("cancelled context ignored")
	}
}
