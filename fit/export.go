package fit

import (
	"bufio"
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"lensbook/lens"
)

// Version is the lensbook version written in every export header.
const Version = "0.1.0"

// ExportInfo is what every export carries in its header: the lensbook version
// (added by the writers), what the file holds, the notebook/data fingerprint and
// the conventions the numbers follow. CSV files carry it as "# key: value"
// comment lines, ECSV files as table metadata, LaTeX as % comments.
type ExportInfo struct {
	What        string   // what the file holds, e.g. "posterior summary"
	Fingerprint string   // notebook/data fingerprint; "" is written as "none"
	Conventions []string // "key: value" lines, normally from Conventions
	Notes       []string // further "key: value" lines
}

// lines returns the header as "key: value" lines.
func (h ExportInfo) lines() []string {
	fp := h.Fingerprint
	if fp == "" {
		fp = "none"
	}
	out := []string{"lensbook: " + Version, "content: " + h.What, "fingerprint: " + fp}
	out = append(out, h.Conventions...)
	return append(out, h.Notes...)
}

// meta turns the header lines into ECSV metadata (keys made unique by a suffix).
func (h ExportInfo) meta() []Meta {
	var out []Meta
	seen := map[string]int{}
	for _, l := range h.lines() {
		k, v, ok := strings.Cut(l, ": ")
		if !ok {
			k, v = "note", l
		}
		k = strings.TrimSpace(k)
		if n := seen[k]; n > 0 {
			seen[k]++
			k += "_" + strconv.Itoa(n+1)
		} else {
			seen[k] = 1
		}
		out = append(out, Meta{Key: k, Value: v})
	}
	return out
}

// ZeroPointInfo names one dataset's photometric zero point for export headers.
type ZeroPointInfo struct {
	Name       string
	ZeroPoint  float64 // ZP in m = ZP − 2.5 log10 F
	TimeSystem string  // e.g. "HJD-UTC"
}

// Conventions returns the standard convention lines for export headers: the
// lens-plane frame, the reference point of t0 and u0, the trajectory, units and
// angles, time systems and the zero point of every dataset.
func Conventions(ref lens.Reference, datasets []ZeroPointInfo) []string {
	out := []string{
		"frame: lens plane in units of the Einstein radius of the total mass; binary axis on the x axis, primary (mass fraction 1/(1+q)) at negative x, secondary (q/(1+q)) at positive x, centre of mass at the origin; q = m2/m1",
		"reference_point: " + ref.String() + " (t0 and u0 refer to it)",
		"trajectory: zeta(t) = c + tau (cos alpha, sin alpha) + u0 (-sin alpha, cos alpha), tau = (t - t0)/tE",
		"units: times are full Julian dates (days); tE in days; u0, s and rho in Einstein radii; angles in degrees; parallax components dimensionless (geocentric frame, north and east)",
		"flux_model: F = fs A + fb per dataset, magnitudes m = ZP - 2.5 log10 F",
	}
	for _, d := range datasets {
		ts := d.TimeSystem
		if ts == "" {
			ts = "not set"
		}
		out = append(out, fmt.Sprintf("dataset: %s (zero point %s, time system %s)", d.Name, strconv.FormatFloat(d.ZeroPoint, 'g', -1, 64), ts))
	}
	return out
}

// WriteCSV writes t as CSV: its metadata as "# key: value" comment lines, a
// header row of column names (with units in brackets, e.g. "tE [d]"), then the
// rows. Floats are printed with strconv 'g' −1, the shortest form that reads
// back to the same bits; NaN and ±Inf as NaN, +Inf, -Inf (Go's ParseFloat reads
// them back).
func WriteCSV(w io.Writer, t *Table) error {
	n := -1
	for _, c := range t.Columns {
		if n >= 0 && c.Len() != n {
			return fmt.Errorf("fit: CSV column %q has %d values, others %d", c.Name, c.Len(), n)
		}
		n = c.Len()
	}
	bw := bufio.NewWriter(w)
	for _, m := range t.Meta {
		bw.WriteString("# " + m.Key + ": " + strings.ReplaceAll(m.Value, "\n", " ") + "\n")
	}
	cw := csv.NewWriter(bw)
	head := make([]string, len(t.Columns))
	for i, c := range t.Columns {
		head[i] = c.Name
		if c.Unit != "" {
			head[i] += " [" + c.Unit + "]"
		}
	}
	cw.Write(head)
	rec := make([]string, len(t.Columns))
	for i := range max(n, 0) {
		for j, c := range t.Columns {
			switch {
			case c.Float != nil:
				rec[j] = strconv.FormatFloat(c.Float[i], 'g', -1, 64)
			case c.Int != nil:
				rec[j] = strconv.FormatInt(c.Int[i], 10)
			case c.Bool != nil:
				rec[j] = strconv.FormatBool(c.Bool[i])
			default:
				rec[j] = c.String[i]
			}
		}
		cw.Write(rec)
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return err
	}
	return bw.Flush()
}

// SummaryTable is the parameter table of one mode: per parameter its median,
// the ±1σ-equivalent quantiles and errors, mean, standard deviation, value at
// the best-χ² sample, autocorrelation time (steps), effective samples and
// split-R̂; the convergence verdict and best χ² go in the metadata.
func SummaryTable(info ExportInfo, s Summary) *Table {
	n := len(s.Params)
	col := func(name, unit, desc string, f func(p ParamSummary) float64) Column {
		v := make([]float64, n)
		for i, p := range s.Params {
			v[i] = f(p)
		}
		return Column{Name: name, Unit: unit, Description: desc, Float: v}
	}
	names, units := make([]string, n), make([]string, n)
	for i, p := range s.Params {
		names[i], units[i] = p.Name, p.Unit
	}
	t := &Table{Columns: []Column{
		{Name: "parameter", String: names},
		{Name: "unit", String: units},
		col("median", "", "posterior median", func(p ParamSummary) float64 { return p.Median }),
		col("lower", "", "15.87 % quantile (Phi(-1))", func(p ParamSummary) float64 { return p.Lower }),
		col("upper", "", "84.13 % quantile (Phi(+1))", func(p ParamSummary) float64 { return p.Upper }),
		col("err_minus", "", "median - lower", func(p ParamSummary) float64 { return p.Median - p.Lower }),
		col("err_plus", "", "upper - median", func(p ParamSummary) float64 { return p.Upper - p.Median }),
		col("mean", "", "posterior mean", func(p ParamSummary) float64 { return p.Mean }),
		col("std", "", "posterior standard deviation", func(p ParamSummary) float64 { return p.Std }),
		col("best", "", "value at the best-chi2 sample", func(p ParamSummary) float64 { return p.Best }),
		col("tau", "", "integrated autocorrelation time (ensemble steps)", func(p ParamSummary) float64 { return p.Tau }),
		col("ess", "", "effective sample size", func(p ParamSummary) float64 { return p.ESS }),
		col("rhat", "", "rank-normalised split-Rhat over walkers", func(p ParamSummary) float64 { return p.RHat }),
	}}
	t.Meta = append(info.meta(),
		Meta{"mode", s.Mode},
		Meta{"samples", strconv.Itoa(s.Samples)},
		Meta{"best_chi2", strconv.FormatFloat(s.BestChi2, 'g', -1, 64)},
		Meta{"run_status", s.Status.String()},
		Meta{"converged", strconv.FormatBool(s.Converged)},
		Meta{"not_converged_reasons", reasonsText(s.Reasons)})
	return t
}

func reasonsText(r []string) string {
	if len(r) == 0 {
		return "none"
	}
	return strings.Join(r, "; ")
}

// WriteSummaryCSV writes SummaryTable as CSV.
func WriteSummaryCSV(w io.Writer, info ExportInfo, s Summary) error {
	return WriteCSV(w, SummaryTable(info, s))
}

// WriteSummaryECSV writes SummaryTable as ECSV.
func WriteSummaryECSV(w io.Writer, info ExportInfo, s Summary) error {
	return WriteECSV(w, SummaryTable(info, s))
}

// SamplesTable is the posterior samples of one mode, one row per sample in the
// sampler's order (step-major, Walkers rows per stored step, burn-in removed),
// with ln π and χ² columns.
func SamplesTable(info ExportInfo, s *Samples) *Table {
	n, d := s.Len(), len(s.Names)
	t := &Table{}
	for j := range d {
		t.Columns = append(t.Columns, Column{Name: s.Names[j], Unit: s.Units[j], Float: s.Column(nil, j)})
	}
	t.Columns = append(t.Columns, Column{Name: "lnp", Description: "log posterior density (up to a constant)", Float: s.LogP[:n:n]})
	chi := s.Chi2
	if chi == nil {
		chi = make([]float64, n)
		for i := range chi {
			chi[i] = math.NaN()
		}
	}
	t.Columns = append(t.Columns, Column{Name: "chi2", Float: chi[:n:n]})
	t.Meta = append(info.meta(),
		Meta{"mode", s.Mode},
		Meta{"walkers", strconv.Itoa(s.Walkers)},
		Meta{"burn_in_steps", strconv.Itoa(s.Diagnostics.BurnSteps)},
		Meta{"row_order", "step-major: each stored step lists every walker"},
		Meta{"run_status", s.Status.String()},
		Meta{"converged", strconv.FormatBool(s.Diagnostics.Converged)},
		Meta{"not_converged_reasons", reasonsText(s.Diagnostics.Reasons)})
	return t
}

// WriteSamplesCSV writes SamplesTable as CSV.
func WriteSamplesCSV(w io.Writer, info ExportInfo, s *Samples) error {
	return WriteCSV(w, SamplesTable(info, s))
}

// WriteSamplesECSV writes SamplesTable as ECSV.
func WriteSamplesECSV(w io.Writer, info ExportInfo, s *Samples) error {
	return WriteECSV(w, SamplesTable(info, s))
}

// PhysicalTable is the derived physical quantities: name, unit, median and
// quantiles, with every assumption and warning in the metadata.
func PhysicalTable(info ExportInfo, p *Physical) *Table {
	n := len(p.Quantities)
	names, units := make([]string, n), make([]string, n)
	med, lo, hi := make([]float64, n), make([]float64, n), make([]float64, n)
	for i, q := range p.Quantities {
		names[i], units[i], med[i], lo[i], hi[i] = q.Name, q.Unit, q.Median, q.Lower, q.Upper
	}
	t := &Table{Columns: []Column{{Name: "quantity", String: names}, {Name: "unit", String: units},
		{Name: "median", Float: med}, {Name: "lower", Description: "15.87 % quantile", Float: lo},
		{Name: "upper", Description: "84.13 % quantile", Float: hi}}}
	t.Meta = info.meta()
	for i, a := range p.Assumptions {
		t.Meta = append(t.Meta, Meta{"assumption_" + strconv.Itoa(i+1), a})
	}
	for i, a := range p.Warnings {
		t.Meta = append(t.Meta, Meta{"warning_" + strconv.Itoa(i+1), a})
	}
	return t
}

// CurveDataset is one dataset's model magnitudes along a light curve: the
// median and, for a posterior band, the lower and upper quantiles (nil when
// the curve is a single model).
type CurveDataset struct {
	Name      string
	ZeroPoint float64
	Mag       []float64 // model magnitude ZP − 2.5 log10(fs A + fb)
	Lower     []float64 // optional band (magnitudes), same length
	Upper     []float64
}

// LightCurveTable is a model light curve: time (full JD), magnification and the
// model magnitude of each dataset (with band columns when given).
func LightCurveTable(info ExportInfo, times, mag []float64, magLo, magHi []float64, ds []CurveDataset) (*Table, error) {
	n := len(times)
	if len(mag) != n || (magLo != nil && len(magLo) != n) || (magHi != nil && len(magHi) != n) {
		return nil, fmt.Errorf("fit: light curve of %d times with %d magnifications", n, len(mag))
	}
	t := &Table{Columns: []Column{{Name: "time", Unit: "d", Description: "full Julian date", Float: times},
		{Name: "magnification", Float: mag}}}
	if magLo != nil {
		t.Columns = append(t.Columns, Column{Name: "magnification_lower", Float: magLo}, Column{Name: "magnification_upper", Float: magHi})
	}
	for _, d := range ds {
		if len(d.Mag) != n || (d.Lower != nil && len(d.Lower) != n) || (d.Upper != nil && len(d.Upper) != n) {
			return nil, fmt.Errorf("fit: light curve of %d times: dataset %q has %d magnitudes", n, d.Name, len(d.Mag))
		}
		name := "mag_" + d.Name
		desc := "model magnitude, zero point " + strconv.FormatFloat(d.ZeroPoint, 'g', -1, 64)
		t.Columns = append(t.Columns, Column{Name: name, Unit: "mag", Description: desc, Float: d.Mag})
		if d.Lower != nil {
			t.Columns = append(t.Columns, Column{Name: name + "_lower", Unit: "mag", Float: d.Lower},
				Column{Name: name + "_upper", Unit: "mag", Float: d.Upper})
		}
	}
	t.Meta = info.meta()
	return t, nil
}

// ForecastSummary returns the posterior of the next peak and the next caustic
// crossing after f.Now as "key: value" header lines (full JD; median and the
// ±1σ-equivalent quantiles over the draws that have the event, and the
// fraction of draws that have it before the end of the window), for the
// headers of forecast exports.
func ForecastSummary(f *Forecast) []string {
	g := func(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }
	line := func(key string, d TimeDistribution) string {
		if d.Fraction == 0 || math.IsNaN(d.Median) {
			return fmt.Sprintf("%s: none in the window (0 of %d draws)", key, f.Draws)
		}
		return fmt.Sprintf("%s: median %s, 15.87 %% quantile %s, 84.13 %% quantile %s (full JD), in %s of %d draws",
			key, g(d.Median), g(d.Lower), g(d.Upper), g(d.Fraction), f.Draws)
	}
	out := []string{"forecast_from: " + g(f.Now) + " (full JD)", line("next_peak", f.Peak)}
	if f.NextCrossing != nil {
		out = append(out, line("next_caustic_crossing", f.Crossing))
	} else {
		out = append(out, "next_caustic_crossing: not searched (no caustic: single lens)")
	}
	for _, w := range f.Warnings {
		out = append(out, "warning: "+w)
	}
	return out
}

// ForecastTimesTable has one row per posterior draw of a forecast: the time
// of the draw's next magnification peak and next caustic crossing after
// f.Now (full JD; NaN when there is none before the end of the window, or
// when crossings were not searched).
func ForecastTimesTable(info ExportInfo, f *Forecast) *Table {
	n := len(f.NextPeak)
	draw := make([]int64, n)
	cross := make([]float64, n)
	for i := range n {
		draw[i] = int64(i + 1)
		cross[i] = math.NaN()
		if f.NextCrossing != nil {
			cross[i] = f.NextCrossing[i]
		}
	}
	t := &Table{Columns: []Column{
		{Name: "draw", Int: draw},
		{Name: "next_peak", Unit: "d", Description: "full Julian date of the first magnification peak after the forecast start; NaN: none in the window", Float: f.NextPeak},
		{Name: "next_caustic_crossing", Unit: "d", Description: "full Julian date of the first caustic crossing of the source centre after the forecast start; NaN: none in the window or not searched", Float: cross},
	}}
	info.Notes = append(info.Notes, ForecastSummary(f)...)
	info.Notes = append(info.Notes, f.Method...)
	t.Meta = info.meta()
	return t
}
