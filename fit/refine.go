package fit

import (
	"context"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"lensbook/lens"
)

// Solution is one fitted model: parameters, χ², the linear fluxes of each
// dataset and, after Refine, an approximate covariance of the free parameters.
type Solution struct {
	Label  string         `json:"label"` // e.g. "grid 1", "grid 1 wide partner"
	Params lens.Params    `json:"params"`
	Ref    lens.Reference `json:"ref"` // reference point of T0 and U0
	Chi2   float64        `json:"chi2"`
	Dof    int            `json:"dof"` // used points − free parameters − linear flux parameters
	Fits   []DatasetFit   `json:"fits"`
	Free   []Param        `json:"free"`
	// Cov is the covariance of the free coordinates of Free in the order given, in
	// the optimiser's coordinates: log10 of the value for log-prior parameters
	// (rho, s, q by default, see IsLog), the value otherwise. nil when not computed
	// or when the χ² Hessian approximation is singular.
	Cov    [][]float64 `json:"cov,omitempty"`
	IsLog  []bool      `json:"isLog,omitempty"` // per free parameter: Cov coordinate is log10
	Sigma  []float64   `json:"sigma,omitempty"` // 1σ of each free parameter in natural units (delta method)
	Status Status      `json:"status"`
	Method Method      `json:"method"`
	Evals  int         `json:"evals"` // χ² evaluations used
	Note   string      `json:"note,omitempty"`
	// TRef is the reference epoch t0,par of parallax and orbital motion the
	// fit used (full JD; 0 for a static model fitted before any other).
	TRef float64 `json:"tref,omitempty"`
}

// RefineSettings configures Refine. The zero value frees t0, u0, tE for a single
// lens and t0, u0, tE, s, q, α (and ρ when the start has ρ > 0) for a binary lens,
// plus πE,N, πE,E and ds/dt, dα/dt when the start has parallax or orbital
// motion, with the default optimiser, and computes the covariance.
type RefineSettings struct {
	// Specs chooses the free parameters, bounds and priors; the zero value means
	// the default set above.
	Specs Specs       `json:"specs"`
	Opt   OptSettings `json:"opt"`
	// NoCov skips the covariance (saves 2·n χ² evaluations).
	NoCov bool `json:"noCov"`
}

// DefaultSpecs returns the default free parameters for a model like p.
func DefaultSpecs(p lens.Params) Specs {
	free := []Param{T0, U0, TE}
	if p.Q > 0 {
		free = append(free, S, Q, Alpha)
	}
	if p.Rho > 0 {
		free = append(free, Rho)
	}
	if HasParallax(&p) {
		free = append(free, PiEN, PiEE)
	}
	if HasOrbit(&p) {
		free = append(free, DsDt, DAlphaDt)
	}
	return FreeSpecs(free...)
}

// Refine optimises start with the chosen free parameters and computes the
// approximate covariance of the free parameters at the optimum.
//
// The covariance is the inverse of the Gauss–Newton approximation of half the
// χ² Hessian, C = (JᵀJ)⁻¹ with J the Jacobian of the normalised residuals
// (central differences) — the standard approximation for least-squares fits
// (e.g. Press et al. 2007, Numerical Recipes 3rd ed., §15.5), valid when the
// residuals are small compared with the curvature terms they drop.
func Refine(ctx context.Context, l *Likelihood, start lens.Params, set RefineSettings) (*Solution, error) {
	specs := set.Specs
	if len(specs.Free()) == 0 {
		specs = DefaultSpecs(start)
	}
	l.fixTRef(&start, &specs)
	sol, err := Optimize(ctx, l, start, specs, set.Opt)
	if sol != nil {
		sol.TRef = l.TRef()
	}
	if err != nil || sol.Status == Cancelled || set.NoCov {
		return sol, err
	}
	sp, err := NewSpace(sol.Params, specs)
	if err != nil {
		return sol, err
	}
	cov, err := Covariance(l, sp, sol.Params)
	sol.IsLog = make([]bool, sp.Dim())
	for i := range sol.IsLog {
		sol.IsLog[i] = sp.IsLog(i)
	}
	if err != nil {
		sol.Note = err.Error()
		return sol, nil
	}
	n := sp.Dim()
	sol.Cov = make([][]float64, n)
	sol.Sigma = make([]float64, n)
	for i := 0; i < n; i++ {
		sol.Cov[i] = make([]float64, n)
		for j := 0; j < n; j++ {
			sol.Cov[i][j] = cov.At(i, j)
		}
		s := math.Sqrt(math.Max(cov.At(i, i), 0))
		if sp.IsLog(i) {
			s *= Get(&sol.Params, sp.Free[i]) * math.Ln10
		}
		sol.Sigma[i] = s
	}
	return sol, nil
}

// Covariance returns (JᵀJ)⁻¹ at p in the coordinates of sp, with J the
// central-difference Jacobian of the normalised residuals. It costs 2·Dim
// likelihood evaluations. An error means the matrix is singular (a parameter
// the data do not constrain).
func Covariance(l *Likelihood, sp *Space, p lens.Params) (*mat.SymDense, error) {
	o := newObjective(context.Background(), l, sp, p, math.MaxInt)
	n, N := sp.Dim(), l.N()
	// central differences: step in scaled units.
	h := o.fdStep * 10
	y := make([]float64, n)
	rp := make([]float64, N)
	rm := make([]float64, N)
	J := mat.NewDense(N, n, nil)
	for j := 0; j < n; j++ {
		hj := h
		y[j] = hj
		cp := o.residuals(rp, y)
		y[j] = -hj
		cm := o.residuals(rm, y)
		y[j] = 0
		if math.IsInf(cp, 1) || math.IsInf(cm, 1) {
			return nil, fmt.Errorf("fit: covariance: parameter %v is at its bound", sp.Free[j])
		}
		for i := 0; i < N; i++ {
			// derivative with respect to the coordinate x_j = x0_j + h_j·y_j
			J.Set(i, j, (rp[i]-rm[i])/(2*hj*o.h[j]))
		}
	}
	var jtj mat.SymDense
	jtj.SymOuterK(1, J.T())
	var chol mat.Cholesky
	if !chol.Factorize(&jtj) {
		return nil, fmt.Errorf("fit: covariance: χ² curvature matrix is singular (some free parameter is unconstrained)")
	}
	var cov mat.SymDense
	if err := chol.InverseTo(&cov); err != nil {
		return nil, fmt.Errorf("fit: covariance: %w", err)
	}
	// restore the likelihood's fits to the optimum.
	_, _ = l.Chi2(&p)
	return &cov, nil
}

// linearParams counts the fitted flux parameters of the event's datasets.
func linearParams(ev *Event) int {
	n := 0
	for k := range ev.Datasets {
		if ev.BlendOf(k).Mode == BlendFixed {
			n++
		} else {
			n += 2
		}
	}
	return n
}

// Chi2Gradient returns ∂χ²/∂x at p in the coordinates of sp, computed as 2Jᵀr
// from the central-difference Jacobian of the normalised residuals (the
// gradient Levenberg–Marquardt uses implicitly). For checks and diagnostics.
func Chi2Gradient(l *Likelihood, sp *Space, p lens.Params) []float64 {
	o := newObjective(context.Background(), l, sp, p, math.MaxInt)
	n, N := sp.Dim(), l.N()
	r0 := make([]float64, N)
	rp := make([]float64, N)
	rm := make([]float64, N)
	y := make([]float64, n)
	o.residuals(r0, y)
	g := make([]float64, n)
	h := o.fdStep
	for j := 0; j < n; j++ {
		y[j] = h
		o.residuals(rp, y)
		y[j] = -h
		o.residuals(rm, y)
		y[j] = 0
		s := 0.0
		for i := 0; i < N; i++ {
			s += r0[i] * (rp[i] - rm[i]) / (2 * h * o.h[j])
		}
		g[j] = 2 * s
	}
	_, _ = l.Chi2(&p)
	return g
}
