package fit

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"unicode/utf8"
)

// ECSV ("enhanced character-separated values") is a text table whose column
// names, units, datatypes and table metadata travel in a YAML header written in
// '#' comment lines, followed by ordinary delimited rows; the layout follows
// the ECSV 1.0 standard (astropy APE 6), from memory:
//
//	# %ECSV 1.0
//	# ---
//	# datatype:
//	# - {name: t, unit: d, datatype: float64, description: Julian date}
//	# - {name: flux, datatype: float64}
//	# meta: !!omap
//	# - {event: demo}
//	# schema: astropy-2.0
//	t flux
//	2460001.5 1234.5
//
// We read and write the subset astropy writes for one-dimensional float, int,
// bool and string columns with space or comma delimiters. Not supported (a
// clear error): multidimensional or object columns (subtype), masked values in
// numeric columns of generic tables, string values with line breaks.
// Column-level meta in a header is accepted and ignored.

// ECSVVersion is the ECSV version this package writes.
const ECSVVersion = "1.0"

// Table is a set of equal-length named columns with table metadata: what
// WriteECSV writes and ReadECSV returns.
type Table struct {
	Columns []Column
	Meta    []Meta // table metadata, in order
	// Delimiter between fields: ' ' (the ECSV default, also when 0) or ','.
	Delimiter byte
}

// Meta is one table metadata entry. Values are text; ReadECSV renders nested
// YAML values in flow form.
type Meta struct {
	Key, Value string
}

// Column is one named column. Exactly one of Float, Int, Bool, String holds
// its values.
type Column struct {
	Name        string
	Unit        string // e.g. "d", "mag", "deg"; "" for none
	Description string

	// Datatype as in the ECSV header. Empty means the natural one for the
	// slice in use (float64, int64, bool, string); otherwise it must suit it:
	// float16/32/64 for Float, int8…int64 and uint8…uint64 for Int.
	// ReadECSV sets it to the file's datatype.
	Datatype string

	Float  []float64
	Int    []int64
	Bool   []bool
	String []string
}

// Len is the number of values in the column.
func (c *Column) Len() int {
	return max(len(c.Float), len(c.Int), len(c.Bool), len(c.String))
}

func (c *Column) datatype() (string, error) {
	used := 0
	nat := ""
	if c.Float != nil {
		used++
		nat = "float64"
	}
	if c.Int != nil {
		used++
		nat = "int64"
	}
	if c.Bool != nil {
		used++
		nat = "bool"
	}
	if c.String != nil {
		used++
		nat = "string"
	}
	if used != 1 {
		return "", fmt.Errorf("fit: ecsv: column %q must hold exactly one kind of values (has %d)", c.Name, used)
	}
	dt := c.Datatype
	if dt == "" {
		return nat, nil
	}
	ok := false
	switch nat {
	case "float64":
		ok = dt == "float16" || dt == "float32" || dt == "float64"
	case "int64":
		ok = numericDatatype(dt) && !strings.HasPrefix(dt, "float")
	default:
		ok = dt == nat
	}
	if !ok {
		return "", fmt.Errorf("fit: ecsv: column %q: datatype %s does not suit %s values", c.Name, dt, nat)
	}
	return dt, nil
}

// WriteECSV writes t as an ECSV 1.0 file. Floats are written in the shortest
// form that reads back to the same bits (NaN and ±Inf as nan, inf, -inf);
// strings are quoted when needed. It returns an error, writing nothing, when
// columns differ in length, a column holds no or several kinds of values,
// names are empty or repeated, or a string contains a line break.
func WriteECSV(w io.Writer, t *Table) error {
	delim := t.Delimiter
	if delim == 0 {
		delim = ' '
	}
	if delim != ' ' && delim != ',' {
		return fmt.Errorf("fit: ecsv: delimiter %q not allowed (space or comma)", delim)
	}
	n := -1
	seen := map[string]bool{}
	dts := make([]string, len(t.Columns))
	for i := range t.Columns {
		c := &t.Columns[i]
		dt, err := c.datatype()
		if err != nil {
			return err
		}
		dts[i] = dt
		if c.Name == "" {
			return fmt.Errorf("fit: ecsv: column %d has no name", i+1)
		}
		if seen[c.Name] {
			return fmt.Errorf("fit: ecsv: column name %q repeated", c.Name)
		}
		seen[c.Name] = true
		if n >= 0 && c.Len() != n {
			return fmt.Errorf("fit: ecsv: column %q has %d values, column %q has %d", c.Name, c.Len(), t.Columns[0].Name, n)
		}
		n = c.Len()
		for _, s := range append([]string{c.Name, c.Unit, c.Description}, c.String...) {
			if strings.ContainsAny(s, "\n\r") {
				return fmt.Errorf("fit: ecsv: column %q: text with a line break cannot be written", c.Name)
			}
		}
	}
	if len(t.Columns) == 0 {
		return errors.New("fit: ecsv: table has no columns")
	}

	bw := bufio.NewWriter(w)
	bw.WriteString("# %ECSV " + ECSVVersion + "\n# ---\n")
	if delim == ',' {
		bw.WriteString("# delimiter: ','\n")
	}
	bw.WriteString("# datatype:\n")
	for i, c := range t.Columns {
		bw.WriteString("# - {name: " + yamlScalar(c.Name))
		if c.Unit != "" {
			bw.WriteString(", unit: " + yamlScalar(c.Unit))
		}
		bw.WriteString(", datatype: " + dts[i])
		if c.Description != "" {
			bw.WriteString(", description: " + yamlScalar(c.Description))
		}
		bw.WriteString("}\n")
	}
	if len(t.Meta) > 0 {
		bw.WriteString("# meta: !!omap\n")
		for _, m := range t.Meta {
			bw.WriteString("# - {" + yamlScalar(m.Key) + ": " + yamlScalar(m.Value) + "}\n")
		}
	}
	bw.WriteString("# schema: astropy-2.0\n")

	var buf []byte
	for i, c := range t.Columns {
		if i > 0 {
			buf = append(buf, delim)
		}
		buf = appendField(buf, c.Name, delim)
	}
	buf = append(buf, '\n')
	bw.Write(buf)
	for r := 0; r < n; r++ {
		buf = buf[:0]
		for i := range t.Columns {
			c := &t.Columns[i]
			if i > 0 {
				buf = append(buf, delim)
			}
			switch {
			case c.Float != nil:
				bits := 64
				if dts[i] != "float64" {
					bits = 32
				}
				buf = appendFloat(buf, c.Float[r], bits)
			case c.Int != nil:
				buf = strconv.AppendInt(buf, c.Int[r], 10)
			case c.Bool != nil:
				if c.Bool[r] {
					buf = append(buf, "True"...)
				} else {
					buf = append(buf, "False"...)
				}
			default:
				buf = appendField(buf, c.String[r], delim)
			}
		}
		buf = append(buf, '\n')
		if _, err := bw.Write(buf); err != nil {
			return err
		}
	}
	return bw.Flush()
}

func appendFloat(b []byte, v float64, bits int) []byte {
	switch {
	case math.IsNaN(v):
		return append(b, "nan"...)
	case math.IsInf(v, 1):
		return append(b, "inf"...)
	case math.IsInf(v, -1):
		return append(b, "-inf"...)
	}
	return strconv.AppendFloat(b, v, 'g', -1, bits)
}

// appendField writes a string field, quoted when it is empty, has blanks,
// quotes or the delimiter, or starts with '#'.
func appendField(b []byte, s string, delim byte) []byte {
	if s != "" && s[0] != '#' && !strings.ContainsAny(s, " \t\v\f\""+string(delim)) {
		return append(b, s...)
	}
	b = append(b, '"')
	b = append(b, strings.ReplaceAll(s, `"`, `""`)...)
	return append(b, '"')
}

// ecsvHeader is the decoded YAML header of an ECSV file.
type ecsvHeader struct {
	version   string
	delimiter byte
	cols      []Column // Name, Unit, Description, Datatype only
	meta      []Meta
	schema    string
}

// parseECSVHeader decodes the header at the top of lines; n is the number
// of lines it occupies (the "# %ECSV" line and the YAML comment lines).
func parseECSVHeader(lines []string) (h *ecsvHeader, n int, err error) {
	first := strings.TrimSpace(strings.TrimPrefix(lines[0], "# %ECSV"))
	switch first {
	case "0.9", "1.0":
	default:
		return nil, 0, fmt.Errorf("line 1: ECSV version %q not supported (0.9 and 1.0 are)", clip(first))
	}
	h = &ecsvHeader{version: first, delimiter: ' '}
	var y []string
	n = 1
	for ; n < len(lines); n++ {
		ln := lines[n]
		if !strings.HasPrefix(ln, "#") {
			break
		}
		// YAML (and so the ECSV header) is UTF-8 text: a stray byte would not
		// survive being written back, so it is an error, not a guess.
		if !utf8.ValidString(ln) {
			return nil, 0, fmt.Errorf("line %d: header is not valid UTF-8 text", n+1)
		}
		body := strings.TrimPrefix(ln[1:], " ")
		y = append(y, body)
	}
	if len(y) == 0 || strings.TrimSpace(y[0]) != "---" {
		return nil, 0, errors.New("line 2: ECSV header must start with \"# ---\"")
	}
	p := &yparser{lines: y[1:], first: 3}
	p.skip()
	if p.pos >= len(p.lines) {
		return nil, 0, errors.New("ECSV header is empty")
	}
	root, err := p.parseBlock(indentOf(p.lines[p.pos]))
	if err != nil {
		return nil, 0, err
	}
	if p.skip(); p.pos < len(p.lines) {
		return nil, 0, p.errorf("unexpected text %q", clip(p.lines[p.pos]))
	}
	if root.kind != 'm' {
		return nil, 0, errors.New("ECSV header is not a YAML mapping")
	}
	if d := root.get("delimiter"); d != nil {
		switch d.s {
		case " ", "":
		case ",":
			h.delimiter = ','
		default:
			return nil, 0, fmt.Errorf("ECSV delimiter %q not allowed (space or comma)", clip(d.s))
		}
	}
	dt := root.get("datatype")
	if dt == nil || dt.kind != 'l' || len(dt.items) == 0 {
		return nil, 0, errors.New("ECSV header has no datatype list")
	}
	seen := map[string]bool{}
	for i, it := range dt.items {
		if it.kind != 'm' {
			return nil, 0, fmt.Errorf("ECSV datatype entry %d is not a mapping", i+1)
		}
		c := Column{
			Name:        it.get("name").text(),
			Unit:        it.get("unit").text(),
			Description: it.get("description").text(),
			Datatype:    it.get("datatype").text(),
		}
		if c.Name == "" {
			return nil, 0, fmt.Errorf("ECSV datatype entry %d has no name", i+1)
		}
		if seen[c.Name] {
			return nil, 0, fmt.Errorf("ECSV column name %q repeated", clip(c.Name))
		}
		seen[c.Name] = true
		if it.get("subtype") != nil {
			return nil, 0, fmt.Errorf("ECSV column %q has a subtype (multidimensional or object column): not supported", clip(c.Name))
		}
		if !numericDatatype(c.Datatype) && c.Datatype != "bool" && c.Datatype != "string" {
			return nil, 0, fmt.Errorf("ECSV column %q has datatype %q: not supported", clip(c.Name), clip(c.Datatype))
		}
		h.cols = append(h.cols, c)
	}
	if m := root.get("meta"); m != nil {
		switch m.kind {
		case 'm':
			for i, k := range m.keys {
				h.meta = append(h.meta, Meta{k, m.vals[i].text()})
			}
		case 'l': // !!omap: a sequence of one-entry mappings
			for _, it := range m.items {
				if it.kind != 'm' || len(it.keys) != 1 {
					return nil, 0, errors.New("ECSV meta: ordered map entries must be one-key mappings")
				}
				h.meta = append(h.meta, Meta{it.keys[0], it.vals[0].text()})
			}
		case 's':
			if m.s != "" {
				return nil, 0, errors.New("ECSV meta is not a mapping")
			}
		}
	}
	h.schema = root.get("schema").text()
	return h, n, nil
}

// ReadECSV reads an ECSV file written by WriteECSV or by astropy (subset
// described above). Every value is checked: a malformed row or value is an
// error naming its line. At most MaxFileBytes are read.
func ReadECSV(r io.Reader) (*Table, error) {
	data, err := io.ReadAll(io.LimitReader(r, MaxFileBytes+1))
	if err != nil {
		return nil, fmt.Errorf("fit: ecsv: %w", err)
	}
	t, err := scanTable("ecsv", data)
	if err != nil {
		return nil, err
	}
	if !t.ecsv {
		return nil, errors.New("fit: ecsv: missing \"# %ECSV\" first line")
	}
	out := &Table{Meta: t.hdr.meta, Delimiter: t.hdr.delimiter}
	out.Columns = make([]Column, len(t.hdr.cols))
	copy(out.Columns, t.hdr.cols)
	var fields []string
	for i := t.dataStart; i < len(t.lines); i++ {
		if classify(t.lines[i], t) != lineData {
			continue
		}
		var bad bool
		fields, bad = t.split(t.lines[i], fields[:0])
		if bad {
			return nil, fmt.Errorf("fit: ecsv: line %d: malformed quoted field", i+1)
		}
		if len(fields) != len(out.Columns) {
			return nil, fmt.Errorf("fit: ecsv: line %d: %d fields, expected %d", i+1, len(fields), len(out.Columns))
		}
		for j, f := range fields {
			c := &out.Columns[j]
			if err := c.appendValue(f); err != nil {
				return nil, fmt.Errorf("fit: ecsv: line %d column %q: %w", i+1, clip(c.Name), err)
			}
		}
	}
	// Give empty tables empty (not nil) slices of the right kind.
	for j := range out.Columns {
		c := &out.Columns[j]
		if c.Len() == 0 {
			switch {
			case strings.HasPrefix(c.Datatype, "float"):
				c.Float = []float64{}
			case c.Datatype == "bool":
				c.Bool = []bool{}
			case c.Datatype == "string":
				c.String = []string{}
			default:
				c.Int = []int64{}
			}
		}
	}
	return out, nil
}

func (c *Column) appendValue(f string) error {
	dt := c.Datatype
	switch {
	case dt == "string":
		c.String = append(c.String, f)
	case dt == "bool":
		switch f {
		case "True", "true":
			c.Bool = append(c.Bool, true)
		case "False", "false":
			c.Bool = append(c.Bool, false)
		default:
			return fmt.Errorf("%q is not a boolean", clip(f))
		}
	case strings.HasPrefix(dt, "float"):
		if f == "" {
			return errors.New("empty (masked) value not supported")
		}
		v, err := strconv.ParseFloat(f, 64)
		if err != nil {
			return fmt.Errorf("%q is not a number", clip(f))
		}
		c.Float = append(c.Float, v)
	default:
		if f == "" {
			return errors.New("empty (masked) value not supported")
		}
		v, err := strconv.ParseInt(f, 10, 64)
		if err != nil {
			return fmt.Errorf("%q is not an int64 integer", clip(f))
		}
		if strings.HasPrefix(dt, "uint") && v < 0 {
			return fmt.Errorf("%d is negative in an unsigned column", v)
		}
		c.Int = append(c.Int, v)
	}
	return nil
}
