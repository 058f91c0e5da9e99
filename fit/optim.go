package fit

import (
	"context"
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"

	"lensbook/lens"
)

// Status says how a fitting step ended. The zero value means it has not run.
type Status int

const (
	NotRun         Status = iota // the step has not run
	Converged                    // the convergence test was met
	IterationLimit               // the evaluation budget ran out first (result usable, maybe not optimal)
	Cancelled                    // the context was cancelled; results are partial
	Failed                       // an error stopped the step (see the accompanying error)
)

var statusNames = [...]string{"notrun", "converged", "iterationlimit", "cancelled", "failed"}

func (s Status) String() string {
	if s >= 0 && int(s) < len(statusNames) {
		return statusNames[s]
	}
	return fmt.Sprintf("Status(%d)", int(s))
}

// Early reports whether the step stopped before meeting its convergence test.
func (s Status) Early() bool { return s != Converged }

// MarshalText encodes the status by name.
func (s Status) MarshalText() ([]byte, error) { return []byte(s.String()), nil }

// UnmarshalText decodes a status name.
func (s *Status) UnmarshalText(b []byte) error {
	for i, n := range statusNames {
		if n == string(b) {
			*s = Status(i)
			return nil
		}
	}
	return fmt.Errorf("fit: unknown status %q", b)
}

// Method is a local optimiser.
type Method int

const (
	// MethodDefault is LevenbergMarquardt, the faster of the two on our recovery
	// problems (see BenchmarkSingleLensMethods and the package README).
	MethodDefault Method = iota
	// NelderMead is gonum's downhill simplex (Nelder & Mead 1965, Comput. J. 7, 308).
	NelderMead
	// LevenbergMarquardt is damped Gauss–Newton on the normalised residuals
	// (Levenberg 1944, Q. Appl. Math. 2, 164; Marquardt 1963, SIAM J. Appl. Math.
	// 11, 431) with a forward-difference Jacobian; the linear fluxes are re-solved
	// inside every residual evaluation (variable projection, Golub & Pereyra 1973,
	// SIAM J. Numer. Anal. 10, 413).
	LevenbergMarquardt
	// BFGS is gonum's quasi-Newton method with a central-difference gradient.
	BFGS
)

var methodNames = [...]string{"default", "neldermead", "levenbergmarquardt", "bfgs"}

func (m Method) String() string {
	if m >= 0 && int(m) < len(methodNames) {
		return methodNames[m]
	}
	return fmt.Sprintf("Method(%d)", int(m))
}

// MarshalText encodes the method by name.
func (m Method) MarshalText() ([]byte, error) { return []byte(m.String()), nil }

// UnmarshalText decodes a method name.
func (m *Method) UnmarshalText(b []byte) error {
	for i, n := range methodNames {
		if n == string(b) {
			*m = Method(i)
			return nil
		}
	}
	return fmt.Errorf("fit: unknown optimiser %q", b)
}

// OptSettings configures a local optimisation. The zero value is usable.
type OptSettings struct {
	Method Method `json:"method"`
	// MaxEval caps χ² evaluations; 0 means 300 per free parameter.
	MaxEval int `json:"maxEval"`
	// Tol is the χ² decrease below which the fit counts as converged; 0 means 1e-3.
	Tol float64 `json:"tol"`
}

func (s OptSettings) maxEval(dim int) int {
	if s.MaxEval > 0 {
		return s.MaxEval
	}
	return 300 * dim
}

func (s OptSettings) tol() float64 {
	if s.Tol > 0 {
		return s.Tol
	}
	return 1e-3
}

// ErrParallax reports a fit asked to free the parallax of an event without
// sky coordinates (Event.Coords): the Sun offsets per epoch need them, and
// without them πE has no effect on the light curve.
var ErrParallax = errors.New("fit: parallax (piEN, piEE) cannot be fitted: the event has no sky coordinates (RA, Dec)")

// errStop is returned internally when the evaluation budget is spent.
var errStop = errors.New("fit: evaluation budget spent")

// objective is χ² over the scaled coordinates y of a Space: the Space's
// coordinate i is x0[i] + h[i]·y[i]. It remembers the best point seen, so a
// cancelled or exhausted run still returns its best model.
type objective struct {
	ctx     context.Context
	l       *Likelihood
	sp      *Space
	x0, h   []float64
	x       []float64 // scratch coordinates
	evals   int
	max     int
	best    float64
	bestY   []float64
	resid   []float64
	stopped error
	fdStep  float64
}

func newObjective(ctx context.Context, l *Likelihood, sp *Space, start lens.Params, maxEval int) *objective {
	n := sp.Dim()
	o := &objective{ctx: ctx, l: l, sp: sp, x0: sp.Vector(nil, start), h: make([]float64, n), x: make([]float64, n),
		max: maxEval, best: math.Inf(1), bestY: make([]float64, n), resid: make([]float64, l.N())}
	sp.scale(o.h, start)
	// Finite-source magnifications carry ~Tol relative noise, so their
	// derivatives need a step well above it (common practice: the square
	// root of the noise level).
	o.fdStep = 1e-4
	if start.Rho > 0 {
		tol := l.ev.Tol
		if tol == 0 {
			tol = lens.DefaultTol
		}
		o.fdStep = math.Max(1e-4, math.Sqrt(tol)*0.3)
	}
	return o
}

func (o *objective) params(y []float64) lens.Params {
	for i := range y {
		o.x[i] = o.x0[i] + o.h[i]*y[i]
	}
	return o.sp.Params(o.x)
}

func (o *objective) inBounds(y []float64) bool {
	for i := range y {
		o.x[i] = o.x0[i] + o.h[i]*y[i]
	}
	return o.sp.InBounds(o.x)
}

// check returns a non-nil error when the run must stop.
func (o *objective) check() error {
	if o.stopped != nil {
		return o.stopped
	}
	if err := o.ctx.Err(); err != nil {
		o.stopped = err
	} else if o.evals >= o.max {
		o.stopped = errStop
	}
	return o.stopped
}

// chi2 evaluates χ² at y (+Inf outside the bounds or on a model error).
func (o *objective) chi2(y []float64) float64 {
	if !o.inBounds(y) {
		return math.Inf(1)
	}
	p := o.params(y)
	o.evals++
	c, err := o.l.Chi2(&p)
	if err != nil {
		return math.Inf(1)
	}
	o.record(y, c)
	return c
}

func (o *objective) record(y []float64, c float64) {
	if c < o.best {
		o.best = c
		copy(o.bestY, y)
	}
}

// residuals writes the normalised residuals at y into dst and returns χ².
func (o *objective) residuals(dst, y []float64) float64 {
	if !o.inBounds(y) {
		return math.Inf(1)
	}
	p := o.params(y)
	o.evals++
	c, err := o.l.Residuals(dst, &p)
	if err != nil {
		return math.Inf(1)
	}
	o.record(y, c)
	return c
}

// minimize runs method from y = 0 and leaves the best point in o.bestY.
func (o *objective) minimize(method Method, tol float64) (Status, error) {
	n := o.sp.Dim()
	y := make([]float64, n)
	if c := o.chi2(y); math.IsInf(c, 1) {
		p := o.params(y)
		_, err := o.l.Chi2(&p)
		if err == nil {
			err = fmt.Errorf("fit: starting point %+v is outside the bounds", p)
		}
		return Failed, err
	}
	var st Status
	var err error
	switch method {
	case NelderMead:
		st, err = o.runGonum(&optimize.NelderMead{SimplexSize: 1}, tol, false)
	case BFGS:
		st, err = o.runGonum(&optimize.BFGS{}, tol, true)
	case MethodDefault, LevenbergMarquardt:
		st, err = o.levenbergMarquardt(tol)
	default:
		return Failed, fmt.Errorf("fit: unknown optimiser %v", method)
	}
	if errors.Is(o.stopped, context.Canceled) || errors.Is(o.stopped, context.DeadlineExceeded) {
		return Cancelled, nil
	}
	return st, err
}

func (o *objective) runGonum(m optimize.Method, tol float64, grad bool) (Status, error) {
	n := o.sp.Dim()
	prob := optimize.Problem{
		Func: func(y []float64) float64 {
			if o.check() != nil {
				return o.best
			}
			return o.chi2(y)
		},
		Status: func() (optimize.Status, error) {
			if err := o.check(); err != nil {
				return optimize.Failure, err
			}
			return optimize.NotTerminated, nil
		},
	}
	if grad {
		prob.Grad = func(g, y []float64) {
			o.gradient(g, y)
		}
	}
	set := &optimize.Settings{
		Converger: &optimize.FunctionConverge{Absolute: tol, Iterations: 4 * n},
	}
	res, err := optimize.Minimize(prob, make([]float64, n), set, m)
	if o.stopped == errStop {
		return IterationLimit, nil
	}
	if o.stopped != nil {
		return Cancelled, nil
	}
	if err != nil && res == nil {
		return Failed, err
	}
	switch res.Status {
	case optimize.FunctionConvergence, optimize.GradientThreshold, optimize.StepConvergence, optimize.MethodConverge, optimize.Success:
		return Converged, nil
	case optimize.FunctionEvaluationLimit, optimize.IterationLimit:
		return IterationLimit, nil
	}
	// A line-search failure in BFGS near a noisy minimum is not fatal: the best
	// point seen is kept.
	return IterationLimit, nil
}

// gradient is the central-difference gradient of chi2 at y.
func (o *objective) gradient(g, y []float64) {
	h := o.fdStep
	yy := make([]float64, len(y))
	copy(yy, y)
	for i := range y {
		yy[i] = y[i] + h
		fp := o.chi2(yy)
		yy[i] = y[i] - h
		fm := o.chi2(yy)
		yy[i] = y[i]
		g[i] = (fp - fm) / (2 * h)
		if math.IsInf(fp, 0) || math.IsInf(fm, 0) {
			g[i] = 0
		}
	}
}

// jacobian fills J (N×n, row-major in jac) by forward differences of the
// residuals r0 at y, stepping backwards where the forward point is out of bounds.
// It returns false when a column could not be computed.
func (o *objective) jacobian(jac []float64, r0, y []float64) bool {
	n := len(y)
	N := len(r0)
	yy := make([]float64, n)
	copy(yy, y)
	r := o.resid
	for j := 0; j < n; j++ {
		h := o.fdStep
		yy[j] = y[j] + h
		c := o.residuals(r, yy)
		if math.IsInf(c, 1) {
			h = -h
			yy[j] = y[j] + h
			c = o.residuals(r, yy)
			if math.IsInf(c, 1) {
				return false
			}
		}
		yy[j] = y[j]
		for i := 0; i < N; i++ {
			jac[i*n+j] = (r[i] - r0[i]) / h
		}
	}
	return true
}

// levenbergMarquardt minimises Σ r² from y = 0.
func (o *objective) levenbergMarquardt(tol float64) (Status, error) {
	n := o.sp.Dim()
	N := o.l.N()
	y := make([]float64, n)
	r0 := make([]float64, N)
	jac := make([]float64, N*n)
	yTry := make([]float64, n)
	c := o.residuals(r0, y)
	lambda := 1e-3
	A := mat.NewSymDense(n, nil)
	Ad := mat.NewSymDense(n, nil)
	g := mat.NewVecDense(n, nil)
	step := mat.NewVecDense(n, nil)
	var chol mat.Cholesky
	small := 0
	for {
		if o.check() != nil {
			break
		}
		if !o.jacobian(jac, r0, y) {
			return Failed, fmt.Errorf("fit: Jacobian could not be evaluated near the bounds")
		}
		normalEquations(A, g, jac, r0[:N], n)
		improved := false
		for tries := 0; tries < 12; tries++ {
			if o.check() != nil {
				break
			}
			Ad.CopySym(A)
			for a := 0; a < n; a++ {
				d := A.At(a, a)
				if d <= 0 {
					d = 1e-12
				}
				Ad.SetSym(a, a, d*(1+lambda))
			}
			if !chol.Factorize(Ad) {
				lambda *= 10
				continue
			}
			if err := chol.SolveVecTo(step, g); err != nil {
				lambda *= 10
				continue
			}
			for a := 0; a < n; a++ {
				yTry[a] = y[a] + step.AtVec(a)
			}
			ct := o.residuals(o.resid, yTry)
			if ct < c {
				dc := c - ct
				copy(y, yTry)
				copy(r0, o.resid)
				c = ct
				lambda = math.Max(lambda/10, 1e-9)
				improved = true
				if dc < tol {
					small++
				} else {
					small = 0
				}
				break
			}
			lambda *= 10
			if lambda > 1e10 {
				break
			}
		}
		if o.stopped == errStop {
			return IterationLimit, nil
		}
		if o.stopped != nil {
			return Cancelled, nil
		}
		if !improved || small >= 2 {
			return Converged, nil
		}
	}
	if o.stopped == errStop {
		return IterationLimit, nil
	}
	return Cancelled, nil
}

// Optimize minimises χ² over the free parameters of specs, starting at start,
// and returns the best model found. Parameters not free keep start's values.
// A cancelled ctx returns the best point so far with Status Cancelled.
func Optimize(ctx context.Context, l *Likelihood, start lens.Params, specs Specs, set OptSettings) (*Solution, error) {
	if (specs.PiEN.Free || specs.PiEE.Free) && l.ev.Coords == nil {
		return nil, ErrParallax
	}
	sp, err := NewSpace(start, specs)
	if err != nil {
		return nil, err
	}
	o := newObjective(ctx, l, sp, start, set.maxEval(sp.Dim()))
	st, err := o.minimize(set.Method, set.tol())
	sol := &Solution{Free: sp.Free, Status: st, Evals: o.evals, Method: set.Method, Ref: l.ev.Ref}
	if math.IsInf(o.best, 1) {
		sol.Status = Failed
		sol.Params = start
		sol.Chi2 = math.MaxFloat64 // JSON cannot carry +Inf; Status says Failed
		if err == nil {
			err = fmt.Errorf("fit: no finite χ² found from %+v", start)
		}
		return sol, err
	}
	p := o.params(o.bestY)
	p.Alpha = WrapAlpha(p.Alpha)
	sol.Params = p
	sol.Chi2, _ = l.Chi2(&p)
	sol.Fits = append([]DatasetFit(nil), l.Fits()...)
	sol.Dof = l.N() - sp.Dim() - linearParams(l.ev)
	return sol, err
}

// normalEquations sets A = JᵀJ and g = −Jᵀr for the Gauss–Newton step of
// Levenberg–Marquardt, J the len(r)×n Jacobian stored row-major in jac.
func normalEquations(A *mat.SymDense, g *mat.VecDense, jac, r []float64, n int) {
	for a := 0; a < n; a++ {
		ga := 0.0
		for i := range r {
			ga += jac[i*n+a] * r[i]
		}
		g.SetVec(a, -ga)
		for b := a; b < n; b++ {
			s := 0.0
			for i := range r {
				s += jac[i*n+a] * jac[i*n+b]
			}
			A.SetSym(a, b, s)
		}
	}
}
