package protocol

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strings"

	"lensbook/fit"
	"lensbook/lens"
)

// The physical quantities and the forecast of the Report step. Both work on
// the posterior draws the page keeps with the notebook (the corner sample of
// each mode, PosteriorOut), rebuilt into a mode by fit.NewDrawsMode, so a
// saved notebook gives the same numbers again.

func init() {
	register("physical", stepPhysical)
	register("forecast", stepForecast)
}

// DrawsIn is one posterior mode as the page holds it: the corner draws of a
// ModeOut with its fixed parameters and t0,par.
type DrawsIn struct {
	Label   string       `json:"label"`
	Names   []string     `json:"names"`
	Samples [][]Num      `json:"samples"` // [column][row], exported units (alpha in degrees)
	Base    *lens.Params `json:"base"`
	TRef    float64      `json:"tref"`
}

// mode rebuilds the fit mode of d.
func (d DrawsIn) mode() (*fit.ModeResult, error) {
	if d.Base == nil {
		return nil, fmt.Errorf("mode %q: the posterior result has no fixed parameters (saved by an older lensbook): run the posterior again", d.Label)
	}
	cols := make([][]float64, len(d.Samples))
	for j, c := range d.Samples {
		cols[j] = make([]float64, len(c))
		for i, v := range c {
			cols[j][i] = float64(v)
		}
	}
	return fit.NewDrawsMode(d.Label, *d.Base, d.TRef, d.Names, cols)
}

// PhysicalSettings are the astronomer's inputs to the physical quantities
// (fit.PhysicalSettings): θ* directly, or the colour and magnitude of the
// source for the colour–surface-brightness relation, and the source distance.
type PhysicalSettings struct {
	// ThetaSource is "theta" (ThetaStar ± ThetaStarErr) or "colour" (VK0, K0).
	ThetaSource  string  `json:"theta_source"`
	ThetaStar    float64 `json:"theta_star"`     // µas
	ThetaStarErr float64 `json:"theta_star_err"` // µas
	VK0          float64 `json:"vk0"`            // dereddened (V−K)₀ (mag)
	VK0Err       float64 `json:"vk0_err"`
	K0           float64 `json:"k0"` // dereddened K₀ (mag)
	K0Err        float64 `json:"k0_err"`
	// Class is the source's luminosity class: "dwarf", "subgiant", "giant" or "" (unknown).
	Class string  `json:"class"`
	DS    float64 `json:"ds"`     // source distance (kpc); 0 = not given
	DSErr float64 `json:"ds_err"` // kpc
	Seed  uint64  `json:"seed"`
}

// fit translates s into package fit's settings.
func (s PhysicalSettings) fit() (fit.PhysicalSettings, error) {
	out := fit.PhysicalSettings{DS: s.DS, DSErr: s.DSErr, Seed: s.Seed}
	switch s.ThetaSource {
	case "theta", "":
		if !(s.ThetaStar > 0) {
			return out, fmt.Errorf("give the angular source radius θ* in µas (> 0), or choose the colour–surface-brightness relation")
		}
		out.ThetaStar, out.ThetaStarErr = s.ThetaStar, s.ThetaStarErr
	case "colour":
		class := fit.ClassUnknown
		switch s.Class {
		case "dwarf":
			class = fit.ClassDwarf
		case "subgiant":
			class = fit.ClassSubgiant
		case "giant":
			class = fit.ClassGiant
		case "":
		default:
			return out, fmt.Errorf("luminosity class %q is not dwarf, subgiant or giant", s.Class)
		}
		out.CSB = &fit.ColourSB{VK0: s.VK0, VK0Err: s.VK0Err, K0: s.K0, K0Err: s.K0Err, Class: class}
	default:
		return out, fmt.Errorf("θ* source %q is not \"theta\" or \"colour\"", s.ThetaSource)
	}
	return out, nil
}

type physicalIn struct {
	Notebook json.RawMessage  `json:"notebook"`
	Modes    []DrawsIn        `json:"modes"`
	Settings PhysicalSettings `json:"settings"`
}

// PhysicalOut is the physical quantities of every mode, with their exports.
type PhysicalOut struct {
	Modes   []PhysicalMode       `json:"modes"`
	Exports map[string]NamedText `json:"exports"`
}

// PhysicalMode is one mode's derived quantities, or why there are none
// (Error, for example a fit without a finite-source effect).
type PhysicalMode struct {
	Label           string        `json:"label"`
	Draws           int           `json:"draws"`
	Error           string        `json:"error,omitempty"`
	Quantities      []QuantityOut `json:"quantities"`
	Assumptions     []string      `json:"assumptions"`
	Warnings        []string      `json:"warnings"`
	UnboundFraction Num           `json:"unbound_fraction"`
}

// QuantityOut is one derived quantity: median and the 15.87/84.13 %
// quantiles over the draws (fit.Quantity without the per-draw values).
type QuantityOut struct {
	Name      string `json:"name"`
	Unit      string `json:"unit"`
	Median    Num    `json:"median"`
	Lower     Num    `json:"lower"`
	Upper     Num    `json:"upper"`
	NonFinite int    `json:"non_finite"`
}

// stepPhysical propagates each mode's draws through fit.DeriveQuantities.
func stepPhysical(_ context.Context, raw json.RawMessage, _ func(Progress)) (any, error) {
	var in physicalIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	nb, ev, err := loadEvent(in.Notebook)
	if err != nil {
		return nil, err
	}
	if len(in.Modes) == 0 {
		return nil, errors.New("run the posterior first: the physical quantities come from its draws")
	}
	set, err := in.Settings.fit()
	if err != nil {
		return nil, err
	}
	out := &PhysicalOut{Exports: map[string]NamedText{}}
	for k, d := range in.Modes {
		m, err := d.mode()
		if err != nil {
			return nil, err
		}
		pm := PhysicalMode{Label: d.Label, Draws: m.Samples.Len(), UnboundFraction: Num(math.NaN())}
		pin, err := m.PhysicalInput()
		if err != nil {
			if !errors.Is(err, fit.ErrPhysical) {
				return nil, err
			}
			// a model that cannot give them (no finite-source effect): said
			// per mode, beside the others
			pm.Error = strings.TrimPrefix(err.Error(), "fit: ")
			out.Modes = append(out.Modes, pm)
			continue
		}
		p, err := fit.DeriveQuantities(pin, set)
		if err != nil {
			return nil, err // the inputs: the same for every mode
		}
		pm.Assumptions, pm.Warnings = p.Assumptions, p.Warnings
		if p.Get("beta") != nil {
			pm.UnboundFraction = Num(p.UnboundFraction)
		}
		for _, q := range p.Quantities {
			pm.Quantities = append(pm.Quantities, QuantityOut{Name: q.Name, Unit: q.Unit, Median: Num(q.Median),
				Lower: Num(q.Lower), Upper: Num(q.Upper), NonFinite: q.NonFiniteRows})
		}
		out.Modes = append(out.Modes, pm)
		info := fit.NewExportInfo("physical quantities (research estimates), mode "+d.Label, ev)
		info.Fingerprint = nb.Fingerprint()
		info.Notes = append(info.Notes, fmt.Sprintf("draws: %d posterior draws of mode %s", pm.Draws, d.Label),
			"quantiles: lower and upper are the 15.87 % and 84.13 % quantiles over the draws")
		tab := fit.PhysicalTable(info, p)
		var b bytes.Buffer
		if err := fit.WriteCSV(&b, tab); err != nil {
			return nil, err
		}
		out.Exports[fmt.Sprintf("physical-csv-%d", k)] = NamedText{Name: fmt.Sprintf("physical-quantities-mode%d.csv", k+1), Mime: "text/csv", Text: b.String()}
		b.Reset()
		if err := fit.WriteECSV(&b, tab); err != nil {
			return nil, err
		}
		out.Exports[fmt.Sprintf("physical-ecsv-%d", k)] = NamedText{Name: fmt.Sprintf("physical-quantities-mode%d.ecsv", k+1), Mime: "text/plain", Text: b.String()}
	}
	return out, nil
}

// ForecastSettings choose the forecast window and its resolution.
type ForecastSettings struct {
	// From is the start of the window and the "now" after which the next
	// peak and crossing are searched (full JD); 0 means the last data point.
	From float64 `json:"from"`
	// Days is the length of the window; 0 means 30.
	Days float64 `json:"days"`
	// Draws is the number of posterior draws; 0 means 200.
	Draws int `json:"draws"`
	// Points is the number of times in the window; 0 means 1000.
	Points int    `json:"points"`
	Seed   uint64 `json:"seed"`
}

// Forecast defaults.
const (
	ForecastDays   = 30
	ForecastDraws  = 200
	ForecastPoints = 1000
)

// resolve fills the defaults of s for event ev.
func (s ForecastSettings) resolve(ev *fit.Event) (ForecastSettings, error) {
	if s.From == 0 {
		_, s.From = ev.TimeRange()
	}
	if s.Days == 0 {
		s.Days = ForecastDays
	}
	if s.Draws == 0 {
		s.Draws = ForecastDraws
	}
	if s.Points == 0 {
		s.Points = ForecastPoints
	}
	switch {
	case !(s.From > 0 && s.From < 1e8):
		return s, fmt.Errorf("forecast start %v is not a Julian date", s.From)
	case !(s.Days > 0 && s.Days <= 3650):
		return s, fmt.Errorf("forecast length %v d: want more than 0 and at most 3650 days", s.Days)
	case s.Draws < 1 || s.Draws > 5000:
		return s, fmt.Errorf("%d posterior draws: want 1 to 5000", s.Draws)
	case s.Points < 3 || s.Points > 20000:
		return s, fmt.Errorf("%d times in the window: want 3 to 20000", s.Points)
	}
	return s, nil
}

type forecastIn struct {
	Notebook json.RawMessage  `json:"notebook"`
	Modes    []DrawsIn        `json:"modes"`
	Settings ForecastSettings `json:"settings"`
}

// ForecastOut is the forecast of every mode, with its exports.
type ForecastOut struct {
	Settings ForecastSettings     `json:"settings"` // with the defaults filled in
	Modes    []ForecastMode       `json:"modes"`
	Exports  map[string]NamedText `json:"exports"`
}

// ForecastMode is one mode's forecast: the light-curve band over the window
// (magnification, and the first dataset's model magnitude, the scale of the
// light-curve plot) and the posterior of the next peak and caustic crossing.
type ForecastMode struct {
	Label    string    `json:"label"`
	Draws    int       `json:"draws"`
	Times    []float64 `json:"t"` // full JD
	Amp      []Num     `json:"amp"`
	AmpLower []Num     `json:"amp_lower"`
	AmpUpper []Num     `json:"amp_upper"`
	Mag      []Num     `json:"mag"`
	MagLower []Num     `json:"mag_lower"`
	MagUpper []Num     `json:"mag_upper"`
	// NextPeak and NextCrossing are the per-draw times (null: none in the
	// window); NextCrossing is absent for a single lens.
	NextPeak     []Num    `json:"next_peak"`
	NextCrossing []Num    `json:"next_crossing,omitempty"`
	Peak         TimeDist `json:"peak"`
	Crossing     TimeDist `json:"crossing"`
	Crossings    bool     `json:"crossings"` // caustic crossings were searched (binary lens)
	Method       []string `json:"method"`
	Warnings     []string `json:"warnings"`
}

// TimeDist is fit.TimeDistribution: quantiles in full JD over the draws with
// the event, and the fraction of draws that have it.
type TimeDist struct {
	Median   Num `json:"median"`
	Lower    Num `json:"lower"`
	Upper    Num `json:"upper"`
	Fraction Num `json:"fraction"`
}

func timeDist(d fit.TimeDistribution) TimeDist {
	return TimeDist{Median: Num(d.Median), Lower: Num(d.Lower), Upper: Num(d.Upper), Fraction: Num(d.Fraction)}
}

// stepForecast runs fit.ModeResult.Forecast for each mode.
func stepForecast(ctx context.Context, raw json.RawMessage, report func(Progress)) (any, error) {
	var in forecastIn
	if err := decode(raw, &in); err != nil {
		return nil, err
	}
	nb, ev, err := loadEvent(in.Notebook)
	if err != nil {
		return nil, err
	}
	if len(in.Modes) == 0 {
		return nil, errors.New("run the posterior first: the forecast draws from it")
	}
	s, err := in.Settings.resolve(ev)
	if err != nil {
		return nil, err
	}
	out := &ForecastOut{Settings: s, Exports: map[string]NamedText{}}
	total := s.Draws * len(in.Modes)
	for k, d := range in.Modes {
		m, err := d.mode()
		if err != nil {
			return nil, err
		}
		draws := min(s.Draws, m.Samples.Len())
		done0 := k * s.Draws
		fs := fit.ForecastSettings{T1: s.From, T2: s.From + s.Days, Points: s.Points, Now: s.From,
			Progress: func(done, _ int) {
				report(Progress{Done: done0 + done, Total: total, Note: fmt.Sprintf("mode %d, draw %d of %d", k+1, done, draws)})
			}}
		f, err := m.Forecast(ctx, ev, draws, s.Seed, fs)
		if err != nil {
			return nil, err
		}
		fm := ForecastMode{Label: d.Label, Draws: f.Draws, Times: f.Times,
			Amp: nums(f.Amp), AmpLower: nums(f.AmpLower), AmpUpper: nums(f.AmpUpper),
			Mag: nums(f.Mag[0]), MagLower: nums(f.MagLower[0]), MagUpper: nums(f.MagUpper[0]),
			NextPeak: nums(f.NextPeak), Peak: timeDist(f.Peak), Crossing: timeDist(f.Crossing),
			Crossings: f.NextCrossing != nil, Method: f.Method, Warnings: f.Warnings}
		if f.NextCrossing != nil {
			fm.NextCrossing = nums(f.NextCrossing)
		}
		out.Modes = append(out.Modes, fm)

		info := fit.NewExportInfo("light-curve forecast with posterior band (research estimate), mode "+d.Label, ev)
		info.Fingerprint = nb.Fingerprint()
		info.Notes = append(info.Notes, fit.ForecastSummary(f)...)
		tab, err := fit.ForecastTable(info, ev, f)
		if err != nil {
			return nil, err
		}
		var b bytes.Buffer
		if err := fit.WriteCSV(&b, tab); err != nil {
			return nil, err
		}
		out.Exports[fmt.Sprintf("forecast-csv-%d", k)] = NamedText{Name: fmt.Sprintf("forecast-mode%d.csv", k+1), Mime: "text/csv", Text: b.String()}
		b.Reset()
		if err := fit.WriteECSV(&b, tab); err != nil {
			return nil, err
		}
		out.Exports[fmt.Sprintf("forecast-ecsv-%d", k)] = NamedText{Name: fmt.Sprintf("forecast-mode%d.ecsv", k+1), Mime: "text/plain", Text: b.String()}
		b.Reset()
		ti := fit.NewExportInfo("next peak and caustic-crossing times per posterior draw (research estimate), mode "+d.Label, ev)
		ti.Fingerprint = nb.Fingerprint()
		if err := fit.WriteCSV(&b, fit.ForecastTimesTable(ti, f)); err != nil {
			return nil, err
		}
		out.Exports[fmt.Sprintf("forecast-times-csv-%d", k)] = NamedText{Name: fmt.Sprintf("forecast-times-mode%d.csv", k+1), Mime: "text/csv", Text: b.String()}
	}
	return out, nil
}
