// Weighted least squares by Levenberg–Marquardt.

package fit

import (
	"context"
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/materials-lab/modegrid/physics"
)

// Convergence thresholds of the Levenberg–Marquardt loop (common practice:
// K. Madsen, H. B. Nielsen & O. Tingleff, Methods for Non-Linear Least
// Squares Problems, 2nd ed., 2004, §3.2).
const (
	stepTol   = 1e-12 // relative step in the scaled parameters
	chi2Tol   = 1e-14 // relative decrease of χ² (actual and predicted)
	chi2Exact = 1e-26 // χ² per datum below which the data are fitted to rounding
	maxDamp   = 1e16  // damping beyond which no step can decrease χ²
)

// Fit fits the problem's free parameters to its data by weighted least
// squares (Levenberg–Marquardt with analytic derivatives; doc.go is the
// manual) and returns the fitted parameters with their uncertainties.
// A bad problem is a *physics.ValidationError listing every violation
// (field paths of the fit request); ctx ends the fit with ctx.Err().
func Fit(ctx context.Context, p *Problem) (*Result, error) {
	var vs physics.Violations
	p.validate(&vs)
	if vs.Len() > 0 {
		return nil, vs.Err()
	}
	params := p.params(&vs)
	ev, err := newEvaluator(ctx, p, params)
	if err != nil {
		return nil, err
	}
	cur, err := ev.eval(ctx, startVector(params))
	if err != nil {
		return nil, startError(err)
	}
	lm := &marquardt{ev: ev, p: p, cur: cur, evals: 1}
	lm.report()
	if err := lm.run(ctx); err != nil {
		return nil, err
	}
	c, m, err := ev.model(ctx, lm.cur.x)
	if err != nil {
		return nil, err
	}
	return ev.result(lm.cur, c, m, lm.iter, lm.evals, lm.converged, lm.stop), nil
}

func startVector(params []param) []float64 {
	x := make([]float64, len(params))
	for j, pr := range params {
		x[j] = pr.start
	}
	return x
}

// startError turns a failure of the starting model into violations of
// the request: the model itself (compile violations under "model"), or
// its long-wave limit.
func startError(err error) error {
	var ve *physics.ValidationError
	if errors.As(err, &ve) {
		var vs physics.Violations
		vs.AddErr("model", "model", err)
		return vs.Err()
	}
	if errors.Is(err, errInvalidStep) {
		var vs physics.Violations
		vs.Add("model", "the starting model cannot be fitted: %v", errors.Unwrap(err))
		return vs.Err()
	}
	return err
}

// marquardt is the state of one Levenberg–Marquardt run.
type marquardt struct {
	ev        *evaluator
	p         *Problem
	cur       *evaluation
	mu, nu    float64 // damping and its growth factor (Nielsen's update)
	iter      int
	evals     int
	converged bool
	stop      string
}

func (lm *marquardt) report() {
	if lm.p.Progress != nil {
		lm.p.Progress(Progress{Iteration: lm.iter, Evaluations: lm.evals, ChiSquare: lm.cur.chi2, Lambda: lm.mu})
	}
}

// run iterates until convergence, the evaluation limit or ctx's end.
func (lm *marquardt) run(ctx context.Context) error {
	lm.nu = 2
	maxEval := lm.p.maxEvaluations()
	for {
		if err := ctx.Err(); err != nil {
			return err
		}
		if lm.cur.chi2 <= chi2Exact*float64(len(lm.ev.rows)) {
			lm.converged, lm.stop = true, "χ² is zero to rounding: the data are fitted exactly"
			return nil
		}
		if lm.evals >= maxEval {
			lm.stop = fmt.Sprintf("evaluation limit reached (%d): not converged", maxEval)
			return nil
		}
		st := lm.ev.newStep(lm.cur)
		if lm.iter == 0 {
			lm.mu = 1e-3 // τ·max diag of the scaled normal matrix, which is 1 (Madsen et al. §3.2)
		}
		if st.gradSmall() {
			lm.converged, lm.stop = true, "the gradient of χ² vanishes to rounding"
			return nil
		}
		done, err := lm.iterate(ctx, st, maxEval)
		if err != nil || done {
			return err
		}
	}
}

// iterate tries damped steps from the current point until one decreases
// χ² (then the iteration counts) or the damping grows past maxDamp. done
// reports that the run is over.
func (lm *marquardt) iterate(ctx context.Context, st *step, maxEval int) (done bool, err error) {
	for {
		dx := st.solve(lm.mu)
		x := lm.ev.clamp(lm.cur.x, dx)
		moved := 0.0
		for j := range x {
			moved = math.Max(moved, math.Abs((x[j]-lm.cur.x[j])*st.scale[j]))
		}
		if moved <= stepTol*(st.xnorm+stepTol) {
			lm.converged, lm.stop = true, "the step is below 1e-12 of the parameters (scaled): converged"
			return true, nil
		}
		pred := st.predicted(lm.cur.x, x)
		trial, err := lm.ev.eval(ctx, x)
		lm.evals++
		if err != nil && !errors.Is(err, errInvalidStep) {
			return true, err
		}
		if err == nil && trial.chi2 < lm.cur.chi2 {
			actual := lm.cur.chi2 - trial.chi2
			rho := actual / math.Max(pred, 1e-300)
			lm.mu *= math.Max(1.0/3, 1-math.Pow(2*rho-1, 3))
			lm.nu = 2
			lm.cur = trial
			lm.iter++
			lm.report()
			if actual <= chi2Tol*trial.chi2 && pred <= chi2Tol*trial.chi2 {
				lm.converged, lm.stop = true, "χ² changes by less than 1e-14 relative: converged"
				return true, nil
			}
			return false, nil
		}
		lm.mu *= lm.nu
		lm.nu *= 2
		lm.report()
		if lm.mu > maxDamp {
			lm.converged, lm.stop = true, "no step decreases χ²: at the minimum to rounding"
			return true, nil
		}
		if lm.evals >= maxEval {
			lm.stop = fmt.Sprintf("evaluation limit reached (%d): not converged", maxEval)
			return true, nil
		}
	}
}

// clamp returns x + dx projected into the parameters' bounds.
func (ev *evaluator) clamp(x, dx []float64) []float64 {
	out := make([]float64, len(x))
	for j, pr := range ev.params {
		out[j] = math.Min(pr.hi, math.Max(pr.lo, x[j]+dx[j]))
	}
	return out
}

// step is the linearised problem at one point: the weighted residuals r,
// the Jacobian J/σ scaled by its column norms (Marquardt's scaling, so the
// damping acts alike on every parameter whatever its unit), and its SVD,
// over the parameters not held at a bound.
type step struct {
	r      []float64
	jw     []float64 // rows × n, J/σ
	scale  []float64 // column norms (1 for a zero column)
	active []int     // parameters moved by this step
	u, v   *mat.Dense
	sv     []float64
	grad   []float64 // (J̃ᵀ r) over the active parameters
	xnorm  float64   // |x̃| = |scale·x|
	rnorm  float64
}

// newStep linearises the problem at e. A parameter at a bound whose
// descent direction leaves the box is held for this step.
func (ev *evaluator) newStep(e *evaluation) *step {
	n, rows := len(ev.params), len(ev.rows)
	st := &step{r: ev.residual(e), jw: ev.weightedJacobian(e), scale: make([]float64, n)}
	for j := 0; j < n; j++ {
		var s float64
		for i := 0; i < rows; i++ {
			s += st.jw[i*n+j] * st.jw[i*n+j]
		}
		st.scale[j] = math.Sqrt(s)
		if st.scale[j] == 0 {
			st.scale[j] = 1
		}
		st.xnorm += sq(e.x[j] * st.scale[j])
	}
	st.xnorm = math.Sqrt(st.xnorm)
	for _, x := range st.r {
		st.rnorm += x * x
	}
	st.rnorm = math.Sqrt(st.rnorm)
	for j, pr := range ev.params {
		var g float64
		for i := 0; i < rows; i++ {
			g += st.jw[i*n+j] * st.r[i]
		}
		// χ² falls along +g: hold a parameter whose fall leaves the box.
		if (e.x[j] <= pr.lo && g < 0) || (e.x[j] >= pr.hi && g > 0) {
			continue
		}
		st.active = append(st.active, j)
		st.grad = append(st.grad, g/st.scale[j])
	}
	na := len(st.active)
	if na == 0 {
		return st
	}
	a := mat.NewDense(rows, na, nil)
	for i := 0; i < rows; i++ {
		for c, j := range st.active {
			a.Set(i, c, st.jw[i*n+j]/st.scale[j])
		}
	}
	var svd mat.SVD
	if !svd.Factorize(a, mat.SVDThin) {
		return st
	}
	st.sv = svd.Values(nil)
	st.u, st.v = &mat.Dense{}, &mat.Dense{}
	svd.UTo(st.u)
	svd.VTo(st.v)
	return st
}

// gradSmall reports a vanishing gradient of χ² in the scaled parameters:
// |J̃ᵀr|∞ ≤ 1e-14 |r| (every column of J̃ has norm 1).
func (st *step) gradSmall() bool {
	g := 0.0
	for _, x := range st.grad {
		g = math.Max(g, math.Abs(x))
	}
	return st.sv == nil || g <= 1e-14*st.rnorm
}

// solve returns the damped step (J̃ᵀJ̃ + μI) δ̃ = J̃ᵀr in the parameters'
// units (0 for held parameters), from the SVD: δ̃ = V diag(s/(s² + μ)) Uᵀr.
func (st *step) solve(mu float64) []float64 {
	dx := make([]float64, len(st.scale))
	if st.sv == nil {
		return dx
	}
	rows := len(st.r)
	for k, s := range st.sv {
		var ur float64
		for i := 0; i < rows; i++ {
			ur += st.u.At(i, k) * st.r[i]
		}
		f := s / (s*s + mu) * ur
		for c, j := range st.active {
			dx[j] += st.v.At(c, k) * f / st.scale[j]
		}
	}
	return dx
}

// predicted is the decrease of χ² the linear model predicts for the move
// from x to y: |r|² − |r − J(y − x)|².
func (st *step) predicted(x, y []float64) float64 {
	n := len(x)
	var s float64
	for i, ri := range st.r {
		var jd float64
		for j := 0; j < n; j++ {
			jd += st.jw[i*n+j] * (y[j] - x[j])
		}
		s += ri*ri - (ri-jd)*(ri-jd)
	}
	return s
}
