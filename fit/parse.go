package fit

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strconv"
	"strings"
	"unicode/utf8"
)

// Photometry import happens in two stages so that the page can ask the user
// before anything is decided:
//
//  1. Sniff reads the file and returns a Preview: the detected format, the column
//     names, the first rows, and proposals (which column is time, brightness and
//     uncertainty; magnitude or flux; which time offset turns the times into full
//     Julian dates), each with the reason it was proposed. Nothing is applied.
//  2. Parse reads the file again with the ImportOptions the user confirmed and
//     returns a Dataset in flux units. Every line of the file is accounted for in
//     Dataset.Source.Lines, and every rejected row is in Dataset.Source.Rejected
//     with its line, column and reason.
//
// Accepted inputs:
//
//   - Plain text: one row per line, fields separated by commas or by runs of
//     spaces/tabs (decided from the first data line), '#' starting a comment
//     (whole line or rest of line), an optional header row of column names
//     (the first non-comment line, if any of its fields is not a number). A
//     commented line just above the data with as many fields as the data, e.g.
//     "# HJD mag err", is used for the column names when there is no header row.
//   - ECSV: the enhanced character-separated values format of the ECSV 1.0
//     standard (astropy APE 6): a "# %ECSV 1.0" line, a YAML header in '#'
//     comment lines giving the columns' names, units and datatypes, then a row
//     of column names and space- or comma-separated rows. The subset astropy
//     writes for float, int, bool and string columns is supported; masked
//     (empty) values in the photometry columns are rejected rows.

// ValueKind says what the brightness column holds.
type ValueKind int

const (
	KindUnset ValueKind = iota // not chosen: Parse refuses to guess
	KindMag                    // magnitudes, converted with the zero point
	KindFlux                   // fluxes on the scale set by the zero point
)

func (k ValueKind) String() string {
	switch k {
	case KindUnset:
		return "unset"
	case KindMag:
		return "magnitude"
	case KindFlux:
		return "flux"
	}
	return fmt.Sprintf("ValueKind(%d)", int(k))
}

// MarshalText writes the kind by name ("unset", "magnitude", "flux").
func (k ValueKind) MarshalText() ([]byte, error) {
	if k < KindUnset || k > KindFlux {
		return nil, fmt.Errorf("fit: invalid value kind %d", int(k))
	}
	return []byte(k.String()), nil
}

// UnmarshalText reads "unset", "magnitude" or "flux".
func (k *ValueKind) UnmarshalText(b []byte) error {
	for _, v := range []ValueKind{KindUnset, KindMag, KindFlux} {
		if string(b) == v.String() {
			*k = v
			return nil
		}
	}
	return fmt.Errorf("fit: unknown value kind %q", clip(string(b)))
}

// Limits of the photometry reader. Plausible magnitudes: brighter than −5 is no
// star seen through a survey telescope (Sirius is −1.46, from memory) and fainter
// than 35 is beyond the deepest images ever taken (about 31 in the Hubble deep
// fields, from memory). Values outside almost always are pipeline placeholders
// such as 99.999 or −99 standing for "no measurement", so such rows are rejected.
const (
	MagMin = -5.0 // brightest accepted magnitude
	MagMax = 35.0 // faintest accepted magnitude

	// DefaultZeroPoint is used when ImportOptions.ZeroPoint is 0: fluxes are
	// F = 10^(0.4·(25 − m)), i.e. about 10³ for a 17.5 mag star.
	DefaultZeroPoint = 25.0

	// MaxFileBytes and MaxRows bound what one file may hold, so that a
	// mistaken upload (a video, a huge catalogue) fails early and clearly.
	MaxFileBytes = 64 << 20
	MaxRows      = 1_000_000 // data rows (accepted or rejected)
	MaxLines     = 2_000_000 // lines of any kind
	// MaxRejected bounds the problems recorded for one file: a file with
	// more bad rows than this is read with the wrong settings, and its
	// record would crowd the notebook (MaxRejectedRows in all).
	MaxRejected = 100_000
)

// TimeOffset is a constant that, added to the times in a file, gives full
// Julian dates.
type TimeOffset struct {
	Days  float64 `json:"days"`  // added to every time (days)
	Label string  `json:"label"` // e.g. "JD − 2450000"
}

// TimeOffsets are the offsets Sniff can propose: full JD, the two reduced
// Julian dates in common use in the microlensing literature (common practice),
// and the modified Julian date MJD = JD − 2400000.5 (IAU convention, from memory).
var TimeOffsets = []TimeOffset{
	{0, "full JD"},
	{2450000, "JD − 2450000"},
	{2460000, "JD − 2460000"},
	{2400000.5, "MJD (JD − 2400000.5)"},
}

// ImportOptions are the user's confirmed choices for reading one file. The
// zero value is not usable: columns and kind must be chosen (Preview.Proposed
// holds a filled-in proposal to start from).
type ImportOptions struct {
	TimeCol  int       `json:"time_col"`  // 1-based column of the times
	ValueCol int       `json:"value_col"` // 1-based column of magnitudes or fluxes
	ErrCol   int       `json:"err_col"`   // 1-based column of the 1σ uncertainties (same unit as ValueCol)
	Kind     ValueKind `json:"kind"`      // magnitude or flux; KindUnset is an error

	// TimeOffset (days) is added to every time to give full Julian dates;
	// 0 means the file already holds full JD.
	TimeOffset float64 `json:"time_offset"`
	TimeSystem string  `json:"time_system"` // label such as "HJD-UTC"; never guessed

	Name string  `json:"name"` // dataset name (telescope, site); "" means the file name
	Band string  `json:"band"` // band label, e.g. "I"
	LD   float64 `json:"ld"`   // linear limb-darkening coefficient u in [0, 1)

	// ZeroPoint ZP (mag) in m = ZP − 2.5 log10 F; 0 means DefaultZeroPoint.
	ZeroPoint float64 `json:"zero_point"`
}

func (o *ImportOptions) zeroPoint() float64 {
	if o.ZeroPoint == 0 {
		return DefaultZeroPoint
	}
	return o.ZeroPoint
}

// check validates the options against a table of ncol columns.
func (o *ImportOptions) check(ncol int) error {
	for _, c := range []struct {
		name string
		v    int
	}{{"time", o.TimeCol}, {"value", o.ValueCol}, {"uncertainty", o.ErrCol}} {
		if c.v == 0 {
			return fmt.Errorf("fit: %s column not chosen", c.name)
		}
		if c.v < 1 || c.v > ncol {
			return fmt.Errorf("fit: %s column %d out of range: the file has %d columns", c.name, c.v, ncol)
		}
	}
	if o.TimeCol == o.ValueCol || o.TimeCol == o.ErrCol || o.ValueCol == o.ErrCol {
		return errors.New("fit: time, value and uncertainty must be three different columns")
	}
	if o.Kind != KindMag && o.Kind != KindFlux {
		return errors.New("fit: choose whether the values are magnitudes or fluxes")
	}
	if !finite(o.TimeOffset) || math.Abs(o.TimeOffset) > 1e7 {
		return fmt.Errorf("fit: time offset %g days is not plausible", o.TimeOffset)
	}
	if zp := o.zeroPoint(); !finite(zp) || zp < -10 || zp > 100 {
		return fmt.Errorf("fit: zero point %g is not plausible (expected −10..100 mag)", o.ZeroPoint)
	}
	if !(o.LD >= 0 && o.LD < 1) {
		return fmt.Errorf("fit: limb-darkening coefficient %g outside [0, 1)", o.LD)
	}
	for _, s := range []string{o.Name, o.Band, o.TimeSystem} {
		if len(s) > MaxNameLen {
			return fmt.Errorf("fit: label longer than %d bytes", MaxNameLen)
		}
		if cleanLabel(s) != s {
			return fmt.Errorf("fit: label %q contains control characters or invalid UTF-8", clip(s))
		}
	}
	return nil
}

// Preview is what Sniff found in a file: facts and proposals, nothing applied.
type Preview struct {
	File       string   `json:"file"`
	Format     string   `json:"format"`      // "plain" or "ecsv"
	Delimiter  string   `json:"delimiter"`   // "whitespace" or "comma"
	Names      []string `json:"names"`       // column names, from the header; "col1", "col2", … when there is none
	Units      []string `json:"units"`       // column units (ECSV only; nil otherwise)
	HeaderLine int      `json:"header_line"` // 1-based line of the column-names row, 0 if none
	Columns    int      `json:"columns"`     // number of columns

	Rows     [][]string `json:"rows"`      // the first data rows (at most PreviewRows), split into fields
	RowLines []int      `json:"row_lines"` // 1-based line number of each row in Rows
	DataRows int        `json:"data_rows"` // number of non-comment, non-blank lines after the header

	// Proposed holds the proposed columns, kind and time offset, with the
	// file name as dataset name. The user confirms or edits it before Parse.
	Proposed ImportOptions `json:"proposed"`
	// Why explains each proposal in a sentence, for display.
	Why []string `json:"why"`
	// OffsetAmbiguous is true when the times fit more than one entry of
	// TimeOffsets; the user must then choose.
	OffsetAmbiguous bool `json:"offset_ambiguous"`
}

// PreviewRows is how many rows Sniff returns in Preview.Rows.
const PreviewRows = 20

// sniffSample is how many data rows Sniff reads to make its proposals.
const sniffSample = 5000

// Sniff reads a photometry file and proposes how to import it. It fails only
// when the file cannot be read as a table at all (binary, empty, too large,
// malformed ECSV header); bad rows are left to Parse, which reports them.
func Sniff(name string, data []byte) (*Preview, error) {
	t, err := scanTable(name, data)
	if err != nil {
		return nil, err
	}
	p := &Preview{
		File:       name,
		Format:     t.format,
		Delimiter:  "whitespace",
		Names:      t.names,
		Units:      t.units,
		HeaderLine: t.headerLine,
		Columns:    t.ncol,
	}
	if t.comma {
		p.Delimiter = "comma"
	}
	var fields []string
	var samples [][]float64 // per column, parsed numbers from the sample rows
	samples = make([][]float64, t.ncol)
	n := 0
	for i := t.dataStart; i < len(t.lines); i++ {
		ln := t.lines[i]
		if isBlankOrComment(ln, t) {
			continue
		}
		p.DataRows++
		if n >= sniffSample {
			continue
		}
		n++
		var bad bool
		fields, bad = t.split(ln, fields[:0])
		if len(p.Rows) < PreviewRows {
			p.Rows = append(p.Rows, slices.Clone(fields))
			p.RowLines = append(p.RowLines, i+1)
		}
		if bad || len(fields) != t.ncol {
			continue
		}
		for c, f := range fields {
			if v, err := strconv.ParseFloat(f, 64); err == nil && finite(v) {
				samples[c] = append(samples[c], v)
			}
		}
	}
	p.propose(t, samples)
	return p, nil
}

// propose fills Proposed and Why from the header names and sample values.
func (p *Preview) propose(t *table, samples [][]float64) {
	o := &p.Proposed
	o.Name = clip2(cleanLabel(p.File), MaxNameLen-8)
	// Columns: by name when the header says so, else the first three columns.
	o.TimeCol = findCol(p.Names, "bjd", "hjd", "jd", "mjd", "time", "date", "t", "epoch")
	o.ValueCol = findCol(p.Names, "mag", "magnitude", "flux", "f", "counts", "m")
	o.ErrCol = findCol(p.Names, "err", "error", "sigma", "mag_err", "magerr", "e_mag", "emag",
		"flux_err", "fluxerr", "e_flux", "eflux", "dmag", "dflux", "unc", "uncertainty", "sig")
	byName := o.TimeCol > 0 && o.ValueCol > 0 && o.ErrCol > 0 &&
		o.TimeCol != o.ValueCol && o.TimeCol != o.ErrCol && o.ValueCol != o.ErrCol
	if byName {
		p.Why = append(p.Why, fmt.Sprintf("columns chosen by their names: time %q, value %q, uncertainty %q",
			p.Names[o.TimeCol-1], p.Names[o.ValueCol-1], p.Names[o.ErrCol-1]))
	} else if p.Columns >= 3 {
		o.TimeCol, o.ValueCol, o.ErrCol = 1, 2, 3
		p.Why = append(p.Why, "columns 1, 2, 3 proposed as time, value, uncertainty (the usual order; names did not decide)")
	} else {
		o.TimeCol, o.ValueCol, o.ErrCol = 0, 0, 0
		p.Why = append(p.Why, fmt.Sprintf("the file has %d columns; time, value and uncertainty need three", p.Columns))
		return
	}
	if p.Columns > 3 {
		p.Why = append(p.Why, fmt.Sprintf("%d other columns will be ignored", p.Columns-3))
	}

	// Kind: the header name or ECSV unit first, then the value range.
	vname := strings.ToLower(p.Names[o.ValueCol-1])
	vunit := ""
	if len(p.Units) >= o.ValueCol {
		vunit = strings.ToLower(p.Units[o.ValueCol-1])
	}
	vals, errs := samples[o.ValueCol-1], samples[o.ErrCol-1]
	switch {
	case vunit == "mag" || strings.Contains(vname, "mag"):
		o.Kind = KindMag
		p.Why = append(p.Why, "magnitudes: the value column is named or labelled as magnitudes")
	case strings.Contains(vname, "flux") || strings.Contains(vname, "count"):
		o.Kind = KindFlux
		p.Why = append(p.Why, "fluxes: the value column is named as flux")
	case len(vals) == 0:
		p.Why = append(p.Why, "magnitude or flux: no numeric values to judge from")
	default:
		lo, hi := minMax(vals)
		medErr := median(errs)
		// Magnitudes of microlensing sources lie within a few magnitudes of
		// each other in a plausible range, with uncertainties well below one
		// magnitude; fluxes of difference photometry go negative, and fluxes on
		// most zero points exceed 35 (common practice, no source).
		if lo >= MagMin && hi <= MagMax && hi-lo < 10 && (len(errs) == 0 || medErr < 1) {
			o.Kind = KindMag
			p.Why = append(p.Why, fmt.Sprintf("magnitudes: values span %.4g..%.4g, a plausible magnitude range, with median uncertainty %.3g", lo, hi, medErr))
		} else {
			o.Kind = KindFlux
			p.Why = append(p.Why, fmt.Sprintf("fluxes: values span %.4g..%.4g, not a plausible magnitude range", lo, hi))
		}
	}

	// Time offset: by the median time.
	times := samples[o.TimeCol-1]
	if len(times) == 0 {
		p.Why = append(p.Why, "time offset: no numeric times to judge from")
		return
	}
	tm := median(times)
	// Plausible full-JD window for CCD photometry: from 1979 (JD 2444000)
	// to about 2038 (JD 2465500); JD 2460000 is 2023 February 24 (from
	// memory). The upper end keeps JD − 2450000 and JD − 2460000 apart for
	// reduced dates above 5500; it must move forward in the 2030s.
	const jdLo, jdHi = 2444000.0, 2465500.0
	var fits []TimeOffset
	for _, off := range TimeOffsets {
		if jd := tm + off.Days; jd >= jdLo && jd <= jdHi {
			fits = append(fits, off)
		}
	}
	tname := strings.ToLower(p.Names[o.TimeCol-1])
	if len(fits) > 1 {
		// The column name may settle it, e.g. "HJD-2450000" or "mjd".
		for _, f := range fits {
			hint := strconv.FormatFloat(f.Days, 'f', -1, 64)
			if f.Days == 2400000.5 {
				hint = "mjd"
			}
			if f.Days != 0 && strings.Contains(tname, hint) {
				fits = []TimeOffset{f}
				p.Why = append(p.Why, fmt.Sprintf("time offset: the time column is named %q", p.Names[o.TimeCol-1]))
				break
			}
		}
	}
	for _, sys := range []string{"hjd", "bjd"} {
		if strings.HasPrefix(tname, sys) {
			p.Why = append(p.Why, fmt.Sprintf("time system: the time column is named %q; set the time-system label (%s, and UTC or TDB) yourself, it is not set from the name",
				p.Names[o.TimeCol-1], strings.ToUpper(sys)))
		}
	}
	switch len(fits) {
	case 0:
		p.Why = append(p.Why, fmt.Sprintf("time offset: median time %.6g fits none of the usual forms; check the time column", tm))
	case 1:
		o.TimeOffset = fits[0].Days
		p.Why = append(p.Why, fmt.Sprintf("time offset: median time %.6g reads as %s", tm, fits[0].Label))
	default:
		// Prefer the most recent epoch: reduced dates below 5000 are far more
		// often JD − 2460000 (2023 on) in newly uploaded data than 1995–2009
		// archives; the page must ask.
		best := fits[0]
		for _, f := range fits[1:] {
			if f.Days+tm > best.Days+tm {
				best = f
			}
		}
		o.TimeOffset = best.Days
		p.OffsetAmbiguous = true
		labels := make([]string, len(fits))
		for i, f := range fits {
			labels[i] = f.Label
		}
		p.Why = append(p.Why, fmt.Sprintf("time offset: median time %.6g is ambiguous (%s); %s proposed, please confirm",
			tm, strings.Join(labels, " or "), best.Label))
	}
}

// findCol returns the 1-based index of the first name in names (case-folded,
// brackets and units stripped) equal to one of the candidates, in candidate
// order; 0 if none.
func findCol(names []string, cands ...string) int {
	for _, c := range cands {
		for i, n := range names {
			n = strings.ToLower(strings.TrimSpace(n))
			if j := strings.IndexAny(n, "([ -"); j > 0 {
				n = n[:j]
			}
			if n == c {
				return i + 1
			}
		}
	}
	return 0
}

// Parse reads a photometry file with the user's confirmed options and returns
// the accepted points in flux units, sorted by time.
//
// Decisions, per row (each rejected row is listed in Source.Rejected with its
// line, column and reason; a row with several bad fields gets one Problem per
// field):
//   - a field count different from the header (or first data row): rejected;
//   - a non-numeric, empty, out-of-range, NaN or Inf field in the time, value or
//     uncertainty column: rejected (other columns are ignored and not checked);
//   - an uncertainty ≤ 0: rejected;
//   - a magnitude outside [MagMin, MagMax]: rejected (placeholder values);
//   - unsorted times: accepted and sorted by time (stable), with a note giving
//     how many rows were out of order; Dataset.Line keeps each point's line;
//   - duplicate times: the first row (in file order) is kept, later rows with
//     the same time are rejected naming the kept line.
//
// Magnitudes become fluxes F = 10^(0.4·(ZP − m)) and uncertainties
// σF = F·σm·ln10/2.5 (first-order error propagation, common practice).
//
// Parse returns an error for unusable options or files (no data, binary,
// header problems). When the file was read but no row was accepted, it returns
// both the Dataset (so the rejections can be shown) and an error.
func Parse(name string, data []byte, opts ImportOptions) (*Dataset, error) {
	t, err := scanTable(name, data)
	if err != nil {
		return nil, err
	}
	if err := opts.check(t.ncol); err != nil {
		return nil, err
	}
	if t.format == "ecsv" {
		for _, c := range []int{opts.TimeCol, opts.ValueCol, opts.ErrCol} {
			if dt := t.dtypes[c-1]; !numericDatatype(dt) {
				return nil, fmt.Errorf("fit: %s: column %q has datatype %s, not a number", name, t.names[c-1], dt)
			}
		}
	}
	if clean := clip2(cleanLabel(name), MaxNameLen-8); clean != name {
		name = clean
		t.file = clean
	}
	if opts.Name == "" {
		opts.Name = name
	}
	zp := opts.zeroPoint()
	d := &Dataset{
		Name:       opts.Name,
		Band:       opts.Band,
		TimeSystem: opts.TimeSystem,
		ZeroPoint:  zp,
		LD:         opts.LD,
	}
	src := &d.Source
	src.File = name
	src.Options = opts
	src.Lines.Total = len(t.lines)
	src.Lines.Header = t.headerLines
	src.Lines.Comment = t.commentLines
	src.Lines.Blank = t.blankLines

	ndata := 0
	for _, ln := range t.lines[t.dataStart:] {
		if classify(ln, t) == lineData {
			ndata++
		}
	}
	if ndata > MaxRows {
		return nil, fmt.Errorf("fit: %s: %d data rows, more than the %d accepted", name, ndata, MaxRows)
	}
	p := rowParser{opts: opts, zp: zp, file: name, mag: opts.Kind == KindMag}
	est := ndata
	d.T = make([]float64, 0, est)
	d.Flux = make([]float64, 0, est)
	d.Err = make([]float64, 0, est)
	d.Line = make([]int, 0, est)
	var fields []string
	rows := 0
	for i := t.dataStart; i < len(t.lines); i++ {
		ln := t.lines[i]
		switch classify(ln, t) {
		case lineBlank:
			src.Lines.Blank++
			continue
		case lineComment:
			src.Lines.Comment++
			continue
		}
		rows++
		var badQuote bool
		fields, badQuote = t.split(ln, fields[:0])
		lineNo := i + 1
		nbefore := len(src.Rejected)
		switch {
		case badQuote:
			src.Rejected = append(src.Rejected, Problem{name, lineNo, 0, "unterminated quoted field"})
		case len(fields) != t.ncol:
			src.Rejected = append(src.Rejected, Problem{name, lineNo, 0,
				fmt.Sprintf("has %d fields, expected %d", len(fields), t.ncol)})
		default:
			tt, f, e, ok := p.row(fields, lineNo, &src.Rejected)
			if ok {
				d.T = append(d.T, tt)
				d.Flux = append(d.Flux, f)
				d.Err = append(d.Err, e)
				d.Line = append(d.Line, lineNo)
			}
		}
		if len(src.Rejected) > nbefore {
			src.Lines.Rejected++
			if len(src.Rejected) > MaxRejected {
				return nil, fmt.Errorf("fit: %s: more than %d problems by line %d (first: line %d: %s); check the column choice and the file format",
					name, MaxRejected, lineNo, src.Rejected[0].Line, src.Rejected[0].Reason)
			}
		}
	}
	if t.ncol > 3 {
		var ign []string
		for c := 1; c <= t.ncol; c++ {
			if c != opts.TimeCol && c != opts.ValueCol && c != opts.ErrCol {
				ign = append(ign, fmt.Sprintf("%d (%s)", c, t.names[c-1]))
			}
		}
		src.Notes = append(src.Notes, clip2("ignored columns: "+strings.Join(ign, ", "), MaxNameLen-8))
	}
	if t.headerLine > 0 {
		src.Notes = append(src.Notes, clip2(fmt.Sprintf("line %d read as column names: %s", t.headerLine, strings.Join(t.names, ", ")), MaxNameLen-8))
	}
	if opts.TimeOffset != 0 {
		src.Notes = append(src.Notes, fmt.Sprintf("%s days added to every time", strconv.FormatFloat(opts.TimeOffset, 'f', -1, 64)))
	}
	sortAndDedupe(d, opts.TimeCol)
	d.Source.Lines.Data = len(d.T)
	if len(d.T) > 0 {
		if tm := d.T[len(d.T)/2]; tm < 2.4e6 || tm > 2.5e6 {
			src.Notes = append(src.Notes, fmt.Sprintf("times (median %.6g) do not look like full Julian dates; check the time offset", tm))
		}
	}
	slices.SortStableFunc(src.Rejected, func(a, b Problem) int { return a.Line - b.Line })
	if len(d.T) == 0 {
		if rows == 0 {
			return d, fmt.Errorf("fit: %s: no data rows", name)
		}
		return d, fmt.Errorf("fit: %s: no valid data rows (%d rejected; first: %s)", name, src.Lines.Rejected, src.Rejected[0].Reason)
	}
	return d, nil
}

// sortAndDedupe sorts the points by time (stable, so equal times keep file
// order) and rejects later duplicates of a time.
func sortAndDedupe(d *Dataset, timeCol int) {
	src := &d.Source
	n := len(d.T)
	unsorted := 0
	for i := 1; i < n; i++ {
		if d.T[i] < d.T[i-1] {
			unsorted++
		}
	}
	if unsorted > 0 {
		idx := make([]int, n)
		for i := range idx {
			idx[i] = i
		}
		sort.SliceStable(idx, func(a, b int) bool { return d.T[idx[a]] < d.T[idx[b]] })
		d.T = permute(d.T, idx)
		d.Flux = permute(d.Flux, idx)
		d.Err = permute(d.Err, idx)
		d.Line = permute(d.Line, idx)
		src.Notes = append(src.Notes, fmt.Sprintf("%d rows were out of time order; points sorted by time (each keeps its line number)", unsorted))
	}
	k := 0
	for i := 0; i < n; i++ {
		if k > 0 && d.T[i] == d.T[k-1] {
			src.Rejected = append(src.Rejected, Problem{src.File, d.Line[i], timeCol,
				fmt.Sprintf("duplicate time %s (line %d kept)", strconv.FormatFloat(d.T[i], 'f', -1, 64), d.Line[k-1])})
			src.Lines.Rejected++
			continue
		}
		d.T[k], d.Flux[k], d.Err[k], d.Line[k] = d.T[i], d.Flux[i], d.Err[i], d.Line[i]
		k++
	}
	d.T, d.Flux, d.Err, d.Line = d.T[:k], d.Flux[:k], d.Err[:k], d.Line[:k]
}

func permute[T any](s []T, idx []int) []T {
	out := make([]T, len(s))
	for i, j := range idx {
		out[i] = s[j]
	}
	return out
}

// rowParser converts the fields of one row.
type rowParser struct {
	opts ImportOptions
	zp   float64
	file string
	mag  bool
}

// row parses the time, value and uncertainty of one row, appending a Problem
// for every bad field.
func (p *rowParser) row(fields []string, line int, rej *[]Problem) (t, f, e float64, ok bool) {
	ok = true
	num := func(col int, what string) float64 {
		s := fields[col-1]
		v, err := strconv.ParseFloat(s, 64)
		reason := ""
		switch {
		case s == "":
			reason = what + " is empty"
		case err != nil && errors.Is(err, strconv.ErrRange):
			reason = fmt.Sprintf("%s %s is out of the float64 range", what, clip(s))
		case err != nil:
			reason = fmt.Sprintf("%s %s is not a number", what, strconv.Quote(clip(s)))
		case math.IsNaN(v):
			reason = what + " is NaN"
		case math.IsInf(v, 0):
			reason = what + " is infinite"
		}
		if reason != "" {
			*rej = append(*rej, Problem{p.file, line, col, reason})
			ok = false
		}
		return v
	}
	t = num(p.opts.TimeCol, "time")
	v := num(p.opts.ValueCol, p.opts.Kind.String())
	e = num(p.opts.ErrCol, "uncertainty")
	if !ok {
		return 0, 0, 0, false
	}
	t += p.opts.TimeOffset
	if e <= 0 {
		*rej = append(*rej, Problem{p.file, line, p.opts.ErrCol, fmt.Sprintf("uncertainty must be > 0 (got %s)", fields[p.opts.ErrCol-1])})
		return 0, 0, 0, false
	}
	if !p.mag {
		return t, v, e, true
	}
	if v < MagMin || v > MagMax {
		*rej = append(*rej, Problem{p.file, line, p.opts.ValueCol,
			fmt.Sprintf("magnitude %s outside the plausible range [%g, %g] (placeholder value?)", fields[p.opts.ValueCol-1], MagMin, MagMax)})
		return 0, 0, 0, false
	}
	f = pow10(0.4 * (p.zp - v))
	e = float64(f*e) * (math.Ln10 / 2.5)
	if !(e > 0) || math.IsInf(e, 0) || !(f > 0) || math.IsInf(f, 0) {
		*rej = append(*rej, Problem{p.file, line, p.opts.ErrCol,
			fmt.Sprintf("uncertainty %s mag gives no usable flux uncertainty", fields[p.opts.ErrCol-1])})
		return 0, 0, 0, false
	}
	return t, f, e, true
}

func clip(s string) string {
	const max = 40
	if len(s) <= max {
		return s
	}
	i := max
	for i > 0 && !utf8.RuneStart(s[i]) {
		i--
	}
	return s[:i] + "…"
}

// pow10 returns 10^x computed with basic arithmetic only, so that native and
// WebAssembly builds give bit-identical fluxes (math.Pow calls Exp and Log,
// which have assembly versions on amd64 and pure-Go ones under wasm, and may
// differ in the last bit; the data fingerprint must not). Relative error is a
// few ulp for |x| < 60 (checked against math.Pow in the tests).
func pow10(x float64) float64 {
	if x != x || x > 308.3 {
		return math.Inf(1)
	}
	if x < -323.5 {
		return 0
	}
	// x = k + j/16 + r with k, j integers, |j| ≤ 8 and |r| ≤ 1/32:
	// 10^x = 10^k · 10^(j/16) · e^(r·ln10), 10^k from exact powers of ten,
	// 10^(j/16) from a table of correctly rounded constants, and e^y for
	// |y| ≤ 0.072 by its Taylor series to degree 9 (remainder below
	// 0.072^10/10! ≈ 1e-18, under one ulp).
	k := math.Floor(x + 0.5)
	f := x - k
	j := math.Floor(f*16 + 0.5)
	r := f - j/16
	y := r * math.Ln10
	// Horner form; every product is rounded explicitly (float64
	// conversion) so no platform may fuse multiply-adds.
	p := 1.0 / 362880
	for _, c := range [...]float64{1.0 / 40320, 1.0 / 5040, 1.0 / 720, 1.0 / 120, 1.0 / 24, 1.0 / 6, 0.5, 1, 1} {
		p = float64(p*y) + c
	}
	return float64(p*pow10frac[int(j)+8]) * exp10int(int(k))
}

// pow10frac[j+8] = 10^(j/16), correctly rounded (50-digit decimal
// arithmetic, Python decimal module).
var pow10frac = [17]float64{
	0.316227766016837933199889354443, // 10^(-8/16)
	0.365174127254837705824995256604, // 10^(-7/16)
	0.421696503428582248569013359509, // 10^(-6/16)
	0.486967525165863114935297485034, // 10^(-5/16)
	0.562341325190349080394951039776, // 10^(-4/16)
	0.649381631576211315128032840697, // 10^(-3/16)
	0.749894209332455827302184275615, // 10^(-2/16)
	0.865964323360065352353169183420, // 10^(-1/16)
	1,                                // 10^0
	1.154781984689458179666482887295, // 10^(1/16)
	1.333521432163324025675931715295, // 10^(2/16)
	1.539926526059491989570485994945, // 10^(3/16)
	1.778279410038922801225421195192, // 10^(4/16)
	2.053525026457146074605752348295, // 10^(5/16)
	2.371373705661655261651752757478, // 10^(6/16)
	2.738419634264361294188696987389, // 10^(7/16)
	3.162277660168379331998893544432, // 10^(8/16)
}

// exp10int returns 10^k for integer k by exact powers and at most two
// roundings for |k| > 22.
func exp10int(k int) float64 {
	const exact = 22 // 10^22 is the largest power of ten exact in float64
	neg := k < 0
	if neg {
		k = -k
	}
	r := 1.0
	for k > exact {
		r *= 1e22
		k -= exact
	}
	r *= pow10tab[k]
	if neg {
		return 1 / r
	}
	return r
}

var pow10tab = [...]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10,
	1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

func minMax(v []float64) (lo, hi float64) {
	lo, hi = v[0], v[0]
	for _, x := range v[1:] {
		lo, hi = min(lo, x), max(hi, x)
	}
	return lo, hi
}

func median(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := slices.Clone(v)
	slices.Sort(s)
	return s[len(s)/2]
}

// LineCount accounts for every line of a source file:
// Total = Data + Rejected + Comment + Blank + Header.
type LineCount struct {
	Total    int `json:"total"`
	Data     int `json:"data"`     // lines that gave an accepted point
	Rejected int `json:"rejected"` // rows rejected, each listed in Provenance.Rejected
	Comment  int `json:"comment"`  // '#' comment lines
	Blank    int `json:"blank"`    // empty or blank-only lines
	Header   int `json:"header"`   // column-names row and ECSV header lines
}
