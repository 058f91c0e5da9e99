// Package problems holds synthetic microlensing events with known true
// parameters, simulated by lensbook's own lens package with seeded Gaussian
// noise: test and benchmark problems for package fit, in the spirit of gonum's
// optimize/functions (each problem knows its answer).
//
// Every event is a Spec: the true model and the observing sites. Simulate turns
// a Spec into a fit.Event deterministically for a given seed (PCG streams
// derived from the seed and the site index), so tests, benchmarks and the files
// in testdata/ agree. Times are full JD; fluxes follow each site's zero point.
package problems

import (
	"fmt"
	"math"
	"math/rand/v2"

	"lensbook/fit"
	"lensbook/lens"
)

// Window is a time interval observed with its own cadence.
type Window struct {
	T1, T2  float64 // full JD
	Cadence float64 // days between exposures
}

// Site is one simulated telescope and band.
type Site struct {
	Name string
	Band string
	// Windows are the observed intervals; points fall only in the site's nights.
	Windows []Window
	// NightPhase and NightFrac place the nightly observing window: a point at t
	// is kept when frac(t − NightPhase) < NightFrac (NightFrac 0 means always).
	NightPhase, NightFrac float64
	// ZeroPoint, Fs, Fb: m = ZP − 2.5 log10 F, source and blend flux.
	ZeroPoint float64
	Fs, Fb    float64
	// SigMag is the 1σ uncertainty (mag) at baseline flux Fs+Fb; it scales as
	// √(F_base/F) (photon noise) and never goes below FloorMag.
	SigMag, FloorMag float64
	// Mags writes magnitudes instead of fluxes in the text files (the event is
	// always simulated in flux).
	Mags bool
	// LD is the linear limb-darkening coefficient in this band.
	LD float64
}

// Spec is a synthetic event: true model and sites.
type Spec struct {
	Name  string
	Truth lens.Model // Truth.LD is ignored: each site's LD is used
	Sites []Site
	// Note says what the event is meant to test.
	Note string
}

// Simulate returns the event with Gaussian noise from seed. Points whose
// magnification fails to evaluate are an error (never dropped).
func (s *Spec) Simulate(seed uint64) (*fit.Event, error) {
	ev := fit.NewEvent(s.Name)
	ev.Ref = s.Truth.Ref
	ev.Tol = s.Truth.Tol
	var e lens.Evaluator
	for k, site := range s.Sites {
		r := rand.New(rand.NewPCG(seed, uint64(k)+1))
		var ts []float64
		for _, w := range site.Windows {
			if !(w.Cadence > 0) || !(w.T2 > w.T1) {
				return nil, fmt.Errorf("problems: site %q: bad window %+v", site.Name, w)
			}
			for t := w.T1; t <= w.T2; t += w.Cadence {
				tt := t + 0.3*w.Cadence*(r.Float64()-0.5)
				if site.NightFrac > 0 {
					f := tt - site.NightPhase
					if f-math.Floor(f) >= site.NightFrac {
						continue
					}
				}
				ts = append(ts, tt)
			}
		}
		sortFloat(ts)
		a := make([]float64, len(ts))
		m := s.Truth
		m.LD = site.LD
		if err := e.LightCurve(a, &m, ts, nil); err != nil {
			return nil, fmt.Errorf("problems: %s/%s: %w", s.Name, site.Name, err)
		}
		d := &fit.Dataset{Name: site.Name, Band: site.Band, TimeSystem: "simulated", ZeroPoint: site.ZeroPoint, LD: site.LD}
		base := site.Fs + site.Fb
		for i, t := range ts {
			f := site.Fs*a[i] + site.Fb
			if !(f > 0) || math.IsNaN(a[i]) {
				return nil, fmt.Errorf("problems: %s/%s: model flux %v at t=%v", s.Name, site.Name, f, t)
			}
			sm := math.Max(site.SigMag*math.Sqrt(base/f), site.FloorMag)
			sig := f * sm * math.Ln10 / 2.5
			d.T = append(d.T, t)
			d.Flux = append(d.Flux, f+sig*r.NormFloat64())
			d.Err = append(d.Err, sig)
			d.Line = append(d.Line, i+1)
		}
		ev.Datasets = append(ev.Datasets, d)
	}
	return ev, nil
}

func sortFloat(x []float64) {
	// insertion sort is enough: windows are nearly ordered
	for i := 1; i < len(x); i++ {
		for j := i; j > 0 && x[j] < x[j-1]; j-- {
			x[j], x[j-1] = x[j-1], x[j]
		}
	}
}

// TruthChi2 is χ² of the event at its true parameters (fluxes solved).
func TruthChi2(s *Spec, ev *fit.Event) (float64, error) {
	l, err := fit.NewLikelihood(ev)
	if err != nil {
		return 0, err
	}
	p := s.Truth.Params
	return l.Chi2(&p)
}

const jd0 = 2460400.0 // epoch of the synthetic events (an arbitrary 2024 date)

// survey returns a survey-like site: long baseline, one point per ~cad days.
func survey(name string, t1, t2, cad, fs, fb, sig float64) Site {
	return Site{Name: name, Band: "I", Windows: []Window{{t1, t2, cad}}, NightPhase: 0.1, NightFrac: 0.4,
		ZeroPoint: 28, Fs: fs, Fb: fb, SigMag: sig, FloorMag: 0.003, LD: 0.55}
}

// SingleLens is a point-source point-lens event (Paczynski 1986) with moderate
// magnification (A ≈ 6.7), blended.
func SingleLens() *Spec {
	return &Spec{Name: "single lens", Note: "point-source single lens, u0 = 0.15, blended",
		Truth: lens.Model{Params: lens.Params{T0: jd0 + 10, U0: 0.15, TE: 25}, Ref: lens.CentralCaustic},
		Sites: []Site{
			survey("simsurvey", jd0-90, jd0+90, 0.25, 1000, 400, 0.015),
			{Name: "simfollow", Band: "V", Windows: []Window{{jd0 + 2, jd0 + 18, 0.05}}, NightPhase: 0.55, NightFrac: 0.35,
				ZeroPoint: 27, Fs: 300, Fb: 80, SigMag: 0.01, FloorMag: 0.003, LD: 0.7},
		}}
}

// FiniteSourceSingle is a high-magnification single-lens event whose source
// (ρ = 0.006) is crossed by the lens: u0 = 0.002 < ρ (Gould 1994 regime).
func FiniteSourceSingle() *Spec {
	return &Spec{Name: "finite-source single lens", Note: "u0 < rho: the lens transits the source",
		Truth: lens.Model{Params: lens.Params{T0: jd0, U0: 0.002, TE: 18, Rho: 0.006}, Ref: lens.CentralCaustic},
		Sites: []Site{
			survey("simsurvey", jd0-60, jd0+60, 0.2, 500, 200, 0.02),
			{Name: "simfollow", Band: "I", Windows: []Window{{jd0 - 0.6, jd0 + 0.6, 0.004}}, NightFrac: 0,
				ZeroPoint: 28, Fs: 450, Fb: 30, SigMag: 0.01, FloorMag: 0.002, LD: 0.55},
		}}
}

// PlanetCentral is a planetary event (q = 1e-3, s = 0.7) whose source passes
// close to the central caustic (width ≈ 4q/(s − 1/s)² = 0.0075, Chung et al.
// 2005) at high magnification (u0 = 0.015) without crossing it: the regime of
// the close/wide degeneracy (Griest & Safizadeh 1998; Dominik 1999).
func PlanetCentral() *Spec {
	return &Spec{Name: "planet central caustic", Note: "high-magnification central-caustic approach, q = 1e-3",
		Truth: lens.Model{Params: lens.Params{T0: jd0, U0: 0.015, TE: 30, S: 0.7, Q: 1e-3, Alpha: 0.9}, Ref: lens.CentralCaustic},
		Sites: []Site{
			survey("simsurvey", jd0-80, jd0+80, 0.2, 800, 300, 0.015),
			{Name: "simfollow", Band: "I", Windows: []Window{{jd0 - 1.2, jd0 + 1.2, 0.01}}, NightFrac: 0,
				ZeroPoint: 28, Fs: 700, Fb: 50, SigMag: 0.008, FloorMag: 0.002, LD: 0.55},
		}}
}

// PlanetaryCaustic is a low-magnification event whose source crosses the
// planetary caustic of a wide planet (s = 1.35, q = 1e-3; caustic near
// s − 1/s = 0.61 from the host, Han 2006), with a finite source. α = 6.08 rad
// puts the caustic centre 0.61·|sin α| ≈ 0.123 from the trajectory line, within
// the caustic's half-height (≈ 2√q/(s√(s²+1)) = 0.028) of u0 = 0.12: the
// source enters the caustic at t0 + 15.78 d and leaves it at t0 + 17.31 d
// (trajectory against lens.Caustics, checked in problems_test.go). The
// follow-up site observes round the clock from t0 + 14.5 d to t0 + 19 d, as an
// alerted follow-up campaign would, so both jumps are in the data; the survey
// alone misses the entry (it falls in its daytime gap).
func PlanetaryCaustic() *Spec {
	return &Spec{Name: "planetary caustic crossing", Note: "planetary-caustic crossing at low magnification, entry and exit observed",
		Truth: lens.Model{Params: lens.Params{T0: jd0, U0: 0.12, TE: 28, S: 1.35, Q: 1e-3, Alpha: 6.08, Rho: 0.003}, Ref: lens.CentralCaustic},
		Sites: []Site{
			survey("simsurvey", jd0-80, jd0+80, 0.1, 900, 300, 0.012),
			{Name: "simfollow", Band: "I", Windows: []Window{{jd0 + 14.5, jd0 + 19, 0.01}}, NightFrac: 0,
				ZeroPoint: 28, Fs: 800, Fb: 50, SigMag: 0.01, FloorMag: 0.002, LD: 0.55},
		}}
}

// ResonantBinary is a stellar binary (q = 0.4, s = 1.05: a single resonant
// caustic, Erdl & Schneider 1993) crossed by the source: it enters the caustic
// at t0 − 19.31 d and leaves it at t0 + 4.48 d (problems_test.go). The
// follow-up network observes round the clock from t0 − 21 d to t0 + 8 d, so
// both jumps are in the data.
func ResonantBinary() *Spec {
	return &Spec{Name: "resonant binary star", Note: "resonant caustic crossing, q = 0.4, entry and exit observed",
		Truth: lens.Model{Params: lens.Params{T0: jd0, U0: 0.1, TE: 40, S: 1.05, Q: 0.4, Alpha: 2.2, Rho: 0.004}, Ref: lens.CentralCaustic},
		Sites: []Site{
			survey("simsurvey", jd0-100, jd0+100, 0.2, 1000, 500, 0.012),
			{Name: "simfollow", Band: "I", Windows: []Window{{jd0 - 21, jd0 + 8, 0.05}}, NightFrac: 0,
				ZeroPoint: 28, Fs: 900, Fb: 100, SigMag: 0.01, FloorMag: 0.002, LD: 0.55},
		}}
}

// All returns every problem.
func All() []*Spec {
	return []*Spec{SingleLens(), FiniteSourceSingle(), PlanetCentral(), PlanetaryCaustic(), ResonantBinary()}
}

// DemoT0 is the peak time of the demo event (full JD, 2024 June).
const DemoT0 = 2460480.3

// Demo is "lensbook demo event": an invented planetary event seen by three
// fictional observatories (a survey with a long baseline in magnitudes and two
// follow-up sites), about 3000 points in all, with a central-caustic approach
// of a q = 1.3e-3 planet (caustic width ≈ 4q/(s − 1/s)² = 0.021 θE, Chung et
// al. 2005, comparable to u0). Point source (ρ = 0) so that the event is
// exactly the model the grid search uses. The sites and their names are made
// up for the demo.
func Demo() *Spec {
	t0 := DemoT0
	return &Spec{Name: "lensbook demo event", Note: "invented planetary event, central-caustic approach, three fictional sites",
		Truth: lens.Model{Params: lens.Params{T0: t0, U0: 0.022, TE: 34, S: 0.78, Q: 1.3e-3, Alpha: 2.45}, Ref: lens.CentralCaustic},
		Sites: []Site{
			{Name: "Tallowmere Survey Telescope", Band: "I", Windows: []Window{{t0 - 110, t0 + 90, 0.05}},
				NightPhase: 0.05, NightFrac: 0.35, ZeroPoint: 25, Fs: 180, Fb: 71, SigMag: 0.02, FloorMag: 0.004, Mags: true, LD: 0.55},
			{Name: "Quillon Peak 1.0m", Band: "V", Windows: []Window{{t0 - 4, t0 + 4, 0.004}},
				NightPhase: 0.3, NightFrac: 0.35, ZeroPoint: 25, Fs: 120, Fb: 30, SigMag: 0.012, FloorMag: 0.003, LD: 0.7},
			{Name: "Sandreef Observatory 0.6m", Band: "I", Windows: []Window{{t0 - 20, t0 - 6, 0.1}, {t0 - 6, t0 + 6, 0.006}, {t0 + 6, t0 + 20, 0.1}},
				NightPhase: 0.62, NightFrac: 0.35, ZeroPoint: 25, Fs: 200, Fb: 90, SigMag: 0.015, FloorMag: 0.003, Mags: true, LD: 0.55},
		}}
}
