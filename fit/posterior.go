package fit

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"

	"lensbook/lens"
)

// Posterior is the log posterior density of an event's model in the
// coordinates of a Space: ln π(x) = −χ²(x)/2 + ln prior(x). The priors of
// Specs are flat in each Space coordinate (the value, or log10 of the value for
// log-flat parameters) inside the bounds, so ln prior is 0 inside and −Inf
// outside: sampling log10 q uniformly is exactly the log-flat prior in q.
// It implements gonum's distmv.LogProber (LogProb) up to the normalising constant.
// A Posterior is not safe for concurrent use; Fork gives an independent copy.
type Posterior struct {
	Space *Space
	Event *Event
	lik   *Likelihood
	tref  float64
}

// NewPosterior builds the posterior of ev in the coordinates of sp.
func NewPosterior(ev *Event, sp *Space) (*Posterior, error) {
	l, err := NewLikelihood(ev)
	if err != nil {
		return nil, err
	}
	return &Posterior{Space: sp, Event: ev, lik: l}, nil
}

// SetTRef fixes the parallax and orbital-motion reference epoch t0,par (full
// JD) to a solution's (Solution.TRef), so that its πE and orbital parameters
// mean the same as in the fit; see Likelihood.SetTRef.
func (p *Posterior) SetTRef(tref float64) error {
	if err := p.lik.SetTRef(tref); err != nil {
		return err
	}
	p.tref = tref
	return nil
}

// Eval returns ln π(x) and χ²(x). Outside the bounds, or where the model is
// invalid or χ² not finite, it returns −Inf and +Inf. The binary-lens solver's
// warm start is reset first, so the value depends on x alone and not on the
// order of earlier calls (sampler results are bit-identical for a seed).
func (p *Posterior) Eval(x []float64) (logp, chi2 float64) {
	if !p.Space.InBounds(x) {
		return math.Inf(-1), math.Inf(1)
	}
	v := p.Space.Params(x)
	p.lik.ResetSolver()
	c, err := p.lik.Chi2(&v)
	if err != nil || math.IsNaN(c) || math.IsInf(c, 0) {
		return math.Inf(-1), math.Inf(1)
	}
	return -c / 2, c
}

// LogProb returns ln π(x) up to a constant.
func (p *Posterior) LogProb(x []float64) float64 {
	l, _ := p.Eval(x)
	return l
}

// Fork returns an independent copy for another goroutine (its own likelihood
// buffers and lens solver; the event is shared read-only).
func (p *Posterior) Fork() *Posterior {
	q, err := NewPosterior(p.Event, p.Space)
	if err == nil && p.tref != 0 {
		err = q.SetTRef(p.tref)
	}
	if err != nil {
		panic("fit: Posterior.Fork of a validated posterior failed: " + err.Error())
	}
	return q
}

// Target returns the sampler target of p (χ² stored with every sample).
func (p *Posterior) Target() Target {
	t := Target{Posterior: p.Eval}
	t.Fork = func() Target { return p.Fork().Target() }
	return t
}

// CoordNames returns the names of the Space coordinates: the parameter name,
// prefixed "log10_" for log-flat ones.
func CoordNames(sp *Space) []string {
	out := make([]string, sp.Dim())
	for i, p := range sp.Free {
		out[i] = p.String()
		if sp.IsLog(i) {
			out[i] = "log10_" + out[i]
		}
	}
	return out
}

// paramUnit is the export unit of each parameter (angles in degrees).
func paramUnit(p Param) string {
	switch p {
	case T0, TE:
		return "d"
	case Alpha:
		return "deg"
	case DsDt:
		return "1/yr"
	case DAlphaDt:
		return "deg/yr"
	}
	return ""
}

// PhysicalSamples maps samples in the coordinates of sp to the exported
// parameters: natural values (10^x for log10 coordinates), angles and angular
// rates in degrees; t0 stays a full Julian date.
func PhysicalSamples(sp *Space, s *Samples) *Samples {
	d := sp.Dim()
	names, units, param := make([]string, d), make([]string, d), make([]int, d)
	for i, p := range sp.Free {
		names[i], units[i], param[i] = p.String(), paramUnit(p), i
	}
	return s.Map(names, units, param, func(dst, x []float64) {
		for i, p := range sp.Free {
			v := x[i]
			if sp.IsLog(i) {
				v = math.Pow(10, v)
			}
			if p == Alpha || p == DAlphaDt {
				v *= 180 / math.Pi
			}
			dst[i] = v
		}
	})
}

// paramsOfPhysical inverts PhysicalSamples for one row.
func paramsOfPhysical(sp *Space, row []float64) lens.Params {
	v := sp.Base
	for i, p := range sp.Free {
		x := row[i]
		if p == Alpha || p == DAlphaDt {
			x *= math.Pi / 180
		}
		Set(&v, p, x)
	}
	return v
}

// PosteriorSettings configure SamplePosterior.
type PosteriorSettings struct {
	Ensemble EnsembleSettings `json:"ensemble"`
	// Specs choose the free parameters, bounds and priors; the zero value means
	// DefaultSpecs of each mode's solution.
	Specs Specs `json:"specs"`
	// InitScale sets the initial ball: walkers start around each solution in a
	// Gaussian of InitScale² times the solution's covariance (with its
	// correlations), or of InitScale times the optimiser's typical steps when it
	// has none; 0 means 0.1, small enough to start every walker in the mode, the
	// stretch move widens the ensemble within a few τ. A covariance that is not
	// positive definite is an error.
	InitScale float64 `json:"initScale"`
}

// ModeResult is the posterior of one mode (one starting solution).
type ModeResult struct {
	Label   string
	Space   *Space
	Chain   *Chain   // all stored steps, in Space coordinates
	Samples *Samples // kept samples in exported units (PhysicalSamples)
	Summary Summary
	K       int     // fitted parameters: Space dimension plus flux parameters
	TRef    float64 // t0,par of the mode's solution (full JD; 0 when not fixed)
}

// PosteriorResult holds every mode's posterior and their comparison.
type PosteriorResult struct {
	Modes      []ModeResult
	Comparison []ModeComparison // nil when a mode has no finite χ²
	NData      int              // data points used
	Cancelled  bool             // the context was cancelled; later modes were not run
}

// SamplePosterior samples the posterior of ev around each solution, one
// independent ensemble per solution (modes are never mixed), summarises each in
// exported units and compares the modes by Δχ² and ΔBIC. Mode m uses the random
// streams of (Ensemble.Seed, m). Progress reports carry the mode index. A
// cancelled context keeps the modes (and the partial chain) sampled so far.
func SamplePosterior(ctx context.Context, ev *Event, sols []*Solution, set PosteriorSettings, progress func(Progress)) (*PosteriorResult, error) {
	if len(sols) == 0 {
		return nil, errors.New("fit: posterior needs at least one starting solution")
	}
	scale := set.InitScale
	if scale == 0 {
		scale = 0.1
	}
	if !(scale > 0) {
		return nil, fmt.Errorf("fit: posterior initial scale %v must be > 0", set.InitScale)
	}
	res := &PosteriorResult{}
	for m, sol := range sols {
		if ctx.Err() != nil {
			res.Cancelled = true
			break
		}
		specs := set.Specs
		if len(specs.Free()) == 0 {
			specs = DefaultSpecs(sol.Params)
		}
		sp, err := NewSpace(sol.Params, specs)
		if err != nil {
			return res, fmt.Errorf("fit: mode %d (%s): %w", m, sol.Label, err)
		}
		post, err := NewPosterior(ev, sp)
		if err != nil {
			return res, err
		}
		if sol.TRef != 0 {
			if err := post.SetTRef(sol.TRef); err != nil {
				return res, fmt.Errorf("fit: mode %d (%s): %w", m, sol.Label, err)
			}
		}
		names := CoordNames(sp)
		st := Start{Name: sol.Label, Names: names, X: sp.Vector(nil, sol.Params), Spread: initialSpread(sp, sol, scale), Cov: initialCov(sp, sol, scale)}
		c, err := runEnsemble(ctx, set.Ensemble, post.Target(), st, m, progress)
		if err != nil {
			return res, fmt.Errorf("fit: mode %d (%s): %w", m, sol.Label, err)
		}
		raw, err := c.Samples(names, nil)
		if err != nil {
			return res, err
		}
		phys := PhysicalSamples(sp, raw)
		sum, err := Summarize(phys)
		if err != nil {
			return res, fmt.Errorf("fit: mode %d (%s): %w", m, sol.Label, err)
		}
		res.Modes = append(res.Modes, ModeResult{Label: sol.Label, Space: sp, Chain: c, Samples: phys, Summary: sum,
			K: sp.Dim() + linearParams(ev), TRef: sol.TRef})
		res.NData = post.lik.N()
		if c.Status == ChainCancelled {
			res.Cancelled = true
			break
		}
	}
	sums, ks := make([]Summary, len(res.Modes)), make([]int, len(res.Modes))
	for i, m := range res.Modes {
		sums[i], ks[i] = m.Summary, m.K
	}
	if cmp, err := CompareModes(sums, ks, res.NData); err == nil {
		res.Comparison = cmp
	}
	return res, nil
}

// initialSpread is scale × the solution's 1σ per Space coordinate, from its
// covariance when it matches the Space, else from the optimiser's step sizes.
func initialSpread(sp *Space, sol *Solution, scale float64) []float64 {
	out := make([]float64, sp.Dim())
	sp.scale(out, sol.Params)
	if slices.Equal(sol.Free, sp.Free) && len(sol.Cov) == sp.Dim() {
		for i := range out {
			if v := sol.Cov[i][i]; v > 0 && !math.IsInf(v, 0) && (len(sol.IsLog) != sp.Dim() || sol.IsLog[i] == sp.IsLog(i)) {
				out[i] = math.Sqrt(v)
			}
		}
	}
	for i := range out {
		out[i] *= scale
	}
	return out
}

// initialCov is scale² × the solution's covariance when it matches the Space
// (nil otherwise): the initial ball then follows the mode's correlations.
func initialCov(sp *Space, sol *Solution, scale float64) [][]float64 {
	n := sp.Dim()
	if !slices.Equal(sol.Free, sp.Free) || len(sol.Cov) != n || (len(sol.IsLog) == n && !slices.Equal(sol.IsLog, sp.isLog)) {
		return nil
	}
	out := make([][]float64, n)
	for i := range out {
		if len(sol.Cov[i]) != n {
			return nil
		}
		out[i] = make([]float64, n)
		for j := range out[i] {
			v := sol.Cov[i][j]
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil
			}
			out[i][j] = scale * scale * v
		}
	}
	return out
}

// PhysicalInput collects, per kept sample, the fitted parameters the derived
// quantities need; fixed parameters repeat their value. It fails when ρ is not
// positive (no finite-source effect, so no θE).
func (m *ModeResult) PhysicalInput() (PhysicalInput, error) {
	n := m.Samples.Len()
	col := func(p Param) []float64 {
		if j := m.Samples.Index(p.String()); j >= 0 {
			return m.Samples.Column(nil, j)
		}
		return slices.Repeat([]float64{Get(&m.Space.Base, p)}, n)
	}
	in := PhysicalInput{TE: col(TE), Rho: col(Rho)}
	if slices.Min(in.Rho) <= 0 {
		return in, fmt.Errorf("%w: ρ = 0 in mode %q: without a finite-source effect θE = θ*/ρ is not measured", ErrPhysical, m.Label)
	}
	if m.Space.Base.Q > 0 || m.Samples.Index("q") >= 0 {
		in.S, in.Q = col(S), col(Q)
	}
	free := func(p Param) bool { return slices.Contains(m.Space.Free, p) }
	if free(PiEN) || free(PiEE) || m.Space.Base.PiEN != 0 || m.Space.Base.PiEE != 0 {
		in.PiEN, in.PiEE = col(PiEN), col(PiEE)
	}
	if free(DsDt) || free(DAlphaDt) || m.Space.Base.DsDt != 0 || m.Space.Base.DAlphaDt != 0 {
		in.DsDt, in.DAlphaDt = col(DsDt), col(DAlphaDt)
	}
	return in, nil
}

// Draws returns n posterior draws of the mode as lens parameters (uniform
// without replacement over the kept samples, seeded).
func (m *ModeResult) Draws(n int, seed uint64) []lens.Params {
	rows := m.Samples.Draw(n, seed)
	out := make([]lens.Params, len(rows))
	for i, r := range rows {
		out[i] = paramsOfPhysical(m.Space, r)
	}
	return out
}

// LightCurveModel evaluates light curves of lens models against an event's
// datasets as the likelihood does (Event.DatasetCurve: each dataset's limb
// darkening and, with parallax, its observatory's offsets), with fluxes solved
// against the data and model magnitudes at each dataset's zero point. Not safe
// for concurrent use.
type LightCurveModel struct {
	ev     *Event
	lik    *Likelihood
	solver *lens.Solver
	imgs   []lens.Image
	buf    []float64
}

// NewLightCurveModel prepares light-curve evaluation for ev; tref fixes t0,par
// (a solution's TRef; 0 leaves it to the likelihood: Event.TRef).
func NewLightCurveModel(ev *Event, tref float64) (*LightCurveModel, error) {
	l, err := NewLikelihood(ev)
	if err != nil {
		return nil, err
	}
	if tref != 0 {
		if err := l.SetTRef(tref); err != nil {
			return nil, err
		}
	}
	return &LightCurveModel{ev: ev, lik: l}, nil
}

// tref is the reference epoch of the last evaluated model.
func (c *LightCurveModel) tref(p *lens.Params) float64 {
	if t := c.lik.TRef(); t != 0 {
		return t
	}
	if c.ev.TRef != 0 {
		return c.ev.TRef
	}
	return p.T0
}

// Curve fills amp with the magnification of p at times as seen by the first
// dataset (its limb darkening and observatory) and mags[d] with dataset d's
// model magnitude ZP − 2.5 log10(fs·A + fb), fs and fb solved against the data
// at p (NaN where the model flux is not positive). It returns the per-dataset
// fits. It panics if the slice lengths differ.
func (c *LightCurveModel) Curve(amp []float64, mags [][]float64, p lens.Params, times []float64) ([]DatasetFit, error) {
	if len(mags) != len(c.ev.Datasets) || len(amp) != len(times) {
		panic("fit: LightCurveModel.Curve slice lengths differ")
	}
	c.lik.ResetSolver()
	if _, err := c.lik.Chi2(&p); err != nil {
		return nil, err
	}
	fits := slices.Clone(c.lik.Fits())
	if cap(c.buf) < len(times) {
		c.buf = make([]float64, len(times))
	}
	a := c.buf[:len(times)]
	tref := c.tref(&p)
	for d, ds := range c.ev.Datasets {
		if len(mags[d]) != len(times) {
			panic("fit: LightCurveModel.Curve slice lengths differ")
		}
		if err := c.ev.DatasetCurve(d, a, p, times, tref); err != nil {
			return nil, err
		}
		if d == 0 {
			copy(amp, a)
		}
		for i, ai := range a {
			f := fits[d].Fs*ai + fits[d].Fb
			if f > 0 {
				mags[d][i] = ds.ZeroPoint - 2.5*math.Log10(f)
			} else {
				mags[d][i] = math.NaN()
			}
		}
	}
	return fits, nil
}

// ImageCount returns the number of point-source images of the source centre of
// model p at time t as seen from the Earth (parallax offsets included when p
// has parallax); 2 for a single lens.
func (c *LightCurveModel) ImageCount(p lens.Params, t float64) (int, error) {
	tref := c.tref(&p)
	m := lens.Model{Params: p, Ref: c.ev.Ref, TRef: tref}
	var off lens.Offset
	if HasParallax(&p) {
		o, err := c.ev.ParallaxOffsets([]float64{t}, tref)
		if err != nil {
			return 0, err
		}
		if o == nil {
			return 0, errNoCoords(&p)
		}
		off = o[0]
	}
	g := m.At(t, off)
	if g.Q == 0 {
		return 2, nil
	}
	b, err := lens.NewBinary(g.S, g.Q)
	if err != nil {
		return 0, err
	}
	if c.solver == nil {
		c.solver = lens.NewSolver(b)
	} else if c.solver.Binary() != b {
		c.solver.SetBinary(b)
	}
	c.imgs, err = c.solver.Images(c.imgs[:0], g.Zeta)
	return len(c.imgs), err
}

// Forecast computes the posterior band of the light curve of mode m over
// [set.T1, set.T2] from draws posterior draws (seeded) and the distribution of
// the next peak and, for a binary lens, the next caustic crossing after set.Now.
func (m *ModeResult) Forecast(ctx context.Context, ev *Event, draws int, seed uint64, set ForecastSettings) (*Forecast, error) {
	lc, err := NewLightCurveModel(ev, m.TRef)
	if err != nil {
		return nil, err
	}
	rows := m.Samples.Draw(draws, seed)
	curve := func(amp []float64, mags [][]float64, x, times []float64) error {
		_, err := lc.Curve(amp, mags, paramsOfPhysical(m.Space, x), times)
		return err
	}
	var images ImageCounter
	if m.Space.Base.Q > 0 || m.Samples.Index("q") >= 0 {
		images = func(x []float64, t float64) (int, error) { return lc.ImageCount(paramsOfPhysical(m.Space, x), t) }
	}
	return ForecastCurves(ctx, rows, curve, images, len(ev.Datasets), set)
}

// ForecastTable exports a forecast: time, magnification band and each dataset's
// model-magnitude band.
func ForecastTable(info ExportInfo, ev *Event, f *Forecast) (*Table, error) {
	if len(f.Mag) != len(ev.Datasets) {
		return nil, fmt.Errorf("fit: forecast has %d datasets, event %d", len(f.Mag), len(ev.Datasets))
	}
	ds := make([]CurveDataset, len(ev.Datasets))
	for d, s := range ev.Datasets {
		ds[d] = CurveDataset{Name: s.Name, ZeroPoint: s.ZeroPoint, Mag: f.Mag[d], Lower: f.MagLower[d], Upper: f.MagUpper[d]}
	}
	info.Notes = append(info.Notes, f.Method...)
	return LightCurveTable(info, f.Times, f.Amp, f.AmpLower, f.AmpUpper, ds)
}

// ModelLightCurveTable exports the light curve of one model p (e.g. the best-χ²
// sample) fitted with t0,par = tref (0: the event's): time, magnification and
// each dataset's model magnitude.
func ModelLightCurveTable(info ExportInfo, ev *Event, p lens.Params, tref float64, times []float64) (*Table, error) {
	lc, err := NewLightCurveModel(ev, tref)
	if err != nil {
		return nil, err
	}
	amp := make([]float64, len(times))
	mags := make([][]float64, len(ev.Datasets))
	for d := range mags {
		mags[d] = make([]float64, len(times))
	}
	if _, err := lc.Curve(amp, mags, p, times); err != nil {
		return nil, err
	}
	ds := make([]CurveDataset, len(ev.Datasets))
	for d, s := range ev.Datasets {
		ds[d] = CurveDataset{Name: s.Name, ZeroPoint: s.ZeroPoint, Mag: mags[d]}
	}
	return LightCurveTable(info, times, amp, nil, nil, ds)
}

// EventConventions returns the convention lines of ev for export headers.
func EventConventions(ev *Event) []string {
	zps := make([]ZeroPointInfo, len(ev.Datasets))
	for i, d := range ev.Datasets {
		zps[i] = ZeroPointInfo{Name: d.Name, ZeroPoint: d.ZeroPoint, TimeSystem: d.TimeSystem}
	}
	return append(Conventions(ev.Ref, zps), ParallaxConventions(ev, 0)...)
}

// NewExportInfo returns the export header for content what about ev: the data
// fingerprint of ev's datasets (DataFingerprint) and ev's conventions. Callers
// exporting from a notebook may replace Fingerprint with Notebook.Fingerprint.
func NewExportInfo(what string, ev *Event) ExportInfo {
	return ExportInfo{What: what, Fingerprint: DataFingerprint(ev.Datasets), Conventions: EventConventions(ev)}
}
