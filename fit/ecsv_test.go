package fit

import (
	"bytes"
	"math"
	"slices"
	"strings"
	"testing"
)

// sameFloat reports bit equality, treating all NaNs as equal.
func sameFloat(a, b float64) bool {
	if math.IsNaN(a) || math.IsNaN(b) {
		return math.IsNaN(a) && math.IsNaN(b)
	}
	return math.Float64bits(a) == math.Float64bits(b)
}

func equalTables(t *testing.T, got, want *Table) {
	t.Helper()
	if len(got.Columns) != len(want.Columns) {
		t.Fatalf("%d columns, want %d", len(got.Columns), len(want.Columns))
	}
	for i := range want.Columns {
		g, w := got.Columns[i], want.Columns[i]
		if g.Name != w.Name || g.Unit != w.Unit || g.Description != w.Description {
			t.Errorf("column %d: %q %q %q, want %q %q %q", i, g.Name, g.Unit, g.Description, w.Name, w.Unit, w.Description)
		}
		if !slices.EqualFunc(g.Float, w.Float, sameFloat) || !slices.Equal(g.Int, w.Int) ||
			!slices.Equal(g.Bool, w.Bool) || !slices.Equal(g.String, w.String) {
			t.Errorf("column %q values differ:\n got %v %v %v %q\nwant %v %v %v %q", w.Name, g.Float, g.Int, g.Bool, g.String, w.Float, w.Int, w.Bool, w.String)
		}
	}
	if !slices.Equal(got.Meta, want.Meta) {
		t.Errorf("meta %q, want %q", got.Meta, want.Meta)
	}
}

func sampleTable(delim byte) *Table {
	return &Table{
		Delimiter: delim,
		Columns: []Column{
			{Name: "t", Unit: "d", Description: "Julian date, full (not reduced): BJD_TDB",
				Float: []float64{2460000.5, 0, math.Copysign(0, -1), 5e-324, math.MaxFloat64, math.NaN(), math.Inf(1), math.Inf(-1), 0.1, 1.0 / 3}},
			{Name: "n", Int: []int64{math.MinInt64, math.MaxInt64, 0, -1, 1, 2, 3, 4, 5, 6}},
			{Name: "ok", Bool: []bool{true, false, true, true, false, false, true, false, true, false}},
			{Name: "label with space", Unit: "erg / (cm2 s)",
				String: []string{"", "two words", `say "hi"`, "#not a comment", "θE", "a,b", "plain", " lead", "trail ", "true"}},
		},
		Meta: []Meta{{"event", "demo"}, {"colon", "a: b"}, {"hash", "#x"}, {"bool-like", "true"},
			{"number-like", "1.5"}, {"empty", ""}, {"quote", `q"uote`}, {"unicode", "ünï θ"}, {"1", "key is a number"}},
	}
}

func TestECSVRoundTrip(t *testing.T) {
	for _, delim := range []byte{' ', ','} {
		want := sampleTable(delim)
		var buf bytes.Buffer
		if err := WriteECSV(&buf, want); err != nil {
			t.Fatal(err)
		}
		got, err := ReadECSV(bytes.NewReader(buf.Bytes()))
		if err != nil {
			t.Fatalf("delim %q: %v\n%s", delim, err, buf.String())
		}
		equalTables(t, got, want)
		if got.Delimiter != delim {
			t.Errorf("delimiter %q, want %q", got.Delimiter, delim)
		}
		// Writing what was read gives the same bytes.
		var again bytes.Buffer
		if err := WriteECSV(&again, got); err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(again.Bytes(), buf.Bytes()) {
			t.Errorf("second write differs:\n%s\n---\n%s", buf.String(), again.String())
		}
	}
}

func TestECSVFloat32(t *testing.T) {
	x := []float64{float64(float32(0.1)), float64(float32(1e-3)), 1.5}
	var buf bytes.Buffer
	if err := WriteECSV(&buf, &Table{Columns: []Column{{Name: "x", Datatype: "float32", Float: x}}}); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(buf.String(), "\n0.1\n0.001\n1.5\n") || !strings.Contains(buf.String(), "datatype: float32") {
		t.Errorf("float32 column written as\n%s", buf.String())
	}
	got, err := ReadECSV(&buf)
	if err != nil {
		t.Fatal(err)
	}
	for i, v := range got.Columns[0].Float {
		if float32(v) != float32(x[i]) {
			t.Errorf("value %d: %v, want %v", i, v, x[i])
		}
	}
}

// TestECSVAstropyHeader reads header styles YAML writers produce: flow entries
// wrapped over several lines, block-style entries, a plain meta mapping with
// a nested sequence, quoted keys and a comment line (written here in the style
// astropy/PyYAML use, from memory).
func TestECSVAstropyHeader(t *testing.T) {
	src := `# %ECSV 1.0
# ---
# delimiter: ','
# datatype:
# - {name: time, unit: d, datatype: float64, description: This description is long enough that the
#     YAML writer wraps it onto a second line}
# - name: flux
#   unit: electron / s
#   datatype: float32
#   description: 'it''s flux'
# - {name: 'q', datatype: int32, meta: {origin: x}}
# - {name: "s t", datatype: string}
# meta:
#   observer: "A. N. Other"
#   filters: [I, V]
#   # a YAML comment
#   note: plain text, with a comma
# schema: astropy-2.0
time,flux,q,s t
1.5,2.5,3,"x, y"
2.5,-0.5,-4,z
`
	got, err := ReadECSV(strings.NewReader(src))
	if err != nil {
		t.Fatal(err)
	}
	want := &Table{
		Columns: []Column{
			{Name: "time", Unit: "d", Description: "This description is long enough that the YAML writer wraps it onto a second line", Float: []float64{1.5, 2.5}},
			{Name: "flux", Unit: "electron / s", Description: "it's flux", Float: []float64{2.5, -0.5}},
			{Name: "q", Int: []int64{3, -4}},
			{Name: "s t", String: []string{"x, y", "z"}},
		},
		Meta: []Meta{{"observer", "A. N. Other"}, {"filters", "[I, V]"}, {"note", "plain text, with a comma"}},
	}
	equalTables(t, got, want)
	if got.Columns[1].Datatype != "float32" || got.Columns[2].Datatype != "int32" || got.Delimiter != ',' {
		t.Errorf("datatypes %q %q delimiter %q", got.Columns[1].Datatype, got.Columns[2].Datatype, got.Delimiter)
	}
}

func TestECSVWriteErrors(t *testing.T) {
	for _, tc := range []struct {
		name string
		t    Table
		want string
	}{
		{"no columns", Table{}, "no columns"},
		{"lengths", Table{Columns: []Column{{Name: "a", Float: []float64{1}}, {Name: "b", Float: []float64{1, 2}}}}, "has 2 values"},
		{"repeated name", Table{Columns: []Column{{Name: "a", Float: []float64{1}}, {Name: "a", Float: []float64{1}}}}, "repeated"},
		{"empty name", Table{Columns: []Column{{Float: []float64{1}}}}, "no name"},
		{"no values", Table{Columns: []Column{{Name: "a"}}}, "exactly one kind"},
		{"two kinds", Table{Columns: []Column{{Name: "a", Float: []float64{1}, Int: []int64{1}}}}, "exactly one kind"},
		{"line break", Table{Columns: []Column{{Name: "a", String: []string{"x\ny"}}}}, "line break"},
		{"datatype", Table{Columns: []Column{{Name: "a", Datatype: "int32", Float: []float64{1}}}}, "does not suit"},
		{"delimiter", Table{Delimiter: ';', Columns: []Column{{Name: "a", Float: []float64{1}}}}, "delimiter"},
	} {
		var buf bytes.Buffer
		err := WriteECSV(&buf, &tc.t)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: err %v, want %q", tc.name, err, tc.want)
		}
		if buf.Len() != 0 {
			t.Errorf("%s: wrote %d bytes despite the error", tc.name, buf.Len())
		}
	}
}

func TestECSVReadErrors(t *testing.T) {
	hdr := "# %ECSV 1.0\n# ---\n# datatype:\n# - {name: a, datatype: float64}\n# - {name: b, datatype: int64}\na b\n"
	for _, tc := range []struct {
		name, src, want string
	}{
		{"not ecsv", "a b\n1 2\n", "missing"},
		{"fields", hdr + "1 2 3\n", "line 7: 3 fields"},
		{"float", hdr + "x 2\n", "line 7 column \"a\": \"x\" is not a number"},
		{"int", hdr + "1 2.5\n", "not an int64"},
		{"masked", hdr + "\"\" 2\n", "masked"},
		{"subtype", "# %ECSV 1.0\n# ---\n# datatype:\n# - {name: a, datatype: string, subtype: 'float64[2]'}\na\n", "subtype"},
		{"datatype", "# %ECSV 1.0\n# ---\n# datatype:\n# - {name: a, datatype: complex128}\na\n", "not supported"},
		{"no datatype", "# %ECSV 1.0\n# ---\n# meta: {}\na\n", "no datatype list"},
		{"anchor", "# %ECSV 1.0\n# ---\n# datatype: &x\n", "anchors"},
		{"unclosed flow", "# %ECSV 1.0\n# ---\n# datatype:\n# - {name: a, datatype: float64\na\n1\n", "unterminated"},
		{"no names row", "# %ECSV 1.0\n# ---\n# datatype:\n# - {name: a, datatype: float64}\n", "no column-names row"},
		{"deep nesting", "# %ECSV 1.0\n# ---\n# meta: " + strings.Repeat("[", 100) + strings.Repeat("]", 100) + "\n", "nesting"},
	} {
		_, err := ReadECSV(strings.NewReader(tc.src))
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: err %v, want %q", tc.name, err, tc.want)
		}
	}
}

// FuzzReadECSV: the reader never panics, and whatever it accepts writes and
// reads back to the same table.
func FuzzReadECSV(f *testing.F) {
	var buf bytes.Buffer
	WriteECSV(&buf, sampleTable(' '))
	f.Add(buf.Bytes())
	buf.Reset()
	WriteECSV(&buf, sampleTable(','))
	f.Add(buf.Bytes())
	f.Add(readFixture(f, "ecsv_mag.ecsv"))
	f.Add([]byte("# %ECSV 1.0\n# ---\n# datatype:\n# - name: a\n#   datatype: bool\n# meta: !!omap\n# - {k: v}\na\nTrue\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		tb, err := ReadECSV(bytes.NewReader(data))
		if err != nil {
			return
		}
		var out bytes.Buffer
		if err := WriteECSV(&out, tb); err != nil {
			// Acceptable only for values the writer refuses by design.
			if !strings.Contains(err.Error(), "line break") {
				t.Fatalf("read a table the writer refuses: %v", err)
			}
			return
		}
		back, err := ReadECSV(&out)
		if err != nil {
			t.Fatalf("re-read: %v\n%s", err, out.String())
		}
		equalTables(t, back, tb)
	})
}

func TestECSVEdgeTables(t *testing.T) {
	// Zero rows, and metadata with line breaks and tabs (escaped in the YAML
	// header, so the table text keeps one row per line).
	want := &Table{
		Columns: []Column{{Name: "x", Float: []float64{}}, {Name: "s", String: []string{}}},
		Meta:    []Meta{{"notes", "line one\nline two\twith tab"}, {"key: with colon", "v"}},
	}
	var buf bytes.Buffer
	if err := WriteECSV(&buf, want); err != nil {
		t.Fatal(err)
	}
	if strings.Count(buf.String(), "\n") != 10 {
		t.Errorf("unexpected layout:\n%s", buf.String())
	}
	got, err := ReadECSV(&buf)
	if err != nil {
		t.Fatal(err)
	}
	equalTables(t, got, want)
	if got.Columns[0].Float == nil || got.Columns[1].String == nil {
		t.Error("empty columns lost their kind")
	}
}
