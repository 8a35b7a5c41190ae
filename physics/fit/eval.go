// The evaluator: the model at a parameter vector, its value for every
// datum and the derivatives of those values with respect to every free
// parameter.

package fit

import (
	"context"
	"errors"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
)

// row is one datum as the least-squares problem sees it.
type row struct {
	field string  // the datum's field path, e.g. "frequencies[3]"
	y     float64 // measured value
	sigma float64 // its standard uncertainty
}

// evaluator computes the model's values and derivatives at any parameter
// vector. The zero model and the unit-parameter models (one per free
// parameter) are compiled once: for the linear kinds of params.go,
// ∂D/∂x_j is the dynamical matrix of the model whose force constants are
// all zero but the members of parameter j, which hold their factors, and
// D(x) = D₀ + Σ x_j D_j (linear.go); the same holds for the long-wave
// forms.
type evaluator struct {
	start  *physics.Crystal // the problem's starting crystal
	base   *physics.Crystal // the starting crystal, ties applied
	opt    physics.Options
	params []param
	rows   []row
	lin    linear

	freqs   []qGroup
	vels    []velDatum
	elastic []elasticDatum
	heat    []heatGroup
}

// evaluation is the model at one parameter vector.
type evaluation struct {
	x      []float64
	value  []float64 // per row, the model's value
	jac    []float64 // rows × params, ∂value/∂x, row-major
	branch []int     // per row, the branch compared (1-based; 0: none)
	chi2   float64
}

// errInvalidStep marks parameter values at which the model cannot be
// evaluated (no long-wave limit, a value that is not finite).
var errInvalidStep = errors.New("fit: the model cannot be evaluated at these parameters")

// newEvaluator checks the starting model (its violations are reported
// under "model"), compiles the zero model and the unit-parameter models,
// and sets up the data against the model's size.
func newEvaluator(ctx context.Context, p *Problem, params []param) (*evaluator, error) {
	ev := &evaluator{start: p.Crystal, base: crystalAt(p.Crystal, params, startVector(params)), opt: p.Options, params: params}
	// The starting model's own values are checked here; its structure
	// (shells found, sizes) by the zero model's compile, which has it.
	if err := physics.Validate(ev.base, p.Options.Limits); err != nil {
		return nil, startError(err)
	}
	var err error
	if ev.lin.zero, err = ev.compile(ctx, crystalAt(ev.base, params, make([]float64, len(params)))); err != nil {
		if ctx.Err() != nil {
			return nil, err
		}
		return nil, startError(err)
	}
	if err := ev.compileUnits(ctx, p.Crystal, params); err != nil {
		return nil, err
	}
	m := ev.lin.zero
	var vs physics.Violations
	ev.freqs = ev.setupFrequencies(p)
	ev.checkFrequencies(&vs, ev.freqs, m.ModeCount(), m.Polarizations())
	if m.Polar() {
		refusePolarLongWave(p, &vs)
	} else {
		ev.setupLongWave(p, m, &vs)
	}
	ev.setupHeat(p, m)
	if vs.Len() > 0 {
		return nil, vs.Err()
	}
	if len(ev.vels)+len(ev.elastic) > 0 {
		ev.lin.zeroForms = m.LongWaveForms()
		for _, u := range ev.lin.units {
			ev.lin.unitForms = append(ev.lin.unitForms, u.LongWaveForms())
		}
	}
	ev.cacheMatrices()
	return ev, nil
}

// compileUnits compiles the unit-parameter model of every force-constant
// parameter (from start without its charges: the dipole–dipole term does
// not depend on force constants, and sits in the zero model) and the
// charge models of the charge parameters (charges.go).
func (ev *evaluator) compileUnits(ctx context.Context, start *physics.Crystal, params []param) error {
	zero := withoutCharges(zeroForces(start))
	for j, pr := range params {
		if pr.members[0].path.isCharge() {
			ev.lin.units = append(ev.lin.units, nil)
			continue
		}
		one := make([]float64, len(params))
		one[j] = 1
		u, err := ev.compile(ctx, crystalAt(zero, params[j:j+1], one[j:j+1]))
		if err != nil {
			return fmt.Errorf("fit: the unit model of %s: %w", params[j].name, err)
		}
		ev.lin.units = append(ev.lin.units, u)
	}
	var err error
	ev.lin.charges, err = ev.newChargeBasis(ctx, start, crystalAt(ev.base, params, make([]float64, len(params))), params)
	return err
}

// refusePolarLongWave refuses sound velocities and elastic constants of a
// polar model: the fit's long-wave forms hold the short-range force
// constants only, and the dipole–dipole term's long-wave limit (its
// analytic part, and the macroscopic field of the internal relaxation)
// is not in them.
func refusePolarLongWave(p *Problem, vs *physics.Violations) {
	if len(p.SoundVelocities) > 0 {
		vs.Add("sound_velocities", "sound velocities cannot be fitted for a polar model (Born charges and ε∞): the fit's long-wave limit holds the short-range force constants only; give dispersion points at small q along the direction instead")
	}
	if len(p.ElasticConstants) > 0 {
		vs.Add("elastic_constants", "elastic constants cannot be fitted for a polar model (Born charges and ε∞): the fit's long-wave limit holds the short-range force constants only; give dispersion points at small q instead")
	}
}

// compile compiles c with the fit's options, returning ctx.Err() when ctx
// ended first.
func (ev *evaluator) compile(ctx context.Context, c *physics.Crystal) (*physics.Model, error) {
	m, err := physics.Compile(ctx, c, ev.opt)
	if err != nil && ctx.Err() != nil {
		return nil, ctx.Err()
	}
	return m, err
}

// eval computes the model at x: values, derivatives and χ². Parameters at
// which the model cannot be evaluated give errInvalidStep.
func (ev *evaluator) eval(ctx context.Context, x []float64) (*evaluation, error) {
	n := len(ev.rows)
	e := &evaluation{x: append([]float64(nil), x...), value: make([]float64, n), jac: make([]float64, n*len(x)), branch: make([]int, n)}
	if err := ev.evalFrequencies(ctx, e); err != nil {
		return nil, err
	}
	if err := ev.evalLongWave(ctx, e); err != nil {
		return nil, err
	}
	if err := ev.evalHeat(ctx, e); err != nil {
		return nil, err
	}
	for i, r := range ev.rows {
		d := (r.y - e.value[i]) / r.sigma
		e.chi2 += d * d
	}
	if math.IsNaN(e.chi2) || math.IsInf(e.chi2, 0) {
		return nil, fmt.Errorf("%w: χ² is not finite", errInvalidStep)
	}
	return e, nil
}

// model compiles the model at x: the fitted model of a result.
func (ev *evaluator) model(ctx context.Context, x []float64) (*physics.Crystal, *physics.Model, error) {
	c := crystalAt(ev.base, ev.params, x)
	m, err := ev.compile(ctx, c)
	return c, m, err
}

// addRow appends a row and returns its index.
func (ev *evaluator) addRow(field string, y, sigma float64) int {
	ev.rows = append(ev.rows, row{field: field, y: y, sigma: sigma})
	return len(ev.rows) - 1
}

// residual returns the weighted residual vector r = (y − f)/σ of e.
func (ev *evaluator) residual(e *evaluation) []float64 {
	r := make([]float64, len(ev.rows))
	for i, rw := range ev.rows {
		r[i] = (rw.y - e.value[i]) / rw.sigma
	}
	return r
}

// weightedJacobian returns J/σ (rows × params) of e.
func (ev *evaluator) weightedJacobian(e *evaluation) []float64 {
	np := len(ev.params)
	out := make([]float64, len(e.jac))
	for i, rw := range ev.rows {
		for j := 0; j < np; j++ {
			out[i*np+j] = e.jac[i*np+j] / rw.sigma
		}
	}
	return out
}
