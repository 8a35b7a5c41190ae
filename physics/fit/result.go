// The result of a fit: parameters with standard errors, correlations,
// residuals, and the combinations the data do not determine.

package fit

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"

	"github.com/materials-lab/modegrid/physics"
)

// Result is a finished fit.
type Result struct {
	// Params are the free parameters, in the problem's order.
	Params []ParamResult
	// Ties are the tied parameters with their fitted values.
	Ties []TieResult
	// Correlation is the correlation matrix of Params, row-major
	// len(Params)²: from the covariance of the determined parameters; rows
	// and columns of parameters not determined (or held at a bound) are 0
	// but for the diagonal 1.
	Correlation []float64
	// ChiSquare is Σ ((measured − model)/σ)² at the fitted parameters.
	ChiSquare float64
	// Data is the number of data N; Rank the number of parameter
	// combinations they determine (the rank of J); DOF = N − Rank.
	Data, Rank, DOF int
	// ReducedChiSquare is ChiSquare/DOF (0 when DOF is 0).
	ReducedChiSquare float64
	// Residuals are per datum, in the problem's order of kinds
	// (frequencies, gamma_frequencies, sound_velocities,
	// elastic_constants, heat_capacities points).
	Residuals []Residual
	// Undetermined lists the groups of parameters the data do not
	// determine separately, with the combinations they do determine.
	Undetermined []Undetermined
	// Crystal is the fitted model (the starting one with the fitted and
	// tied values) and Model its compiled form.
	Crystal *physics.Crystal
	Model   *physics.Model
	// Iterations are the accepted Levenberg–Marquardt steps; Evaluations
	// the model evaluations in all.
	Iterations, Evaluations int
	// Converged says whether a convergence test ended the fit (not the
	// evaluation limit); Stop says which.
	Converged bool
	Stop      string
}

// ParamResult is one free parameter after the fit. Standard errors are
// the square roots of the diagonal of the covariance (JᵀWJ)⁻¹, W =
// diag(1/σ²), over the determined parameters: StdErr scaled by
// ReducedChiSquare (the σ taken as relative weights: the scatter of the
// data sets the scale), StdErrUnscaled as it stands (the σ trusted as
// absolute). Both are 0 when the parameter is not determined or held at a
// bound, and StdErr is 0 when DOF is 0.
type ParamResult struct {
	Path                   string
	Start, Value           float64 // in the model's force unit
	StdErr, StdErrUnscaled float64
	Determined             bool   // the data determine it (see Undetermined otherwise)
	AtBound                string // "lower" or "upper" when the fit ended on that bound, held there; "" otherwise
}

// TieResult is a tied parameter after the fit: Value = Ratio × the value
// of To.
type TieResult struct {
	Path, To     string
	Ratio, Value float64
	Start        float64 // its value in the starting model (replaced by Ratio × To's start)
}

// Residual is one datum against the fitted model.
type Residual struct {
	Field    string  // the datum's field path, e.g. "frequencies[3]"
	Measured float64 // as given (THz, km/s, GPa, or the heat capacity's basis)
	Sigma    float64
	Model    float64 // the fitted model's value
	// Branch is the model branch compared (1-based, ascending frequency
	// or speed; assigned by the fit when the datum had none); 0 for
	// elastic constants and heat capacities.
	Branch int
}

// Normalized is (Measured − Model)/Sigma.
func (r Residual) Normalized() float64 { return (r.Measured - r.Model) / r.Sigma }

// Undetermined is a group of parameters the data do not determine
// separately: χ² is flat (to rounding) along Flat, combinations of Params,
// while the combinations Determined are fixed by the data.
type Undetermined struct {
	Params     []string
	Determined []Combination
	Flat       []Combination
}

// Combination is, for a determined combination, Σ Coeffs[i]·Params[i] of
// an Undetermined group with its value and errors; for a flat one, the
// direction (Coeffs[i] per unit move of Params[i]) along which χ² does
// not change (Value and errors 0). The largest coefficient is +1.
type Combination struct {
	Coeffs                 []float64
	Value                  float64
	StdErr, StdErrUnscaled float64
}

// singularRel is the smallest singular value of the column-scaled J/σ,
// relative to its largest, of a determined combination: below it JᵀWJ has
// a condition number over 1e16, beyond the reach of double precision (its
// inverse is rounding), and the direction is reported undetermined.
const singularRel = 1e-8

// result analyses the final evaluation e.
func (ev *evaluator) result(e *evaluation, c *physics.Crystal, m *physics.Model, iter, evals int, converged bool, stop string) *Result {
	n := len(ev.params)
	res := &Result{ChiSquare: e.chi2, Data: len(ev.rows), Crystal: c, Model: m,
		Iterations: iter, Evaluations: evals, Converged: converged, Stop: stop}
	st := ev.newStep(e)
	held := make([]bool, n)
	for j, pr := range ev.params {
		switch {
		case e.x[j] <= pr.lo && pr.userLo:
			res.Params = append(res.Params, ParamResult{AtBound: "lower"})
			held[j] = true
		case e.x[j] >= pr.hi && pr.userHi:
			res.Params = append(res.Params, ParamResult{AtBound: "upper"})
			held[j] = true
		default:
			res.Params = append(res.Params, ParamResult{})
		}
		res.Params[j].Path, res.Params[j].Start, res.Params[j].Value = pr.name, pr.start, e.x[j]
	}
	cov, null, rank := covariance(st, held)
	res.Rank = rank
	res.DOF = res.Data - rank
	if res.DOF > 0 {
		res.ReducedChiSquare = e.chi2 / float64(res.DOF)
	}
	undetermined := involved(null, n)
	for j := range res.Params {
		if held[j] || undetermined[j] {
			continue
		}
		se := norm(cov[j])
		if math.IsInf(se, 0) || math.IsNaN(se) {
			// An error past the range of float64: the data do not
			// determine it in any useful sense.
			undetermined[j] = true
			continue
		}
		res.Params[j].Determined = true
		res.Params[j].StdErrUnscaled = se
		res.Params[j].StdErr = se * math.Sqrt(res.ReducedChiSquare)
	}
	res.Correlation = correlation(cov, res.Params)
	res.Undetermined = ev.groups(null, undetermined, cov, e.x, st.scale, res.ReducedChiSquare)
	for j, pr := range ev.params {
		for _, m := range pr.members[1:] {
			res.Ties = append(res.Ties, TieResult{Path: m.path.String(), To: pr.name, Ratio: m.factor,
				Value: m.factor * e.x[j], Start: m.path.Get(ev.startCrystal())})
		}
	}
	for i, r := range ev.rows {
		res.Residuals = append(res.Residuals, Residual{Field: r.field, Measured: r.y, Sigma: r.sigma, Model: e.value[i], Branch: e.branch[i]})
	}
	return res
}

// covariance returns a factor A of the unscaled covariance (JᵀWJ)⁺ over
// the parameters not held, cov = A Aᵀ, one row per parameter (nil for
// held ones): the rows are the parameters' vectors, so errors and
// correlations come from norms and angles without forming cov, whose
// elements (squares of the errors) may overflow where the errors do not.
// It also returns the flat directions in the scaled parameters (length n,
// orthonormal) and the rank.
func covariance(st *step, held []bool) ([][]float64, [][]float64, int) {
	n := len(st.scale)
	cov := make([][]float64, n)
	var free []int
	for j := 0; j < n; j++ {
		if !held[j] {
			free = append(free, j)
		}
	}
	rows := len(st.r)
	if len(free) == 0 {
		return cov, nil, 0
	}
	// Zero rows pad J̃ to at least as many rows as columns, so the thin
	// SVD has every right singular vector (the flat ones too).
	a := mat.NewDense(max(rows, len(free)), len(free), nil)
	for i := 0; i < rows; i++ {
		for c, j := range free {
			a.Set(i, c, st.jw[i*n+j]/st.scale[j])
		}
	}
	var svd mat.SVD
	if !svd.Factorize(a, mat.SVDThin) {
		return cov, nil, 0
	}
	sv := svd.Values(nil)
	var v mat.Dense
	svd.VTo(&v)
	big := 0.0
	for _, s := range sv {
		big = math.Max(big, s)
	}
	var keep []int
	var null [][]float64
	for k, s := range sv {
		if s > singularRel*big && s > 0 {
			keep = append(keep, k)
			continue
		}
		dir := make([]float64, n)
		for c, j := range free {
			dir[j] = v.At(c, k)
		}
		null = append(null, dir)
	}
	for c, j := range free {
		cov[j] = make([]float64, len(keep))
		for x, k := range keep {
			cov[j][x] = v.At(c, k) / sv[k] / st.scale[j]
		}
	}
	return cov, null, len(keep)
}

// norm is the Euclidean norm of x without overflow in the squares.
func norm(x []float64) float64 {
	big := 0.0
	for _, v := range x {
		big = math.Max(big, math.Abs(v))
	}
	if big == 0 || math.IsInf(big, 0) || math.IsNaN(big) {
		return big
	}
	var s float64
	for _, v := range x {
		s += (v / big) * (v / big)
	}
	return big * math.Sqrt(s)
}

// combine is Σ c_i rows[i] (rows of the covariance factor), nil rows
// skipped: the factor of a combination's variance.
func combineRows(rows [][]float64, c []float64) []float64 {
	var out []float64
	for i, r := range rows {
		if r == nil {
			continue
		}
		if out == nil {
			out = make([]float64, len(r))
		}
		for k, v := range r {
			out[k] += c[i] * v
		}
	}
	return out
}

// involvedTol is the smallest weight |component|² in the flat directions
// of a parameter reported as not determined (rounding leaves about ε on
// the others).
const involvedTol = 1e-6

// involved marks the parameters with weight in the flat directions.
func involved(null [][]float64, n int) []bool {
	out := make([]bool, n)
	for j := 0; j < n; j++ {
		var w float64
		for _, d := range null {
			w += d[j] * d[j]
		}
		out[j] = w > involvedTol
	}
	return out
}

// correlation is the covariance normalised by its diagonal, over the
// determined parameters (the cosine of the angle between their factor
// rows); 1 on the diagonal.
func correlation(cov [][]float64, ps []ParamResult) []float64 {
	n := len(ps)
	out := make([]float64, n*n)
	unit := make([][]float64, n)
	for i := 0; i < n; i++ {
		out[i*n+i] = 1
		if !ps[i].Determined {
			continue
		}
		l := norm(cov[i])
		unit[i] = make([]float64, len(cov[i]))
		for k, v := range cov[i] {
			unit[i][k] = v / l
		}
		for j := 0; j < i; j++ {
			if unit[j] == nil {
				continue
			}
			var c float64
			for k, v := range unit[i] {
				c += v * unit[j][k]
			}
			c = math.Max(-1, math.Min(1, c))
			out[i*n+j], out[j*n+i] = c, c
		}
	}
	return out
}

// groups splits the undetermined parameters into groups linked by the
// projector onto the flat directions (basis-independent, so two separate
// degeneracies come out separate), and gives each group's determined and
// flat combinations in the parameters' units.
func (ev *evaluator) groups(null [][]float64, undetermined []bool, cov [][]float64, x, scale []float64, redChi2 float64) []Undetermined {
	n := len(undetermined)
	proj := func(i, j int) float64 {
		var s float64
		for _, d := range null {
			s += d[i] * d[j]
		}
		return s
	}
	seen := make([]bool, n)
	var out []Undetermined
	for j := 0; j < n; j++ {
		if !undetermined[j] || seen[j] {
			continue
		}
		members := []int{j}
		seen[j] = true
		for q := 0; q < len(members); q++ {
			for k := 0; k < n; k++ {
				if undetermined[k] && !seen[k] && math.Abs(proj(members[q], k)) > involvedTol {
					seen[k] = true
					members = append(members, k)
				}
			}
		}
		sort.Ints(members)
		out = append(out, ev.group(members, proj, cov, x, scale, redChi2))
	}
	return out
}

// group describes one group: the eigenvectors of the projector restricted
// to it, eigenvalue ≈ 1 flat, ≈ 0 determined (scaled parameters, turned
// into coefficients of the parameters themselves).
func (ev *evaluator) group(members []int, proj func(i, j int) float64, cov [][]float64, x, scale []float64, redChi2 float64) Undetermined {
	m := len(members)
	u := Undetermined{}
	for _, j := range members {
		u.Params = append(u.Params, ev.params[j].name)
	}
	p := mat.NewSymDense(m, nil)
	for a := 0; a < m; a++ {
		for b := 0; b <= a; b++ {
			p.SetSym(a, b, proj(members[a], members[b]))
		}
	}
	var es mat.EigenSym
	if !es.Factorize(p, true) {
		return u
	}
	vals := es.Values(nil)
	var vecs mat.Dense
	es.VectorsTo(&vecs)
	for k, val := range vals {
		flat := val > 0.5
		coeffs := make([]float64, m)
		for a, j := range members {
			if flat {
				coeffs[a] = vecs.At(a, k) / scale[j] // a move of x̃ along d̃ moves x along d̃/s
			} else {
				coeffs[a] = vecs.At(a, k) * scale[j] // Σ c̃ x̃ = Σ (c̃ s) x
			}
		}
		normalize(coeffs)
		comb := Combination{Coeffs: coeffs}
		if flat {
			u.Flat = append(u.Flat, comb)
			continue
		}
		var v float64
		rows := make([][]float64, m)
		for a, ja := range members {
			v += coeffs[a] * x[ja]
			rows[a] = cov[ja]
		}
		se := norm(combineRows(rows, coeffs))
		if math.IsInf(se, 0) || math.IsNaN(se) {
			continue // an error beyond float64: not determined in any useful sense either
		}
		comb.Value, comb.StdErrUnscaled = v, se
		comb.StdErr = comb.StdErrUnscaled * math.Sqrt(redChi2)
		u.Determined = append(u.Determined, comb)
	}
	return u
}

// normalize scales c so that its largest element in magnitude is +1.
func normalize(c []float64) {
	big := 0
	for i := range c {
		if math.Abs(c[i]) > math.Abs(c[big]) {
			big = i
		}
	}
	if c[big] == 0 {
		return
	}
	s := 1 / c[big]
	for i := range c {
		c[i] *= s
	}
}

// startCrystal is the problem's starting crystal (before the ties).
func (ev *evaluator) startCrystal() *physics.Crystal { return ev.start }
