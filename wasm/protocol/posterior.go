package protocol

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"

	"lensbook/fit"
	"lensbook/lens"
)

func init() {
	register("posterior", stepPosterior)
	register("export", stepExport)
}

type posteriorIn struct {
	Notebook  json.RawMessage       `json:"notebook"`
	Solutions []*fit.Solution       `json:"solutions"` // one mode per solution
	Settings  fit.PosteriorSettings `json:"settings"`
}

// PosteriorOut is what the page shows and exports of a posterior run. Chains
// stay in the worker: the result carries summaries, diagnostics, a thinned
// sample for the corner plot, and the export files, which are made here
// because they need every kept sample.
type PosteriorOut struct {
	Modes      []ModeOut            `json:"modes"`
	Comparison []fit.ModeComparison `json:"comparison"`
	NData      int                  `json:"n_data"`
	Cancelled  bool                 `json:"cancelled"`
	Exports    map[string]NamedText `json:"exports"`
}

// ModeOut is one mode's posterior.
type ModeOut struct {
	Label      string     `json:"label"`
	Params     []ParamOut `json:"params"`
	BestChi2   Num        `json:"best_chi2"`
	Converged  bool       `json:"converged"`
	Reasons    []string   `json:"reasons"`
	Acceptance Num        `json:"acceptance"`
	Steps      int        `json:"steps"`
	Samples    int        `json:"samples"`
	Status     string     `json:"status"`
	Corner     Corner     `json:"corner"`
	// Base holds the mode's fixed parameters and TRef its t0,par (full JD; 0
	// when not fixed): with the corner draws they rebuild the mode
	// (fit.NewDrawsMode) for the physical quantities and the forecast.
	// Absent in results saved before those steps existed.
	Base *lens.Params `json:"base,omitempty"`
	TRef float64      `json:"tref,omitempty"`
}

// ParamOut is one marginal: median and the 16/84 % quantiles in exported units.
type ParamOut struct {
	Name   string `json:"name"`
	Unit   string `json:"unit"`
	Median Num    `json:"median"`
	Lower  Num    `json:"lower"`
	Upper  Num    `json:"upper"`
	Tau    Num    `json:"tau"`
	ESS    Num    `json:"ess"`
	RHat   Num    `json:"rhat"`
}

// Corner is a random subset of the kept samples (columns as in Names) for the
// corner plot.
type Corner struct {
	Names   []string `json:"names"`
	Labels  []string `json:"labels"`
	Samples [][]Num  `json:"samples"` // [column][row]
}

// cornerRows is how many samples the corner plot draws: enough for smooth
// 2-D histograms at 24×24 bins, small enough to send every time.
const cornerRows = 3000

func stepPosterior(ctx context.Context, raw json.RawMessage, report func(Progress)) (any, error) {
	var in posteriorIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	nb, ev, err := loadEvent(in.Notebook)
	if err != nil {
		return nil, err
	}
	if len(in.Solutions) == 0 {
		return nil, errors.New("settings: no starting solution")
	}
	steps := in.Settings.Ensemble.Steps
	if steps == 0 {
		steps = 5000
	}
	total := steps * len(in.Solutions)
	res, err := fit.SamplePosterior(ctx, ev, in.Solutions, in.Settings, func(p fit.Progress) {
		report(Progress{Done: p.Mode*steps + p.Step, Total: total, Note: fmt.Sprintf("mode %d, acceptance %.2f", p.Mode+1, p.Acceptance)})
	})
	if res == nil {
		return nil, err
	}
	out := &PosteriorOut{Comparison: res.Comparison, NData: res.NData, Cancelled: res.Cancelled || ctx.Err() != nil,
		Exports: map[string]NamedText{}}
	var sums []fit.Summary
	for _, m := range res.Modes {
		mo := ModeOut{Label: m.Label, BestChi2: Num(m.Summary.BestChi2), Converged: m.Summary.Converged,
			Reasons: m.Summary.Reasons, Status: m.Summary.Status.String(), TRef: m.TRef}
		if m.Space != nil {
			base := m.Space.Base
			mo.Base = &base
		}
		if m.Chain != nil {
			mo.Acceptance = Num(m.Chain.Acceptance())
			mo.Steps = m.Chain.Steps
		}
		for _, p := range m.Summary.Params {
			mo.Params = append(mo.Params, ParamOut{Name: p.Name, Unit: p.Unit, Median: Num(p.Median),
				Lower: Num(p.Lower), Upper: Num(p.Upper), Tau: Num(p.Tau), ESS: Num(p.ESS), RHat: Num(p.RHat)})
		}
		if s := m.Samples; s != nil && s.Len() > 0 {
			mo.Samples = s.Len()
			rows := s.Draw(cornerRows, 1)
			mo.Corner.Names = s.Names
			for j, n := range s.Names {
				unit := s.Units[j]
				if unit != "" {
					n += " [" + unit + "]"
				}
				mo.Corner.Labels = append(mo.Corner.Labels, n)
				col := make([]Num, len(rows))
				for i, r := range rows {
					col[i] = Num(r[j])
				}
				mo.Corner.Samples = append(mo.Corner.Samples, col)
			}
			info := fit.NewExportInfo("posterior samples, mode "+m.Label, ev)
			info.Fingerprint = nb.Fingerprint()
			var b bytes.Buffer
			if err := fit.WriteSamplesCSV(&b, info, s); err == nil {
				out.Exports[fmt.Sprintf("samples-csv-%d", len(out.Modes))] = NamedText{Name: fmt.Sprintf("posterior-samples-mode%d.csv", len(out.Modes)+1), Mime: "text/csv", Text: b.String()}
			}
			b.Reset()
			if err := fit.WriteSamplesECSV(&b, info, s); err == nil {
				out.Exports[fmt.Sprintf("samples-ecsv-%d", len(out.Modes))] = NamedText{Name: fmt.Sprintf("posterior-samples-mode%d.ecsv", len(out.Modes)+1), Mime: "text/plain", Text: b.String()}
			}
			b.Reset()
			info.What = "posterior summary, mode " + m.Label
			if err := fit.WriteSummaryCSV(&b, info, m.Summary); err == nil {
				out.Exports[fmt.Sprintf("params-csv-%d", len(out.Modes))] = NamedText{Name: fmt.Sprintf("parameters-mode%d.csv", len(out.Modes)+1), Mime: "text/csv", Text: b.String()}
			}
			b.Reset()
			if err := fit.WriteSummaryECSV(&b, info, m.Summary); err == nil {
				out.Exports[fmt.Sprintf("params-ecsv-%d", len(out.Modes))] = NamedText{Name: fmt.Sprintf("parameters-mode%d.ecsv", len(out.Modes)+1), Mime: "text/plain", Text: b.String()}
			}
			sums = append(sums, m.Summary)
		}
		out.Modes = append(out.Modes, mo)
	}
	if len(sums) > 0 {
		info := fit.NewExportInfo("posterior parameters (LaTeX table)", ev)
		info.Fingerprint = nb.Fingerprint()
		var b bytes.Buffer
		if err := fit.WriteLaTeX(&b, info, sums, res.Comparison); err == nil {
			out.Exports["params-latex"] = NamedText{Name: "parameters.tex", Mime: "text/x-tex", Text: b.String()}
		} else {
			return nil, err
		}
	}
	if err != nil && ctx.Err() == nil {
		return nil, err
	}
	return partial(ctx, out)
}

type exportIn struct {
	Notebook json.RawMessage `json:"notebook"`
	Kind     string          `json:"kind"` // "model-csv", "model-ecsv"
	Solution *fit.Solution   `json:"solution"`
	N        int             `json:"n"` // time samples; 0 means 2000
}

// stepExport writes the exports that need no posterior: the model light curve
// of a solution (time, magnification and every dataset's model magnitude).
func stepExport(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in exportIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	nb, ev, err := loadEvent(in.Notebook)
	if err != nil {
		return nil, err
	}
	if in.Solution == nil {
		return nil, errors.New("export: no solution selected")
	}
	n := in.N
	if n <= 0 {
		n = 2000
	}
	t1, t2 := ev.TimeRange()
	times := make([]float64, n)
	for i := range times {
		times[i] = t1 + (t2-t1)*float64(i)/float64(max(n-1, 1))
	}
	info := fit.NewExportInfo("model light curve of "+in.Solution.Label, ev)
	info.Fingerprint = nb.Fingerprint()
	info.Notes = append(info.Notes, fmt.Sprintf("model: %s, chi2 %s", in.Solution.Label, fmtFloat(in.Solution.Chi2)))
	tab, err := fit.ModelLightCurveTable(info, ev, in.Solution.Params, in.Solution.TRef, times)
	if err != nil {
		return nil, err
	}
	var b bytes.Buffer
	switch in.Kind {
	case "model-csv":
		err = fit.WriteCSV(&b, tab)
		return NamedText{Name: "model-light-curve.csv", Mime: "text/csv", Text: b.String()}, err
	case "model-ecsv":
		err = fit.WriteECSV(&b, tab)
		return NamedText{Name: "model-light-curve.ecsv", Mime: "text/plain", Text: b.String()}, err
	}
	return nil, fmt.Errorf("export: unknown kind %q", in.Kind)
}

func fmtFloat(x float64) string {
	if math.IsNaN(x) {
		return "NaN"
	}
	return fmt.Sprintf("%.6g", x)
}
