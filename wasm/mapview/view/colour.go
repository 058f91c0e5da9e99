package view

import (
	"image/color"
	"math"
)

// Ramp is lensbook's colour scale for log-magnification maps: 256 sRGB colours
// whose OKLab lightness rises linearly from RampLMin to RampLMax while the hue
// turns from indigo through teal and green to a pale straw. It was designed
// here, not copied from any plotting package: lightness carries the value (so
// the map reads correctly in greyscale and for colour-blind viewers) and the
// hue turn only helps to tell neighbouring levels apart.
//
// OKLab is the perceptual colour space of Ottosson (2020, "A perceptual color
// space for image processing", bottosson.github.io/posts/oklab); equal steps in
// its L are equal steps of perceived lightness.
var Ramp [256]color.RGBA

// Lightness range of Ramp in OKLab L (0 = black, 1 = white).
const (
	RampLMin = 0.22
	RampLMax = 0.95
)

func init() {
	for i := range Ramp {
		Ramp[i] = rampColour(float64(i) / 255)
	}
}

// rampColour is the colour at position f ∈ [0, 1] of the scale. The hue angle
// h(f) and the chroma envelope c(f) are our own choices; chroma is reduced by
// bisection where the colour would leave the sRGB gamut, which never changes L.
func rampColour(f float64) color.RGBA {
	l := RampLMin + (RampLMax-RampLMin)*f
	h := (290 - 195*f) * math.Pi / 180 // degrees: 290 (indigo) → 95 (straw)
	c := 0.16 * math.Sin(math.Pi*(0.12+0.8*f))
	lo, hi := 0.0, c
	if _, ok := oklabToSRGB(l, c*math.Cos(h), c*math.Sin(h)); !ok {
		for range 40 {
			mid := 0.5 * (lo + hi)
			if _, ok := oklabToSRGB(l, mid*math.Cos(h), mid*math.Sin(h)); ok {
				lo = mid
			} else {
				hi = mid
			}
		}
		c = lo
	}
	rgb, _ := oklabToSRGB(l, c*math.Cos(h), c*math.Sin(h))
	return color.RGBA{R: to8(rgb[0]), G: to8(rgb[1]), B: to8(rgb[2]), A: 255}
}

func to8(v float64) uint8 { return uint8(math.Round(255 * math.Max(0, math.Min(1, v)))) }

// oklabToSRGB converts OKLab to gamma-encoded sRGB in [0, 1] and reports whether
// the colour lies inside the sRGB gamut (matrices of Ottosson 2020).
func oklabToSRGB(L, a, b float64) ([3]float64, bool) {
	l_ := L + 0.3963377774*a + 0.2158037573*b
	m_ := L - 0.1055613458*a - 0.0638541728*b
	s_ := L - 0.0894841775*a - 1.2914855480*b
	l, m, s := l_*l_*l_, m_*m_*m_, s_*s_*s_
	lin := [3]float64{
		+4.0767416621*l - 3.3077115913*m + 0.2309699292*s,
		-1.2684380046*l + 2.6097574011*m - 0.3413193965*s,
		-0.0041960863*l - 0.7034186147*m + 1.7076147010*s,
	}
	ok := true
	var out [3]float64
	for i, v := range lin {
		if v < -1e-9 || v > 1+1e-9 {
			ok = false
		}
		out[i] = linearToSRGB(v)
	}
	return out, ok
}

// SRGBToOKLab converts an 8-bit sRGB colour to OKLab (L, a, b) (Ottosson 2020).
func SRGBToOKLab(c color.RGBA) (L, a, b float64) {
	r, g, bl := srgbToLinear(float64(c.R)/255), srgbToLinear(float64(c.G)/255), srgbToLinear(float64(c.B)/255)
	l := math.Cbrt(0.4122214708*r + 0.5363325363*g + 0.0514459929*bl)
	m := math.Cbrt(0.2119034982*r + 0.6806995451*g + 0.1073969566*bl)
	s := math.Cbrt(0.0883024619*r + 0.2817188376*g + 0.6299787005*bl)
	return 0.2104542553*l + 0.7936177850*m - 0.0040720468*s,
		1.9779984951*l - 2.4285922050*m + 0.4505937099*s,
		0.0259040371*l + 0.7827717662*m - 0.8086757660*s
}

// sRGB transfer function (IEC 61966-2-1).
func linearToSRGB(v float64) float64 {
	if v <= 0.0031308 {
		return 12.92 * v
	}
	return 1.055*math.Pow(v, 1/2.4) - 0.055
}

func srgbToLinear(v float64) float64 {
	if v <= 0.04045 {
		return v / 12.92
	}
	return math.Pow((v+0.055)/1.055, 2.4)
}

// Scale maps a magnification A to a Ramp index through log10 A, linearly
// between Lo and Hi (log10 units); values outside are clamped. The zero value is
// not usable: use DefaultScale.
type Scale struct {
	Lo, Hi float64 // log10 A at the first and last colour
}

// DefaultScale spans A = 1 … 100, which covers everything but the immediate
// neighbourhood of caustics, where the colour saturates.
var DefaultScale = Scale{Lo: 0, Hi: 2}

// Index returns the Ramp index of magnification a (NaN → 0).
func (s Scale) Index(a float32) uint8 {
	if !(a > 0) {
		return 0
	}
	f := (math.Log10(float64(a)) - s.Lo) / (s.Hi - s.Lo)
	if f <= 0 {
		return 0
	}
	if f >= 1 {
		return 255
	}
	return uint8(f*255 + 0.5)
}

// Colour returns the colour of magnification a.
func (s Scale) Colour(a float32) color.RGBA { return Ramp[s.Index(a)] }

// Ticks returns legend tick magnifications inside the scale (1-2-5 sequence).
func (s Scale) Ticks() []float64 {
	var out []float64
	for d := math.Floor(s.Lo); d <= math.Ceil(s.Hi); d++ {
		for _, m := range []float64{1, 2, 5} {
			a := m * math.Pow(10, d)
			if l := math.Log10(a); l >= s.Lo-1e-12 && l <= s.Hi+1e-12 {
				out = append(out, a)
			}
		}
	}
	return out
}
