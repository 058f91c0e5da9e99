package view

import (
	"image/color"
	"math"
	"testing"
)

// The scale must have strictly increasing OKLab lightness after 8-bit
// quantisation, so that lightness alone orders the map.
func TestRampLightnessMonotone(t *testing.T) {
	prev := -1.0
	for i, c := range Ramp {
		L, _, _ := SRGBToOKLab(c)
		if L <= prev {
			t.Fatalf("Ramp[%d] = %v: OKLab L = %.5f not above Ramp[%d] L = %.5f", i, c, L, i-1, prev)
		}
		prev = L
	}
	L0, _, _ := SRGBToOKLab(Ramp[0])
	L1, _, _ := SRGBToOKLab(Ramp[255])
	if math.Abs(L0-RampLMin) > 0.005 || math.Abs(L1-RampLMax) > 0.005 {
		t.Errorf("end lightness %.4f … %.4f, want %.2f … %.2f", L0, L1, RampLMin, RampLMax)
	}
}

// Perceptual uniformity: the OKLab distance between neighbouring entries must
// stay within a factor of 2.5 of its mean (quantisation to 8 bits alone makes
// steps of ~0.003 wobble by ±30 %).
func TestRampStepsUniform(t *testing.T) {
	var steps []float64
	sum := 0.0
	for i := 1; i < len(Ramp); i++ {
		L0, a0, b0 := SRGBToOKLab(Ramp[i-1])
		L1, a1, b1 := SRGBToOKLab(Ramp[i])
		d := math.Sqrt((L1-L0)*(L1-L0) + (a1-a0)*(a1-a0) + (b1-b0)*(b1-b0))
		steps = append(steps, d)
		sum += d
	}
	mean := sum / float64(len(steps))
	for i, d := range steps {
		if d > 2.5*mean || d < mean/2.5 {
			t.Errorf("step %d→%d: ΔE_OK = %.4f, mean %.4f", i, i+1, d, mean)
		}
	}
}

// Round trip of the colour conversions: OKLab of sRGB white is (1, 0, 0) and of
// black (0, 0, 0) (Ottosson 2020 normalisation).
func TestOKLabWhiteBlack(t *testing.T) {
	L, a, b := SRGBToOKLab(color.RGBA{255, 255, 255, 255})
	if math.Abs(L-1) > 1e-4 || math.Abs(a) > 1e-4 || math.Abs(b) > 1e-4 {
		t.Errorf("white: got (%.5f %.5f %.5f), want (1 0 0)", L, a, b)
	}
	L, a, b = SRGBToOKLab(color.RGBA{0, 0, 0, 255})
	if L != 0 || a != 0 || b != 0 {
		t.Errorf("black: got (%g %g %g)", L, a, b)
	}
	for _, c := range []color.RGBA{{200, 30, 90, 255}, {12, 240, 77, 255}, Ramp[100]} {
		L, a, b := SRGBToOKLab(c)
		rgb, ok := oklabToSRGB(L, a, b)
		if !ok {
			t.Errorf("%v: round trip left the gamut", c)
		}
		if got := (color.RGBA{to8(rgb[0]), to8(rgb[1]), to8(rgb[2]), 255}); got != c {
			t.Errorf("round trip %v → %v", c, got)
		}
	}
}

func TestScaleIndex(t *testing.T) {
	s := DefaultScale
	for _, tc := range []struct {
		a    float32
		want uint8
	}{{1, 0}, {0.5, 0}, {float32(math.NaN()), 0}, {10, 128}, {100, 255}, {1e6, 255}} {
		if got := s.Index(tc.a); got != tc.want {
			t.Errorf("Index(%v) = %d, want %d", tc.a, got, tc.want)
		}
	}
	ticks := s.Ticks()
	want := []float64{1, 2, 5, 10, 20, 50, 100}
	if len(ticks) != len(want) {
		t.Fatalf("Ticks = %v, want %v", ticks, want)
	}
	for i := range want {
		if math.Abs(ticks[i]-want[i]) > 1e-9*want[i] {
			t.Errorf("Ticks = %v, want %v", ticks, want)
		}
	}
}
