package fit

import (
	"errors"
	"fmt"
	"strconv"
	"strings"
	"unicode/utf8"
)

// This file holds the small YAML reader the ECSV header needs. It covers what
// YAML writers (PyYAML through astropy, and our own writer) put in an ECSV
// header: block mappings and sequences, flow mappings and sequences that may
// continue over several lines, plain, single- and double-quoted scalars,
// comments, and tags such as !!omap (kept, otherwise ignored). Anchors,
// aliases, block scalars (| and >) and multiple documents are not supported
// and give an error.

type ynode struct {
	kind  byte // 's' scalar, 'm' mapping, 'l' sequence
	s     string
	tag   string
	keys  []string
	vals  []*ynode
	items []*ynode
}

func (n *ynode) get(key string) *ynode {
	if n == nil || n.kind != 'm' {
		return nil
	}
	for i, k := range n.keys {
		if k == key {
			return n.vals[i]
		}
	}
	return nil
}

// text returns a scalar's value, or a compact flow rendering of a collection.
func (n *ynode) text() string {
	if n == nil {
		return ""
	}
	switch n.kind {
	case 'm':
		parts := make([]string, len(n.keys))
		for i, k := range n.keys {
			parts[i] = yamlScalar(k) + ": " + n.vals[i].flow()
		}
		return "{" + strings.Join(parts, ", ") + "}"
	case 'l':
		parts := make([]string, len(n.items))
		for i, it := range n.items {
			parts[i] = it.flow()
		}
		return "[" + strings.Join(parts, ", ") + "]"
	}
	return n.s
}

func (n *ynode) flow() string {
	if n.kind == 's' {
		return yamlScalar(n.s)
	}
	return n.text()
}

// maxYAMLDepth bounds nesting so hostile headers cannot exhaust the stack.
const maxYAMLDepth = 64

type yparser struct {
	lines []string
	first int // line number (1-based) of lines[0] in the file
	pos   int
	depth int
}

func (p *yparser) errorf(format string, a ...any) error {
	return fmt.Errorf("ECSV header line %d: %s", p.first+min(p.pos, len(p.lines)-1), fmt.Sprintf(format, a...))
}

func indentOf(s string) int {
	i := 0
	for i < len(s) && s[i] == ' ' {
		i++
	}
	return i
}

// skip advances past empty and comment-only lines.
func (p *yparser) skip() {
	for p.pos < len(p.lines) {
		s := strings.TrimSpace(p.lines[p.pos])
		if s != "" && s[0] != '#' {
			return
		}
		p.pos++
	}
}

func isSeqLine(s string) bool { return s == "-" || strings.HasPrefix(s, "- ") }

// parseBlock parses the block node whose lines are indented by ind.
func (p *yparser) parseBlock(ind int) (*ynode, error) {
	p.depth++
	defer func() { p.depth-- }()
	if p.depth > maxYAMLDepth {
		return nil, p.errorf("nesting deeper than %d", maxYAMLDepth)
	}
	p.skip()
	if p.pos >= len(p.lines) {
		return &ynode{kind: 's'}, nil
	}
	ln := p.lines[p.pos]
	if strings.ContainsRune(ln, '\t') && strings.TrimLeft(ln, " ")[0] == '\t' {
		return nil, p.errorf("tab used for indentation")
	}
	if indentOf(ln) != ind {
		return nil, p.errorf("unexpected indentation")
	}
	body := ln[ind:]
	if isSeqLine(body) {
		n := &ynode{kind: 'l'}
		for {
			p.skip()
			if p.pos >= len(p.lines) {
				return n, nil
			}
			ln := p.lines[p.pos]
			if indentOf(ln) != ind || !isSeqLine(ln[ind:]) {
				if indentOf(ln) > ind {
					return nil, p.errorf("unexpected indentation")
				}
				return n, nil
			}
			rest := strings.TrimLeft(ln[ind+1:], " ")
			var it *ynode
			var err error
			switch {
			case rest == "" || rest[0] == '#':
				p.pos++
				p.skip()
				if p.pos < len(p.lines) && indentOf(p.lines[p.pos]) > ind {
					it, err = p.parseBlock(indentOf(p.lines[p.pos]))
				} else {
					it = &ynode{kind: 's'}
				}
			case rest[0] != '{' && rest[0] != '[' && rest[0] != '"' && rest[0] != '\'' && mappingKeyEnd(rest) >= 0:
				// "- key: value" starts a mapping indented past the dash.
				child := len(ln) - len(rest)
				p.lines[p.pos] = strings.Repeat(" ", child) + rest
				it, err = p.parseBlock(child)
			default:
				p.pos++
				it, err = p.inline(rest, ind)
			}
			if err != nil {
				return nil, err
			}
			n.items = append(n.items, it)
		}
	}
	n := &ynode{kind: 'm'}
	for {
		p.skip()
		if p.pos >= len(p.lines) {
			return n, nil
		}
		ln := p.lines[p.pos]
		li := indentOf(ln)
		if li < ind || (li == ind && isSeqLine(ln[ind:])) {
			return n, nil
		}
		if li > ind {
			return nil, p.errorf("unexpected indentation")
		}
		body := ln[ind:]
		k := mappingKeyEnd(body)
		if k < 0 {
			return nil, p.errorf("expected \"key: value\", found %q", clip(body))
		}
		key, err := p.scalarKey(strings.TrimSpace(body[:k]))
		if err != nil {
			return nil, err
		}
		rest := strings.TrimSpace(body[k+1:])
		tag := ""
		if strings.HasPrefix(rest, "!") {
			tag, rest, _ = strings.Cut(rest, " ")
			rest = strings.TrimSpace(rest)
		}
		p.pos++
		var v *ynode
		if rest == "" || rest[0] == '#' {
			p.skip()
			switch {
			case p.pos < len(p.lines) && indentOf(p.lines[p.pos]) > ind:
				v, err = p.parseBlock(indentOf(p.lines[p.pos]))
			case p.pos < len(p.lines) && indentOf(p.lines[p.pos]) == ind && isSeqLine(p.lines[p.pos][ind:]):
				v, err = p.parseBlock(ind)
			default:
				v = &ynode{kind: 's'}
			}
		} else {
			v, err = p.inline(rest, ind)
		}
		if err != nil {
			return nil, err
		}
		v.tag = tag
		n.keys = append(n.keys, key)
		n.vals = append(n.vals, v)
	}
}

// mappingKeyEnd returns the index of the ':' ending a block mapping key in s,
// or −1. Quoted keys are skipped over.
func mappingKeyEnd(s string) int {
	i := 0
	if len(s) > 0 && (s[0] == '"' || s[0] == '\'') {
		q := s[0]
		i = 1
		for i < len(s) {
			if s[i] == '\\' && q == '"' {
				i += 2
				continue
			}
			if s[i] == q {
				if q == '\'' && i+1 < len(s) && s[i+1] == '\'' {
					i += 2
					continue
				}
				i++
				break
			}
			i++
		}
	}
	for ; i < len(s); i++ {
		if s[i] == '#' && i > 0 && s[i-1] == ' ' {
			return -1
		}
		if s[i] == ':' && (i+1 == len(s) || s[i+1] == ' ') {
			return i
		}
	}
	return -1
}

func (p *yparser) scalarKey(s string) (string, error) {
	if s == "" {
		return "", p.errorf("empty key")
	}
	fp := flowParser{s: s}
	n, err := fp.value(0)
	if err != nil || n.kind != 's' || fp.skipWS() < len(s) {
		return "", p.errorf("unsupported key %q", clip(s))
	}
	return n.s, nil
}

// inline parses a value that starts on the current line (already consumed):
// a flow collection or quoted scalar that may continue on following lines, or
// a plain scalar with possible continuation lines indented past ind.
func (p *yparser) inline(s string, ind int) (*ynode, error) {
	switch s[0] {
	case '&', '*':
		return nil, p.errorf("anchors and aliases are not supported")
	case '|', '>':
		return nil, p.errorf("block scalars are not supported")
	}
	if c := s[0]; c != '{' && c != '[' && c != '"' && c != '\'' && c != '!' {
		// Plain scalar in block context: the rest of the line up to a
		// comment, folded with more-indented continuation lines.
		if i := strings.Index(s, " #"); i >= 0 {
			s = s[:i]
		}
		n := &ynode{kind: 's', s: strings.TrimSpace(s)}
		for p.pos < len(p.lines) {
			c := p.lines[p.pos]
			t := strings.TrimSpace(c)
			if t == "" || indentOf(c) <= ind || t[0] == '#' || mappingKeyEnd(t) >= 0 {
				break
			}
			n.s += " " + t
			p.pos++
		}
		return n, nil
	}
	for {
		fp := flowParser{s: s}
		n, err := fp.value(0)
		if err == nil {
			if j := fp.skipWS(); j < len(s) && s[j] != '#' {
				return nil, p.errorf("unexpected text after value: %q", clip(s[j:]))
			}
			return n, nil
		}
		if !errors.Is(err, errYAMLIncomplete) || p.pos >= len(p.lines) || len(s) > 1<<20 {
			return nil, p.errorf("%v", err)
		}
		s += " " + strings.TrimSpace(p.lines[p.pos])
		p.pos++
	}
}

var errYAMLIncomplete = errors.New("unterminated flow collection or quoted string")

type flowParser struct {
	s string
	i int
}

func (f *flowParser) skipWS() int {
	for f.i < len(f.s) && (f.s[f.i] == ' ' || f.s[f.i] == '\t') {
		f.i++
	}
	return f.i
}

func (f *flowParser) value(depth int) (*ynode, error) {
	if depth > maxYAMLDepth {
		return nil, fmt.Errorf("nesting deeper than %d", maxYAMLDepth)
	}
	f.skipWS()
	if f.i >= len(f.s) {
		return nil, errYAMLIncomplete
	}
	tag := ""
	if f.s[f.i] == '!' {
		j := f.i
		for j < len(f.s) && f.s[j] != ' ' {
			j++
		}
		tag = f.s[f.i:j]
		f.i = j
		f.skipWS()
		if f.i >= len(f.s) {
			return nil, errYAMLIncomplete
		}
	}
	var n *ynode
	var err error
	switch c := f.s[f.i]; c {
	case '{':
		n, err = f.collection(depth, '}')
	case '[':
		n, err = f.collection(depth, ']')
	case '"':
		n, err = f.doubleQuoted()
	case '\'':
		n, err = f.singleQuoted()
	case '&', '*', '|', '>', '%', '@', '`':
		return nil, fmt.Errorf("unsupported YAML indicator %q", c)
	default:
		n = f.plain()
	}
	if n != nil {
		n.tag = tag
	}
	return n, err
}

func (f *flowParser) collection(depth int, close byte) (*ynode, error) {
	f.i++ // opening bracket
	n := &ynode{kind: 'l'}
	if close == '}' {
		n.kind = 'm'
	}
	for {
		f.skipWS()
		if f.i >= len(f.s) {
			return nil, errYAMLIncomplete
		}
		if f.s[f.i] == close {
			f.i++
			return n, nil
		}
		item, err := f.value(depth + 1)
		if err != nil {
			return nil, err
		}
		f.skipWS()
		if f.i >= len(f.s) {
			return nil, errYAMLIncomplete
		}
		if n.kind == 'm' {
			if item.kind != 's' {
				return nil, errors.New("collection used as a mapping key")
			}
			var v *ynode
			if f.s[f.i] == ':' {
				f.i++
				f.skipWS()
				if f.i >= len(f.s) {
					return nil, errYAMLIncomplete
				}
				if f.s[f.i] == ',' || f.s[f.i] == '}' {
					v = &ynode{kind: 's'}
				} else if v, err = f.value(depth + 1); err != nil {
					return nil, err
				}
			} else {
				v = &ynode{kind: 's'}
			}
			n.keys = append(n.keys, item.s)
			n.vals = append(n.vals, v)
		} else {
			n.items = append(n.items, item)
		}
		f.skipWS()
		if f.i >= len(f.s) {
			return nil, errYAMLIncomplete
		}
		switch f.s[f.i] {
		case ',':
			f.i++
		case close:
		default:
			return nil, fmt.Errorf("expected ',' or %q in flow collection, found %q", close, f.s[f.i])
		}
	}
}

// plain reads a plain scalar in flow context: up to ',', ']', '}', ": " or
// " #".
func (f *flowParser) plain() *ynode {
	start := f.i
	for f.i < len(f.s) {
		c := f.s[f.i]
		if c == ',' || c == ']' || c == '}' {
			break
		}
		if c == ':' && (f.i+1 == len(f.s) || f.s[f.i+1] == ' ' || f.s[f.i+1] == ',' || f.s[f.i+1] == '}' || f.s[f.i+1] == ']') {
			break
		}
		if c == '#' && f.i > start && f.s[f.i-1] == ' ' {
			break
		}
		f.i++
	}
	return &ynode{kind: 's', s: strings.TrimSpace(f.s[start:f.i])}
}

func (f *flowParser) singleQuoted() (*ynode, error) {
	f.i++
	var b strings.Builder
	for f.i < len(f.s) {
		c := f.s[f.i]
		f.i++
		if c == '\'' {
			if f.i < len(f.s) && f.s[f.i] == '\'' {
				b.WriteByte('\'')
				f.i++
				continue
			}
			return &ynode{kind: 's', s: b.String()}, nil
		}
		b.WriteByte(c)
	}
	return nil, errYAMLIncomplete
}

func (f *flowParser) doubleQuoted() (*ynode, error) {
	f.i++
	var b strings.Builder
	for f.i < len(f.s) {
		c := f.s[f.i]
		f.i++
		switch c {
		case '"':
			return &ynode{kind: 's', s: b.String()}, nil
		case '\\':
			if f.i >= len(f.s) {
				return nil, errYAMLIncomplete
			}
			e := f.s[f.i]
			f.i++
			simple := map[byte]string{'0': "\x00", 'a': "\a", 'b': "\b", 't': "\t", '\t': "\t", 'n': "\n",
				'v': "\v", 'f': "\f", 'r': "\r", 'e': "\x1b", ' ': " ", '"': "\"", '/': "/", '\\': "\\",
				'N': "\u0085", '_': "\u00a0", 'L': "\u2028", 'P': "\u2029"}
			if r, ok := simple[e]; ok {
				b.WriteString(r)
				continue
			}
			width := map[byte]int{'x': 2, 'u': 4, 'U': 8}[e]
			if width == 0 {
				return nil, fmt.Errorf("unknown escape \\%c in double-quoted string", e)
			}
			if f.i+width > len(f.s) {
				return nil, errYAMLIncomplete
			}
			v, err := strconv.ParseUint(f.s[f.i:f.i+width], 16, 32)
			if err != nil || !utf8.ValidRune(rune(v)) {
				return nil, fmt.Errorf("bad escape \\%c%s", e, f.s[f.i:f.i+width])
			}
			b.WriteRune(rune(v))
			f.i += width
		default:
			b.WriteByte(c)
		}
	}
	return nil, errYAMLIncomplete
}

// yamlScalar renders s as a YAML scalar usable in flow context: plain when
// unambiguous, double-quoted (Go escapes, which are a subset of YAML's)
// otherwise, including every string a YAML reader would take for a number,
// boolean or null.
func yamlScalar(s string) string {
	if plainSafe(s) {
		return s
	}
	return strconv.Quote(strings.ToValidUTF8(s, "\uFFFD"))
}

func plainSafe(s string) bool {
	if s == "" || len(s) > 200 {
		return false
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c >= 'a' && c <= 'z', c >= 'A' && c <= 'Z', c == '_':
		case c >= '0' && c <= '9', c == '.', c == '/', c == '(', c == ')', c == '^', c == '*':
			if i == 0 && c != '(' && !(c >= '0' && c <= '9') {
				return false
			}
		case c == '+', c == '-':
			if i == 0 {
				return false
			}
		case c == ' ':
			if i == 0 || i == len(s)-1 {
				return false
			}
		default:
			return false
		}
	}
	switch strings.ToLower(s) {
	case "true", "false", "yes", "no", "on", "off", "null", "y", "n", ".nan", ".inf":
		return false
	}
	if _, err := strconv.ParseFloat(s, 64); err == nil {
		return false
	}
	if c := s[0]; c >= '0' && c <= '9' {
		return false // leading digit: could be read as a number, date or octal
	}
	return true
}
