package fit

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
)

// FormatUncertain formats value with its asymmetric ±1σ errors plus (upper
// minus value) and minus (value minus lower) for LaTeX math mode, rounded to sig
// significant digits on the smaller error (sig ≤ 0 means 2, common practice) and
// the value rounded to the same decimal place. Equal rounded errors print as
// "v \pm e", unequal ones as "v^{+a}_{-b}". Values far from unity
// (value and smaller error both below 10⁻³, or errors rounded to hundreds or more) are factored as
// (…)\times10^{n}. A NaN or non-positive error prints the value alone with
// %g (e.g. a fixed parameter).
func FormatUncertain(value, plus, minus float64, sig int) string {
	if sig <= 0 {
		sig = 2
	}
	if math.IsNaN(value) || math.IsInf(value, 0) {
		return latexNumber(strconv.FormatFloat(value, 'g', -1, 64))
	}
	if !(plus > 0) || !(minus > 0) || math.IsInf(plus, 0) || math.IsInf(minus, 0) {
		return latexNumber(strconv.FormatFloat(value, 'g', 6, 64))
	}
	// Factor a power of ten out of values far from unity.
	exp := 0
	small := min(plus, minus)
	if ref := math.Max(math.Abs(value), small); ref < 1e-3 {
		exp = int(math.Floor(math.Log10(ref)))
	} else if math.Floor(math.Log10(small))-float64(sig-1) >= 2 {
		exp = int(math.Floor(math.Log10(math.Max(math.Abs(value), small))))
	}
	scale := math.Pow(10, float64(-exp))
	v, p, m := value*scale, plus*scale, minus*scale
	// Round the smaller error to sig digits first, so that 0.0996 → 0.10 sets the
	// decimal place from the rounded error.
	e, _ := strconv.ParseFloat(strconv.FormatFloat(min(p, m), 'e', sig-1, 64), 64)
	dec := sig - 1 - int(math.Floor(math.Log10(e)))
	f := func(x float64) string { return fixedAt(x, dec) }
	vs, ps, ms := f(v), f(p), f(m)
	var body string
	if ps == ms {
		body = vs + ` \pm ` + ps
	} else {
		body = vs + `^{+` + ps + `}_{-` + ms + `}`
	}
	if exp != 0 {
		return `(` + body + `)\times10^{` + strconv.Itoa(exp) + `}`
	}
	return body
}

// fixedAt formats x rounded to dec decimals (dec < 0 rounds to tens, hundreds…).
func fixedAt(x float64, dec int) string {
	if dec >= 0 {
		s := strconv.FormatFloat(x, 'f', dec, 64)
		if strings.TrimLeft(s, "-0.") == "" {
			s = strings.TrimPrefix(s, "-") // no "-0.00"
		}
		return s
	}
	p := math.Pow(10, float64(-dec))
	return strconv.FormatFloat(math.Round(x/p)*p, 'f', 0, 64)
}

// latexNumber turns Go's "1e-05" into LaTeX's 1\times10^{-5}.
func latexNumber(s string) string {
	if i := strings.IndexAny(s, "e"); i >= 0 {
		e, err := strconv.Atoi(s[i+1:])
		if err == nil {
			return s[:i] + `\times10^{` + strconv.Itoa(e) + `}`
		}
	}
	return s
}

// latexEscape escapes LaTeX's special characters in free text.
func latexEscape(s string) string {
	r := strings.NewReplacer(`\`, `\textbackslash{}`, `{`, `\{`, `}`, `\}`, `$`, `\$`, `&`, `\&`, `#`, `\#`,
		`^`, `\^{}`, `_`, `\_`, `%`, `\%`, `~`, `\~{}`)
	return r.Replace(s)
}

// latexSymbols are the trade's symbols for lensbook's parameter and derived
// quantity names (exports name columns in plain ASCII, tables in LaTeX).
var latexSymbols = map[string]string{
	"t0": `$t_0$`, "u0": `$u_0$`, "tE": `$t_{\rm E}$`, "rho": `$\rho$`, "s": `$s$`, "q": `$q$`,
	"alpha": `$\alpha$`, "piEN": `$\pi_{{\rm E},N}$`, "piEE": `$\pi_{{\rm E},E}$`,
	"dsdt": `$ds/dt$`, "dalphadt": `$d\alpha/dt$`,
	"log10_s": `$\log_{10} s$`, "log10_q": `$\log_{10} q$`, "log10_rho": `$\log_{10}\rho$`,
	"thetaStar": `$\theta_*$`, "thetaE": `$\theta_{\rm E}$`, "muRel": `$\mu_{\rm rel}$`, "piE": `$\pi_{\rm E}$`,
	"M": `$M_{\rm tot}$`, "piRel": `$\pi_{\rm rel}$`, "M1": `$M_1$`, "M2": `$M_2$`, "M2_jup": `$M_2$`,
	"M2_earth": `$M_2$`, "DS": `$D_S$`, "DL": `$D_L$`, "aPerp": `$a_\perp$`,
}

// latexUnits renders the unit strings used in exports.
var latexUnits = map[string]string{
	"d": "d", "deg": "deg", "uas": `$\mu$as`, "mas": "mas", "mas/yr": `mas\,yr$^{-1}$`, "Msun": `$M_\odot$`,
	"Mjup": `$M_{\rm J}$`, "Mearth": `$M_\oplus$`, "kpc": "kpc", "AU": "AU", "1/yr": `yr$^{-1}$`, "deg/yr": `deg\,yr$^{-1}$`,
}

// LatexSymbol returns the LaTeX symbol of a column name (escaped text when unknown).
func LatexSymbol(name string) string {
	if s, ok := latexSymbols[name]; ok {
		return s
	}
	return latexEscape(name)
}

// LatexUnit returns the LaTeX form of a unit string.
func LatexUnit(u string) string {
	if s, ok := latexUnits[u]; ok {
		return s
	}
	return latexEscape(u)
}

// WriteLaTeX writes the summaries of one or more modes as a LaTeX tabular, one
// column per mode: medians with the ±1σ-equivalent quantile errors formatted
// by FormatUncertain, then χ²_min, Δχ² and ΔBIC when cmp is given (one entry per
// summary, in the same order; nil to omit), and a visible note for any mode
// that is not converged. The export header goes in LaTeX comments. Rows follow
// the first summary's columns; a mode without a column shows "--".
func WriteLaTeX(w io.Writer, info ExportInfo, sums []Summary, cmp []ModeComparison) error {
	if len(sums) == 0 {
		return ErrNoSamples
	}
	if cmp != nil && len(cmp) != len(sums) {
		return fmt.Errorf("fit: %d mode comparisons for %d summaries", len(cmp), len(sums))
	}
	bw := bufio.NewWriter(w)
	for _, l := range info.lines() {
		bw.WriteString("% " + strings.ReplaceAll(l, "\n", " ") + "\n")
	}
	bw.WriteString(`\begin{tabular}{ll` + strings.Repeat("c", len(sums)) + "}\n\\hline\nParameter & Unit")
	for _, s := range sums {
		bw.WriteString(" & " + latexEscape(s.Mode))
	}
	bw.WriteString(" \\\\\n\\hline\n")
	for _, p := range sums[0].Params {
		bw.WriteString(LatexSymbol(p.Name) + " & " + LatexUnit(p.Unit))
		for _, s := range sums {
			cell := "--"
			for _, q := range s.Params {
				if q.Name == p.Name {
					cell = "$" + FormatUncertain(q.Median, q.Upper-q.Median, q.Median-q.Lower, 2) + "$"
				}
			}
			bw.WriteString(" & " + cell)
		}
		bw.WriteString(" \\\\\n")
	}
	if cmp != nil {
		bw.WriteString("\\hline\n")
		rows := []struct {
			name string
			f    func(ModeComparison) float64
		}{{`$\chi^2_{\rm min}$`, func(c ModeComparison) float64 { return c.Chi2 }},
			{`$\Delta\chi^2$`, func(c ModeComparison) float64 { return c.DeltaChi2 }},
			{`$\Delta{\rm BIC}$`, func(c ModeComparison) float64 { return c.DeltaBIC }}}
		for _, row := range rows {
			bw.WriteString(row.name + " & ")
			for _, c := range cmp {
				bw.WriteString(" & " + strconv.FormatFloat(row.f(c), 'f', 2, 64))
			}
			bw.WriteString(" \\\\\n")
		}
	}
	bw.WriteString("\\hline\n")
	ncol := len(sums) + 2
	for _, s := range sums {
		if !s.Converged {
			fmt.Fprintf(bw, "\\multicolumn{%d}{l}{\\footnotesize %s: not converged (%s)} \\\\\n", ncol,
				latexEscape(s.Mode), latexEscape(strings.Join(s.Reasons, "; ")))
		}
	}
	bw.WriteString("\\end{tabular}\n")
	return bw.Flush()
}
