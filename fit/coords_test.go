package fit

import (
	"math"
	"strings"
	"testing"
)

// Expected values are the definitions of the units (1h = 15°, 1′ = 1/60,
// 1″ = 1/3600) worked by hand; the Galactic-centre position of Sgr A*
// (17h45m40.04s, −29°00′28.2″; Reid & Brunthaler 2004, ApJ 616, 872, from
// memory) is one realistic input.
func TestParseRA(t *testing.T) {
	cases := []struct {
		in   string
		want float64
	}{
		{"17:59:02.3", (17 + 59.0/60 + 2.3/3600) * 15},
		{"17 59 02.3", (17 + 59.0/60 + 2.3/3600) * 15},
		{"17h59m02.3s", (17 + 59.0/60 + 2.3/3600) * 15},
		{"17h45m40.04s", (17 + 45.0/60 + 40.04/3600) * 15},
		{"269.7596", 269.7596},
		{"269.7596d", 269.7596},
		{"269.7596°", 269.7596},
		{"17.984h", 17.984 * 15},
		{"0:00:00", 0},
		{" 18:00 ", 270},
		{"+18:00:00", 270},
	}
	for _, c := range cases {
		got, err := ParseRA(c.in)
		if err != nil {
			t.Errorf("ParseRA(%q): %v", c.in, err)
			continue
		}
		if math.Abs(got-c.want) > 1e-12 {
			t.Errorf("ParseRA(%q) = %.12f, want %.12f", c.in, got, c.want)
		}
	}
}

func TestParseDec(t *testing.T) {
	cases := []struct {
		in   string
		want float64
	}{
		{"-29:03:11", -(29 + 3.0/60 + 11.0/3600)},
		{"−29:03:11", -(29 + 3.0/60 + 11.0/3600)},
		{"−29 03 11", -(29 + 3.0/60 + 11.0/3600)},
		{"-29d03m11s", -(29 + 3.0/60 + 11.0/3600)},
		{"−29°03′11″", -(29 + 3.0/60 + 11.0/3600)},
		{"-29°03'11\"", -(29 + 3.0/60 + 11.0/3600)},
		{"-29:00:28.2", -(29 + 0.0/60 + 28.2/3600)},
		{"-00:30:00", -0.5}, // the sign applies to the whole value
		{"+12:30", 12.5},
		{"-29.053", -29.053},
		{"90", 90},
		{"-90:00:00", -90},
	}
	for _, c := range cases {
		got, err := ParseDec(c.in)
		if err != nil {
			t.Errorf("ParseDec(%q): %v", c.in, err)
			continue
		}
		if math.Abs(got-c.want) > 1e-12 {
			t.Errorf("ParseDec(%q) = %.12f, want %.12f", c.in, got, c.want)
		}
	}
}

func TestParseCoordErrors(t *testing.T) {
	ra := []struct{ in, msg string }{
		{"", "empty"},
		{"-10", "negative"},
		{"24:00:00", "outside"},
		{"360", "outside"},
		{"17:60:00", "below 60"},
		{"17:59:60", "below 60"},
		{"17:59:02:01", "1 to 3 fields"},
		{"17.5:30", "decimal point"},
		{"abc", "unexpected character"},
		{"17:5-9", "sign"},
		{"17m", "unit"},
		{"NaN", "unexpected character"},
	}
	for _, c := range ra {
		_, err := ParseRA(c.in)
		if err == nil || !strings.Contains(err.Error(), c.msg) || !strings.Contains(err.Error(), "right ascension") {
			t.Errorf("ParseRA(%q) error %v, want one naming right ascension and %q", c.in, err, c.msg)
		}
	}
	dec := []struct{ in, msg string }{
		{"", "empty"},
		{"-91", "outside"},
		{"90:00:01", "outside"},
		{"-29h", "hours"},
		{"-29:61", "below 60"},
		{"--29", "sign"},
		{"1e3", "unexpected character"},
	}
	for _, c := range dec {
		_, err := ParseDec(c.in)
		if err == nil || !strings.Contains(err.Error(), c.msg) || !strings.Contains(err.Error(), "declination") {
			t.Errorf("ParseDec(%q) error %v, want one naming declination and %q", c.in, err, c.msg)
		}
	}
	if _, err := ParsePosition("17:59:02.3"); err == nil {
		t.Error("ParsePosition with only a right ascension: no error")
	}
}

func TestParsePosition(t *testing.T) {
	want := Coords{RA: (17 + 59.0/60 + 2.3/3600) * 15, Dec: -(29 + 3.0/60 + 11.0/3600)}
	for _, in := range []string{
		"17:59:02.3 −29:03:11", "17:59:02.3, -29:03:11", "17 59 02.3 -29 03 11",
		"17h59m02.3s -29d03m11s", "17h 59m 02.3s −29° 03′ 11″", "269.759583333333 -29.053055555556",
	} {
		got, err := ParsePosition(in)
		if err != nil {
			t.Errorf("ParsePosition(%q): %v", in, err)
			continue
		}
		if math.Abs(got.RA-want.RA) > 1e-9 || math.Abs(got.Dec-want.Dec) > 1e-9 {
			t.Errorf("ParsePosition(%q) = %+v, want %+v", in, got, want)
		}
	}
	if got, err := ParsePosition("18:00 -30:00"); err != nil || got != (Coords{RA: 270, Dec: -30}) {
		t.Errorf("four fields: %+v, %v", got, err)
	}
}

// Round trip: String writes RA to 1 ms of time (0.015″) and Dec to 0.01″.
func TestCoordsStringRoundTrip(t *testing.T) {
	for _, c := range []Coords{{269.7595833, -29.0530556}, {0, 0}, {359.99999999, -89.999999}, {83.633, 22.0145}, {266.41683, -29.00783}} {
		s := c.String()
		got, err := ParsePosition(s)
		if err != nil {
			t.Fatalf("ParsePosition(%q): %v", s, err)
		}
		dra := math.Abs(got.RA - c.RA)
		dra = math.Min(dra, 360-dra)
		if dra > 0.0005/3600*15+1e-12 || math.Abs(got.Dec-c.Dec) > 0.005/3600+1e-12 {
			t.Errorf("%+v → %q → %+v", c, s, got)
		}
	}
	if s := FormatDec(-0.5); s != "-00:30:00.00" {
		t.Errorf("FormatDec(-0.5) = %q", s)
	}
	if s := FormatRA(270); s != "18:00:00.000" {
		t.Errorf("FormatRA(270) = %q", s)
	}
}

func FuzzParsePosition(f *testing.F) {
	for _, s := range []string{"17:59:02.3 −29:03:11", "269.76 -29.05", "17h59m02.3s -29d03m11s", "18:00 -30:00",
		"0 0", "23:59:59.9999 +89:59:59.99", "1 2 3 4 5", "−", "17:59:02.3, -29°03′11″", "-0 -0", "1.5:2 3"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		c, err := ParsePosition(s)
		if err != nil {
			if !strings.HasPrefix(err.Error(), "fit: ") {
				t.Fatalf("error without prefix: %v", err)
			}
			return
		}
		if err := c.Validate(); err != nil {
			t.Fatalf("ParsePosition(%q) = %+v out of range: %v", s, c, err)
		}
		back, err := ParsePosition(c.String())
		if err != nil {
			t.Fatalf("String %q of %+v does not parse: %v", c.String(), c, err)
		}
		dra := math.Abs(back.RA - c.RA)
		dra = math.Min(dra, 360-dra)
		if dra > 0.0005/3600*15+1e-9 || math.Abs(back.Dec-c.Dec) > 0.005/3600+1e-9 {
			t.Fatalf("round trip %+v → %q → %+v", c, c.String(), back)
		}
	})
}
