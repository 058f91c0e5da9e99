package fit

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"unicode"
)

// Sky coordinates of the event: typed by the user in the Data step, needed for
// annual parallax (the direction of the Sun as seen from the Earth, projected
// on the sky at the event, see lens.ParallaxOffsets).
//
// Accepted forms (ICRS/J2000, common practice in survey alerts):
//
//	right ascension  "17:59:02.3"  "17 59 02.3"  "17h59m02.3s"  "269.7596"  "269.7596d"  "17.984h"
//	declination      "-29:03:11"   "−29 03 11"   "-29d03m11s"   "−29°03′11″"  "-29.053"
//
// A bare number is degrees for both. Sexagesimal right ascension is in hours,
// sexagesimal declination in degrees. Minutes and seconds must lie in [0, 60);
// the sign of a declination is written once, before the degrees, and applies to
// the whole value (so "-00:30:00" is −0.5°).

// ParseRA returns the right ascension written in s, in degrees in [0, 360).
func ParseRA(s string) (float64, error) {
	v, neg, err := parseAngle(s, true)
	if err != nil {
		return 0, fmt.Errorf("fit: right ascension %q: %v", clipCoord(s), err)
	}
	if neg {
		return 0, fmt.Errorf("fit: right ascension %q: must not be negative", clipCoord(s))
	}
	if !(v >= 0 && v < 360) {
		return 0, fmt.Errorf("fit: right ascension %q: %g° outside [0°, 360°) (0h to 24h)", clipCoord(s), v)
	}
	return v, nil
}

// ParseDec returns the declination written in s, in degrees in [−90, 90].
func ParseDec(s string) (float64, error) {
	v, neg, err := parseAngle(s, false)
	if err != nil {
		return 0, fmt.Errorf("fit: declination %q: %v", clipCoord(s), err)
	}
	if neg {
		v = -v
	}
	if !(v >= -90 && v <= 90) {
		return 0, fmt.Errorf("fit: declination %q: %g° outside [−90°, 90°]", clipCoord(s), v)
	}
	return v, nil
}

// ParseCoords reads right ascension and declination from separate strings.
func ParseCoords(ra, dec string) (Coords, error) {
	a, err := ParseRA(ra)
	if err != nil {
		return Coords{}, err
	}
	d, err := ParseDec(dec)
	if err != nil {
		return Coords{}, err
	}
	return Coords{RA: a, Dec: d}, nil
}

// ParsePosition reads both coordinates from one string, as pasted from an
// alert page: "17:59:02.3 −29:03:11", "17 59 02.3 -29 03 11",
// "269.7596, -29.0531". The right ascension comes first. Fields are split at
// white space or one comma; six (or four) space-separated sexagesimal fields
// split evenly, otherwise the declination starts at the field carrying a sign.
func ParsePosition(s string) (Coords, error) {
	f := strings.FieldsFunc(s, func(r rune) bool { return unicode.IsSpace(r) || r == ',' })
	var ra, dec string
	switch {
	case len(f) == 2:
		ra, dec = f[0], f[1]
	case len(f) == 6 || len(f) == 4:
		h := len(f) / 2
		ra, dec = strings.Join(f[:h], " "), strings.Join(f[h:], " ")
	default:
		k := -1
		for i := 1; i < len(f); i++ {
			if r := []rune(f[i])[0]; r == '+' || r == '-' || r == '−' {
				k = i
				break
			}
		}
		if k < 0 {
			return Coords{}, fmt.Errorf("fit: position %q: expected right ascension then declination (two values, or sexagesimal fields with a signed declination)", clipCoord(s))
		}
		ra, dec = strings.Join(f[:k], " "), strings.Join(f[k:], " ")
	}
	return ParseCoords(ra, dec)
}

// Validate checks that c lies in RA [0, 360), Dec [−90, 90] degrees.
func (c Coords) Validate() error {
	if !(c.RA >= 0 && c.RA < 360) || !(c.Dec >= -90 && c.Dec <= 90) {
		return fmt.Errorf("fit: coordinates RA %g°, Dec %g° out of range (RA in [0, 360), Dec in [−90, 90])", c.RA, c.Dec)
	}
	return nil
}

// Radians returns (RA, Dec) in radians, the units of lens.ParallaxOffsets.
func (c Coords) Radians() (ra, dec float64) { return c.RA * math.Pi / 180, c.Dec * math.Pi / 180 }

// String formats c as sexagesimal "hh:mm:ss.sss ±dd:mm:ss.ss" (RA to 1 ms of
// time, Dec to 0.01″: finer than any parallax fit needs). ParsePosition reads it back.
func (c Coords) String() string { return FormatRA(c.RA) + " " + FormatDec(c.Dec) }

// FormatRA writes ra (degrees) as hours "hh:mm:ss.sss".
func FormatRA(ra float64) string {
	if math.IsNaN(ra) || math.IsInf(ra, 0) {
		return fmt.Sprint(ra)
	}
	ms := int64(math.Round(ra / 15 * 3600 * 1000)) // milliseconds of time
	ms %= 24 * 3600 * 1000
	if ms < 0 {
		ms += 24 * 3600 * 1000
	}
	return fmt.Sprintf("%02d:%02d:%02d.%03d", ms/3600000, ms/60000%60, ms/1000%60, ms%1000)
}

// FormatDec writes dec (degrees) as "±dd:mm:ss.ss".
func FormatDec(dec float64) string {
	if math.IsNaN(dec) || math.IsInf(dec, 0) {
		return fmt.Sprint(dec)
	}
	sign := "+"
	if dec < 0 {
		sign, dec = "-", -dec
	}
	cs := int64(math.Round(dec * 3600 * 100)) // hundredths of an arcsecond
	if cs == 0 {
		sign = "+"
	}
	return fmt.Sprintf("%s%02d:%02d:%02d.%02d", sign, cs/360000, cs/6000%60, cs/100%60, cs%100)
}

// parseAngle reads a decimal or sexagesimal angle and returns its magnitude in
// degrees and whether a minus sign was written. isRA selects hours for
// sexagesimal fields and for an "h" unit.
func parseAngle(s string, isRA bool) (deg float64, neg bool, err error) {
	t := strings.TrimSpace(s)
	if t == "" {
		return 0, false, fmt.Errorf("empty")
	}
	switch {
	case strings.HasPrefix(t, "−"):
		neg, t = true, t[len("−"):]
	case t[0] == '-':
		neg, t = true, t[1:]
	case t[0] == '+':
		t = t[1:]
	}
	t = strings.TrimSpace(t)
	// Split into numeric fields, remembering unit letters/symbols after each.
	type field struct {
		num  string
		unit string
	}
	var fs []field
	cur := field{}
	flush := func() {
		if cur.num != "" || cur.unit != "" {
			fs = append(fs, cur)
		}
		cur = field{}
	}
	for _, r := range t {
		switch {
		case r >= '0' && r <= '9' || r == '.':
			if cur.unit != "" {
				flush()
			}
			cur.num += string(r)
		case r == ':' || unicode.IsSpace(r):
			flush()
		case r == 'h' || r == 'd' || r == 'm' || r == 's' || r == '°' || r == '\'' || r == '"' || r == '′' || r == '″':
			if cur.num == "" || cur.unit != "" {
				return 0, false, fmt.Errorf("unit %q without a number before it", r)
			}
			cur.unit = string(r)
		case r == '-' || r == '+' || r == '−':
			return 0, false, fmt.Errorf("sign %q inside the value (write one sign before the degrees)", r)
		default:
			return 0, false, fmt.Errorf("unexpected character %q", r)
		}
	}
	flush()
	if len(fs) == 0 || len(fs) > 3 {
		return 0, false, fmt.Errorf("expected 1 to 3 fields (degrees or hours, minutes, seconds), found %d", len(fs))
	}
	vals := make([]float64, len(fs))
	for i, f := range fs {
		if f.num == "" {
			return 0, false, fmt.Errorf("field %d has no number", i+1)
		}
		v, perr := strconv.ParseFloat(f.num, 64)
		if perr != nil {
			return 0, false, fmt.Errorf("field %d %q is not a number", i+1, f.num)
		}
		if i < len(fs)-1 && strings.Contains(f.num, ".") {
			return 0, false, fmt.Errorf("only the last field may have a decimal point (field %d is %q)", i+1, f.num)
		}
		vals[i] = v
	}
	// Units: the first field's unit decides hours or degrees.
	first := fs[0].unit
	hours := false
	switch first {
	case "h":
		if !isRA {
			return 0, false, fmt.Errorf("hours (h) are not allowed in a declination")
		}
		hours = true
	case "d", "°":
	case "":
		hours = isRA && len(fs) > 1
	default:
		return 0, false, fmt.Errorf("first field has unit %q; expected h, d or °", first)
	}
	want := []string{"m", "s"}
	alt := []string{"'", "\""}
	alt2 := []string{"′", "″"}
	for i := 1; i < len(fs); i++ {
		u := fs[i].unit
		if u != "" && u != want[i-1] && u != alt[i-1] && u != alt2[i-1] {
			return 0, false, fmt.Errorf("field %d has unit %q; expected %s", i+1, u, want[i-1])
		}
		if !(vals[i] < 60) {
			return 0, false, fmt.Errorf("field %d = %v must be below 60", i+1, vals[i])
		}
	}
	v := vals[0]
	if len(vals) > 1 {
		v += vals[1] / 60
	}
	if len(vals) > 2 {
		v += vals[2] / 3600
	}
	if hours {
		v *= 15
	}
	if math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, false, fmt.Errorf("value is not finite")
	}
	return v, neg, nil
}

func clipCoord(s string) string {
	if len(s) > 40 {
		return s[:40] + "…"
	}
	return s
}
