package fit

import (
	"bytes"
	"fmt"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"
)

// table is a text file cut into lines, with its header decoded: the common
// ground of Sniff, Parse and ReadECSV.
type table struct {
	file   string
	format string   // "plain" or "ecsv"
	lines  []string // every line of the file, without line terminators
	comma  bool     // fields separated by commas (else by runs of blanks)
	ecsv   bool

	names, units, dtypes []string // per column; units and dtypes only for ECSV
	ncol                 int
	hdr                  *ecsvHeader

	headerLine int // 1-based line of the column-names row, 0 if none
	dataStart  int // index in lines of the first line after the header part
	// Accounting of lines[:dataStart].
	headerLines, commentLines, blankLines int
}

type lineKind int

const (
	lineData lineKind = iota
	lineBlank
	lineComment
)

func classify(ln string, t *table) lineKind {
	for i := 0; i < len(ln); i++ {
		switch ln[i] {
		case ' ', '\t', '\v', '\f':
			continue
		case '#':
			return lineComment
		}
		return lineData
	}
	return lineBlank
}

func isBlankOrComment(ln string, t *table) bool { return classify(ln, t) != lineData }

// splitLines cuts s into lines at \n, \r\n or (for files with no \n at all)
// \r; a final terminator does not start an extra line.
func splitLines(s string) []string {
	sep := "\n"
	if !strings.Contains(s, "\n") && strings.Contains(s, "\r") {
		sep = "\r"
	}
	lines := strings.Split(s, sep)
	if len(lines) > 0 && lines[len(lines)-1] == "" {
		lines = lines[:len(lines)-1]
	}
	if sep == "\n" {
		for i, l := range lines {
			if n := len(l); n > 0 && l[n-1] == '\r' {
				lines[i] = l[:n-1]
			}
		}
	}
	return lines
}

// scanTable reads the structure of a photometry or ECSV file: lines, format,
// delimiter, column names. Row contents are not checked here.
func scanTable(name string, data []byte) (*table, error) {
	if len(data) > MaxFileBytes {
		return nil, fmt.Errorf("fit: %s: file is %d bytes, more than the %d accepted", name, len(data), MaxFileBytes)
	}
	if n := bytes.Count(data, []byte{'\n'}); n > MaxLines {
		return nil, fmt.Errorf("fit: %s: %d lines, more than the %d accepted", name, n, MaxLines)
	}
	if i := bytes.IndexByte(data, 0); i >= 0 {
		return nil, fmt.Errorf("fit: %s: contains a NUL byte at offset %d; not a text file", name, i)
	}
	data = bytes.TrimPrefix(data, []byte("\xef\xbb\xbf")) // UTF-8 byte-order mark
	t := &table{file: name, format: "plain", lines: splitLines(string(data))}
	if len(t.lines) > 0 && strings.HasPrefix(t.lines[0], "# %ECSV") {
		return t, t.scanECSV()
	}
	return t, t.scanPlain()
}

func (t *table) scanPlain() error {
	first := -1
	for i, ln := range t.lines {
		if k := classify(ln, t); k != lineData {
			continue
		}
		first = i
		break
	}
	if first < 0 {
		return fmt.Errorf("fit: %s: no data rows (only blank or comment lines)", t.file)
	}
	// Delimiter: commas if the first non-comment line or the line after it
	// has a comma outside quotes and comments.
	t.comma = hasComma(t.lines[first])
	if !t.comma {
		for _, ln := range t.lines[first+1:] {
			if classify(ln, t) == lineData {
				t.comma = hasComma(ln)
				break
			}
		}
	}
	fields, _ := t.split(t.lines[first], nil)
	header := len(fields) > 0
	for _, f := range fields {
		if _, err := strconv.ParseFloat(f, 64); err == nil || f == "" {
			header = false
			break
		}
	}
	for _, ln := range t.lines[:first] {
		if classify(ln, t) == lineBlank {
			t.blankLines++
		} else {
			t.commentLines++
		}
	}
	t.ncol = len(fields)
	if header {
		t.names = cleanNames(fields)
		t.headerLine = first + 1
		t.headerLines = 1
		t.dataStart = first + 1
		return nil
	}
	t.dataStart = first
	// A commented header just above the data: "# HJD mag err".
	for i := first - 1; i >= 0; i-- {
		ln := t.lines[i]
		if classify(ln, t) == lineBlank {
			continue
		}
		body := strings.TrimLeft(strings.TrimSpace(ln), "#")
		cf, bad := t.split(body, nil)
		if !bad && len(cf) == t.ncol {
			allText := true
			for _, f := range cf {
				if _, err := strconv.ParseFloat(f, 64); err == nil || f == "" {
					allText = false
				}
			}
			if allText {
				t.names = cleanNames(cf)
			}
		}
		break
	}
	if t.names == nil {
		t.names = make([]string, t.ncol)
		for i := range t.names {
			t.names[i] = "col" + strconv.Itoa(i+1)
		}
	}
	return nil
}

func cleanNames(f []string) []string {
	out := make([]string, len(f))
	for i, s := range f {
		out[i] = clip(cleanLabel(s))
	}
	return out
}

// cleanLabel replaces invalid UTF-8 and control characters (which labels in
// a notebook may not hold) by U+FFFD.
func cleanLabel(s string) string {
	s = strings.ToValidUTF8(s, "\uFFFD")
	return strings.Map(func(r rune) rune {
		if unicode.IsControl(r) {
			return '\uFFFD'
		}
		return r
	}, s)
}

func hasComma(ln string) bool {
	q := false
	for i := 0; i < len(ln); i++ {
		switch ln[i] {
		case '"':
			q = !q
		case '#':
			if !q {
				return false
			}
		case ',':
			if !q {
				return true
			}
		}
	}
	return false
}

func (t *table) scanECSV() error {
	t.format = "ecsv"
	t.ecsv = true
	hdr, n, err := parseECSVHeader(t.lines)
	if err != nil {
		return fmt.Errorf("fit: %s: %w", t.file, err)
	}
	t.hdr = hdr
	t.comma = hdr.delimiter == ','
	t.headerLines = n
	// The first non-comment line after the YAML header is the names row.
	i := n
	for ; i < len(t.lines); i++ {
		switch classify(t.lines[i], t) {
		case lineBlank:
			t.blankLines++
			continue
		case lineComment:
			t.commentLines++
			continue
		}
		break
	}
	if i == len(t.lines) {
		return fmt.Errorf("fit: %s: ECSV file has no column-names row after its header", t.file)
	}
	names, bad := t.split(t.lines[i], nil)
	if bad {
		return fmt.Errorf("fit: %s:%d: malformed quoted field in the column-names row", t.file, i+1)
	}
	if len(names) != len(hdr.cols) {
		return fmt.Errorf("fit: %s:%d: column-names row has %d names, the header declares %d columns", t.file, i+1, len(names), len(hdr.cols))
	}
	for j, c := range hdr.cols {
		if names[j] != c.Name {
			return fmt.Errorf("fit: %s:%d: column %d is named %q in the data but %q in the header", t.file, i+1, j+1, clip(names[j]), clip(c.Name))
		}
		t.names = append(t.names, c.Name)
		t.units = append(t.units, c.Unit)
		t.dtypes = append(t.dtypes, c.Datatype)
	}
	t.ncol = len(names)
	t.headerLine = i + 1
	t.headerLines++
	t.dataStart = i + 1
	return nil
}

// split appends the fields of one line to dst. For plain files a '#' outside
// quotes ends the line. bad reports a malformed quoted field.
func (t *table) split(ln string, dst []string) (fields []string, bad bool) {
	if strings.IndexByte(ln, '"') < 0 {
		if !t.ecsv {
			if i := strings.IndexByte(ln, '#'); i >= 0 {
				ln = ln[:i]
			}
		}
		if t.comma {
			if strings.TrimSpace(ln) == "" {
				return dst, false
			}
			for {
				i := strings.IndexByte(ln, ',')
				if i < 0 {
					return append(dst, trimBlank(ln)), false
				}
				dst = append(dst, trimBlank(ln[:i]))
				ln = ln[i+1:]
			}
		}
		for i := 0; i < len(ln); {
			for i < len(ln) && isBlank(ln[i]) {
				i++
			}
			j := i
			for j < len(ln) && !isBlank(ln[j]) {
				j++
			}
			if j > i {
				dst = append(dst, ln[i:j])
			}
			i = j
		}
		return dst, false
	}
	return t.splitQuoted(ln, dst)
}

// splitQuoted is the slow path of split for lines with double quotes:
// "a ""b"" c" is the field a "b" c.
func (t *table) splitQuoted(ln string, dst []string) ([]string, bool) {
	n := len(ln)
	i := 0
	end := func() bool { return i == n || (!t.ecsv && ln[i] == '#') }
	afterComma := false
	for {
		for i < n && isBlank(ln[i]) {
			i++
		}
		if end() {
			if afterComma {
				dst = append(dst, "") // trailing comma: empty last field
			}
			return dst, false
		}
		if ln[i] == '"' {
			var b strings.Builder
			i++
			closed := false
			for i < n {
				c := ln[i]
				i++
				if c == '"' {
					if i < n && ln[i] == '"' {
						b.WriteByte('"')
						i++
						continue
					}
					closed = true
					break
				}
				b.WriteByte(c)
			}
			if !closed {
				return dst, true
			}
			dst = append(dst, b.String())
			if !t.comma && !end() && !isBlank(ln[i]) {
				return dst, true // text straight after a closing quote
			}
		} else {
			j := i
			for j < n && ln[j] != '"' && !(t.comma && ln[j] == ',') && !(!t.comma && isBlank(ln[j])) && !(!t.ecsv && ln[j] == '#') {
				j++
			}
			if j < n && ln[j] == '"' {
				return dst, true // quote inside an unquoted field
			}
			dst = append(dst, trimBlank(ln[i:j]))
			i = j
		}
		for i < n && isBlank(ln[i]) {
			i++
		}
		if end() {
			return dst, false
		}
		afterComma = false
		if t.comma {
			if ln[i] != ',' {
				return dst, true
			}
			i++
			afterComma = true
		}
	}
}

func isBlank(c byte) bool { return c == ' ' || c == '\t' || c == '\v' || c == '\f' }

func trimBlank(s string) string {
	i, j := 0, len(s)
	for i < j && isBlank(s[i]) {
		i++
	}
	for j > i && isBlank(s[j-1]) {
		j--
	}
	return s[i:j]
}

func numericDatatype(dt string) bool {
	switch dt {
	case "float16", "float32", "float64", "float128",
		"int8", "int16", "int32", "int64", "uint8", "uint16", "uint32", "uint64":
		return true
	}
	return false
}

// validText reports whether s is valid UTF-8 (used for labels).
func validText(s string) bool { return utf8.ValidString(s) }
