package fit

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"lensbook/lens"
)

// pxEvent is a small two-dataset event with coordinates for unit tests: a
// static single-lens light curve with Gaussian noise (seeded).
func pxEvent(coords *Coords, tref float64) *Event {
	r := rand.New(rand.NewPCG(7, 11))
	truth := lens.Params{T0: 2460800, U0: 0.2, TE: 90, PiEN: 0.15, PiEE: -0.05}
	ev := NewEvent("px")
	ev.Coords, ev.TRef = coords, tref
	for k := 0; k < 2; k++ {
		d := &Dataset{Name: []string{"a", "b"}[k], ZeroPoint: 28, LD: 0.5}
		for i := 0; i < 300; i++ {
			d.T = append(d.T, truth.T0-200+float64(i)*(1.3+0.1*float64(k))+0.1*r.Float64())
		}
		a := make([]float64, len(d.T))
		m := lens.Model{Params: truth, TRef: truth.T0}
		ra, dec := 4.7, -0.5
		off := make([]lens.Offset, len(d.T))
		lens.ParallaxOffsets(off, d.T, ra, dec, truth.T0)
		if err := lens.LightCurve(a, &m, d.T, off); err != nil {
			panic(err)
		}
		for i := range a {
			f := 1000*a[i] + 200
			s := 0.01 * f
			d.Flux = append(d.Flux, f+s*r.NormFloat64())
			d.Err = append(d.Err, s)
		}
		ev.Datasets = append(ev.Datasets, d)
	}
	return ev
}

// With πE = 0 and no orbital motion the model is the static one exactly:
// χ² and per-dataset fluxes are bitwise equal with and without coordinates,
// for any t0,par, and the lens light curve with zero-πE offsets is bitwise the
// one without offsets.
func TestParallaxZeroIsStaticExactly(t *testing.T) {
	c := Coords{RA: 269.5, Dec: -29}
	static, err := NewLikelihood(pxEvent(nil, 0))
	if err != nil {
		t.Fatal(err)
	}
	withCoords, err := NewLikelihood(pxEvent(&c, 2460777.3))
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range []lens.Params{
		{T0: 2460800.5, U0: 0.21, TE: 88},
		{T0: 2460800.5, U0: -0.05, TE: 70, S: 1.2, Q: 0.01, Alpha: 2.1},
	} {
		a, err1 := static.Chi2(&p)
		b, err2 := withCoords.Chi2(&p)
		if err1 != nil || err2 != nil {
			t.Fatal(err1, err2)
		}
		if math.Float64bits(a) != math.Float64bits(b) {
			t.Errorf("q=%v: χ² static %v, with coordinates %v", p.Q, a, b)
		}
		for k := range static.Fits() {
			if static.Fits()[k] != withCoords.Fits()[k] {
				t.Errorf("dataset %d fits differ: %+v vs %+v", k, static.Fits()[k], withCoords.Fits()[k])
			}
		}
	}
	// lens level: zero πE with real offsets.
	ev := pxEvent(&c, 0)
	times := ev.Datasets[0].T
	off, err := ev.ParallaxOffsets(times, 2460790)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range []lens.Params{{T0: 2460800.5, U0: 0.21, TE: 88}, {T0: 2460800.5, U0: -0.05, TE: 70, S: 1.2, Q: 0.01, Alpha: 2.1}} {
		m := lens.Model{Params: p, TRef: 2460790}
		a, b := make([]float64, len(times)), make([]float64, len(times))
		if err := lens.LightCurve(a, &m, times, nil); err != nil {
			t.Fatal(err)
		}
		if err := lens.LightCurve(b, &m, times, off); err != nil {
			t.Fatal(err)
		}
		for i := range a {
			if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
				t.Fatalf("q=%v point %d: %v without offsets, %v with zero-πE offsets", p.Q, i, a[i], b[i])
			}
		}
	}
}

// Parallax without coordinates is an error naming the problem, from χ² and
// from Optimize; invalid coordinates are reported.
func TestParallaxNeedsCoordinates(t *testing.T) {
	l, err := NewLikelihood(pxEvent(nil, 0))
	if err != nil {
		t.Fatal(err)
	}
	p := lens.Params{T0: 2460800, U0: 0.2, TE: 90, PiEN: 0.1}
	if _, err := l.Chi2(&p); err == nil || !strings.Contains(err.Error(), "coordinates") {
		t.Errorf("χ² with πE and no coordinates: %v", err)
	}
	if _, err := Optimize(t.Context(), l, p, FreeSpecs(T0, PiEN, PiEE), OptSettings{}); !errors.Is(err, ErrParallax) {
		t.Errorf("Optimize: %v, want ErrParallax", err)
	}
	bad := Coords{RA: 361, Dec: 0}
	l, _ = NewLikelihood(pxEvent(&bad, 2460800))
	if _, err := l.Chi2(&p); err == nil || !strings.Contains(err.Error(), "out of range") {
		t.Errorf("χ² with RA 361°: %v", err)
	}
}

// t0,par: the event's value when set; else fixed by Refine at the start's t0
// and never moved by the fit; offsets are computed once (the cached slices
// keep their identity across calls).
func TestParallaxTRefFixed(t *testing.T) {
	c := Coords{RA: 269.5, Dec: -29}
	l, _ := NewLikelihood(pxEvent(&c, 2460790.25))
	p := lens.Params{T0: 2460800, U0: 0.2, TE: 90, PiEN: 0.1}
	if _, err := l.Chi2(&p); err != nil {
		t.Fatal(err)
	}
	if l.TRef() != 2460790.25 {
		t.Errorf("TRef %v, want the event's 2460790.25", l.TRef())
	}
	ev := pxEvent(&c, 0)
	l, _ = NewLikelihood(ev)
	start := lens.Params{T0: 2460803, U0: 0.25, TE: 80}
	sol, err := Refine(t.Context(), l, start, RefineSettings{Specs: FreeSpecs(T0, U0, TE, PiEN, PiEE)})
	if err != nil {
		t.Fatal(err)
	}
	if sol.TRef != start.T0 || l.TRef() != start.T0 {
		t.Errorf("t0,par %v (likelihood %v), want the start's t0 %v", sol.TRef, l.TRef(), start.T0)
	}
	if sol.Params.T0 == start.T0 {
		t.Error("t0 did not move: the test cannot tell t0,par from t0")
	}
	first := &l.par.off[0][0]
	q := sol.Params
	q.PiEN += 0.01
	_, _ = l.Chi2(&q)
	if &l.par.off[0][0] != first {
		t.Error("offsets recomputed between calls")
	}
	if ev.TRef != 0 {
		t.Error("the likelihood wrote into the event")
	}
	if got := ev.SetDefaultTRef(sol.Params); got != sol.Params.T0 || ev.TRef != got {
		t.Errorf("SetDefaultTRef: %v", got)
	}
	if got := ev.SetDefaultTRef(start); got != sol.Params.T0 {
		t.Errorf("SetDefaultTRef overwrote a set t0,par: %v", got)
	}
}

// Without a chosen t0,par a parallax or orbital-motion model is an error (no
// guess from whichever model comes first); SetTRef fixes it once.
func TestParallaxNoTRef(t *testing.T) {
	c := Coords{RA: 269.5, Dec: -29}
	l, _ := NewLikelihood(pxEvent(&c, 0))
	for _, p := range []lens.Params{
		{T0: 2460800, U0: 0.2, TE: 90, PiEN: 0.1},
		{T0: 2460800, U0: 0.2, TE: 90, S: 1, Q: 0.1, DsDt: 0.1},
	} {
		if _, err := l.Chi2(&p); !errors.Is(err, ErrNoTRef) {
			t.Errorf("%+v: %v, want ErrNoTRef", p, err)
		}
	}
	static := lens.Params{T0: 2460800, U0: 0.2, TE: 90}
	if _, err := l.Chi2(&static); err != nil {
		t.Errorf("static model: %v", err)
	}
	if err := l.SetTRef(2460795); err != nil {
		t.Fatal(err)
	}
	p := lens.Params{T0: 2460800, U0: 0.2, TE: 90, PiEN: 0.1}
	if _, err := l.Chi2(&p); err != nil || l.TRef() != 2460795 {
		t.Errorf("after SetTRef: %v, TRef %v", err, l.TRef())
	}
	if err := l.SetTRef(2460796); err == nil {
		t.Error("t0,par changed after it was fixed")
	}
	if err := l.SetTRef(math.NaN()); err == nil {
		t.Error("NaN t0,par accepted")
	}
}

// ModelCurve equals the likelihood's magnification at the data times.
func TestModelCurveMatchesLikelihood(t *testing.T) {
	c := Coords{RA: 269.5, Dec: -29}
	ev := pxEvent(&c, 2460795)
	l, _ := NewLikelihood(ev)
	p := lens.Params{T0: 2460800, U0: 0.2, TE: 90, PiEN: 0.15, PiEE: -0.05, S: 0.8, Q: 0.02, Alpha: 1, DAlphaDt: 0.3}
	if _, err := l.Chi2(&p); err != nil {
		t.Fatal(err)
	}
	for k, d := range ev.Datasets {
		a := make([]float64, d.Len())
		if err := ev.ModelCurve(a, p, d.LD, d.T, 0); err != nil {
			t.Fatal(err)
		}
		for i, v := range l.Magnification(k) {
			if v != a[i] {
				t.Fatalf("dataset %d point %d: likelihood %v, ModelCurve %v", k, i, v, a[i])
			}
		}
	}
}

func TestParallaxConventions(t *testing.T) {
	c := Coords{RA: 269.380833, Dec: -28.686667}
	ev := pxEvent(&c, 2460870)
	ev.Observers = []*ObserverTable{nil, {Name: "probe"}}
	lines := ParallaxConventions(ev, 0)
	all := strings.Join(lines, "\n")
	for _, want := range []string{"RA 269.380833 deg", "Dec -28.686667 deg", "17:57:31.400 -28:41:12.00", "t0par: 2460870 ", "Gould 2004",
		"dataset b observed from probe"} {
		if !strings.Contains(all, want) {
			t.Errorf("conventions lack %q:\n%s", want, all)
		}
	}
	for _, l := range lines {
		if k, _, ok := strings.Cut(l, ": "); !ok || strings.ContainsAny(k, " \n") {
			t.Errorf("line %q is not key: value", l)
		}
	}
	if l := ParallaxConventions(pxEvent(nil, 0), 0); len(l) != 1 || !strings.Contains(l[0], "not given") {
		t.Errorf("without coordinates: %q", l)
	}
}
