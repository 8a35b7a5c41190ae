package main

// Output of `fit`: the parameter table (table, csv or json), the
// residuals, and notes on what the data do not determine.

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// fitView is a finished fit as the outputs show it.
type fitView struct {
	name    string
	res     *modegridv1.FitResult
	req     *modegridv1.FitRequest
	sources map[string]datumSource // by the datum's field path
	unit    modegridv1.FrequencyUnit
}

// datumKind is the kind part of a residual's field path.
func datumKind(field string) string {
	k, _, _ := strings.Cut(field, "[")
	return k
}

// fitIndex is the first index of a field path ("frequencies[3]" → 3,
// "heat_capacities[1].points[2]" → 1) and, for heat capacities, the second.
func fitIndex(field string) (int, int) {
	var a, b int
	if strings.HasPrefix(field, "heat_capacities") {
		fmt.Sscanf(field, "heat_capacities[%d].points[%d]", &a, &b)
		return a, b
	}
	fmt.Sscanf(field[strings.Index(field, "[")+1:], "%d", &a)
	return a, 0
}

// residualUnit returns the factor from the API's unit of a residual's
// values to the shown one, and that unit's label.
func (v fitView) residualUnit(field string) (float64, string) {
	switch datumKind(field) {
	case "frequencies", "gamma_frequencies":
		return unitPerTHz(v.unit), unitLabel(v.unit)
	case "sound_velocities":
		return 1, "km/s"
	case "elastic_constants":
		return 1, "GPa"
	}
	i, _ := fitIndex(field)
	switch v.req.GetHeatCapacities()[i].GetBasis() {
	case modegridv1.HeatCapacityBasis_HEAT_CAPACITY_BASIS_PER_MOL_CELLS:
		return 1, basisCells.entropyUnit()
	case modegridv1.HeatCapacityBasis_HEAT_CAPACITY_BASIS_PER_KG:
		return 1, basisKg.entropyUnit()
	}
	return 1, basisAtoms.entropyUnit()
}

// describeDatum says what a datum is: its q, Γ, its direction, its Voigt
// pair or its temperature.
func (v fitView) describeDatum(field string) string {
	i, j := fitIndex(field)
	switch datumKind(field) {
	case "frequencies":
		q := v.req.GetFrequencies()[i].GetQ()
		return fmt.Sprintf("q = (%s, %s, %s)", short(q.GetQ1()), short(q.GetQ2()), short(q.GetQ3()))
	case "gamma_frequencies":
		return "Γ"
	case "sound_velocities":
		d := v.req.GetSoundVelocities()[i].GetDirection()
		return fmt.Sprintf("v along [%s %s %s]", short(d.GetX()), short(d.GetY()), short(d.GetZ()))
	case "elastic_constants":
		return fmt.Sprintf("C%d", v.req.GetElasticConstants()[i].GetIj())
	}
	return fmt.Sprintf("Cv at %s K", short(v.req.GetHeatCapacities()[i].GetPoints()[j].GetTemperatureK()))
}

// short prints a number in its shortest form, at most 6 significant digits.
func short(x float64) string { return strconv.FormatFloat(x, 'g', 6, 64) }

// source is "file:line" of a datum ("" when unknown).
func (v fitView) source(field string) string {
	if s, ok := v.sources[field]; ok {
		return fmt.Sprintf("%s:%d", s.file, s.line)
	}
	return ""
}

// writeFit writes the result as format.
func writeFit(w io.Writer, format string, v fitView) error {
	switch format {
	case "json":
		return writeJSON(w, v.res)
	case "csv":
		return writeFitCSV(w, v)
	}
	return writeFitTable(w, v)
}

// writeFitCSV writes the parameters, free and tied, one per row.
func writeFitCSV(w io.Writer, v fitView) error {
	c := newCSV(w)
	c.row("path", "start", "value", "std_error", "std_error_unscaled", "determined", "at_bound", "tied_to", "ratio")
	for _, p := range v.res.GetParameters() {
		se, seu := "", ""
		if p.GetDetermined() {
			se, seu = num(p.GetStdError()), num(p.GetStdErrorUnscaled())
		}
		c.row(p.GetPath(), num(p.GetStart()), num(p.GetValue()), se, seu, strconv.FormatBool(p.GetDetermined()), p.GetAtBound(), "", "")
	}
	for _, t := range v.res.GetTies() {
		c.row(t.GetPath(), num(t.GetStart()), num(t.GetValue()), "", "", "false", "", t.GetTo(), num(t.GetRatio()))
	}
	return c.flush()
}

// writeFitResiduals writes one row per datum.
func writeFitResiduals(w io.Writer, v fitView) error {
	c := newCSV(w)
	c.row("source", "datum", "what", "branch", "measured", "sigma", "model", "residual", "residual_over_sigma", "unit")
	for _, r := range v.res.GetResiduals() {
		f, u := v.residualUnit(r.GetDatum())
		c.row(v.source(r.GetDatum()), r.GetDatum(), v.describeDatum(r.GetDatum()), branchCell(r.GetBranch()),
			num(f*r.GetMeasured()), num(f*r.GetSigma()), num(f*r.GetModel()), num(f*(r.GetMeasured()-r.GetModel())), num(r.GetNormalized()), u)
	}
	return c.flush()
}

func branchCell(b uint32) string {
	if b == 0 {
		return ""
	}
	return strconv.Itoa(int(b))
}

// errCell is a standard error as a table shows it.
func errCell(p *modegridv1.FittedParameter, x float64) string {
	switch {
	case p.GetAtBound() != "":
		return "at " + p.GetAtBound() + " bound"
	case !p.GetDetermined():
		return "undetermined"
	}
	return g5(x)
}

// g5 prints a value with 5 significant digits (no exponent for ordinary
// sizes), -0 as 0.
func g5(x float64) string {
	if x == 0 {
		x = 0
	}
	return strconv.FormatFloat(x, 'g', 5, 64)
}

// writeFitTable writes the summary, the parameters, ties, undetermined
// combinations, the correlation matrix and the residuals.
func writeFitTable(w io.Writer, v fitView) error {
	r := v.res
	status := fmt.Sprintf("converged after %d steps (%d evaluations): %s", r.GetIterations(), r.GetEvaluations(), r.GetStopReason())
	if !r.GetConverged() {
		status = fmt.Sprintf("NOT converged after %d steps (%d evaluations): %s", r.GetIterations(), r.GetEvaluations(), r.GetStopReason())
	}
	n := len(r.GetParameters())
	fmt.Fprintf(w, "fit of %s: %d data, %d free parameter%s, %s\n", v.name, r.GetData(), n, plural(n), status)
	fmt.Fprintf(w, "χ² = %s for %d degrees of freedom", g5(r.GetChiSquare()), r.GetDegreesOfFreedom())
	if r.GetDegreesOfFreedom() > 0 {
		fmt.Fprintf(w, ", χ²/dof = %s", g5(r.GetReducedChiSquare()))
	}
	fmt.Fprintf(w, "\n\n")
	t := newTable(w)
	t.row("parameter", "start", "fitted", "±", "± unscaled")
	for _, p := range r.GetParameters() {
		t.row(p.GetPath(), g5(p.GetStart()), g5(p.GetValue()), errCell(p, p.GetStdError()), errCell(p, p.GetStdErrorUnscaled()))
	}
	if err := t.flush(); err != nil {
		return err
	}
	for _, x := range r.GetTies() {
		fmt.Fprintf(w, "tied: %s = %s × %s = %s (start %s)\n", x.GetPath(), g5(x.GetRatio()), x.GetTo(), g5(x.GetValue()), g5(x.GetStart()))
	}
	fmt.Fprintf(w, "(force unit of the model; ± is the standard error from (JᵀWJ)⁻¹ scaled by χ²/dof, ± unscaled takes the σ as absolute)\n")
	writeUndetermined(w, r)
	if err := writeCorrelation(w, r); err != nil {
		return err
	}
	return writeFitResidualTable(w, v)
}

// writeUndetermined explains each group of parameters the data do not
// determine separately.
func writeUndetermined(w io.Writer, r *modegridv1.FitResult) {
	for _, g := range r.GetUndetermined() {
		fmt.Fprintf(w, "\nnot separately determined: %s\n", strings.Join(g.GetPaths(), ", "))
		for _, c := range g.GetDetermined() {
			fmt.Fprintf(w, "  determined: %s = %s ± %s (± %s unscaled)\n", combination(g.GetPaths(), c), g5(c.GetValue()), g5(c.GetStdError()), g5(c.GetStdErrorUnscaled()))
		}
		for _, c := range g.GetFlat() {
			fmt.Fprintf(w, "  χ² does not change along: %s\n", combination(g.GetPaths(), c))
		}
	}
}

// combination prints Σ c_i·path_i, small coefficients dropped.
func combination(paths []string, c *modegridv1.ParameterCombination) string {
	var b strings.Builder
	for i, x := range c.GetCoefficients() {
		if math.Abs(x) < 1e-6 {
			continue
		}
		sign := "+"
		if x < 0 {
			sign = "−"
		}
		switch {
		case b.Len() == 0 && x < 0:
			b.WriteString("−")
		case b.Len() > 0:
			b.WriteString(" " + sign + " ")
		}
		if a := math.Abs(x); math.Abs(a-1) > 1e-9 {
			b.WriteString(g5(a) + "·")
		}
		b.WriteString(paths[i])
	}
	return b.String()
}

// writeCorrelation writes the correlation matrix of the parameters.
func writeCorrelation(w io.Writer, r *modegridv1.FitResult) error {
	ps := r.GetParameters()
	n := len(ps)
	if n < 2 || len(r.GetCorrelation()) != n*n {
		return nil
	}
	fmt.Fprintf(w, "\ncorrelation\n")
	t := newTable(w)
	head := []string{""}
	for i := range ps {
		head = append(head, fmt.Sprintf("[%d]", i+1))
	}
	t.row(head...)
	for i, p := range ps {
		cells := []string{fmt.Sprintf("[%d] %s", i+1, p.GetPath())}
		for j := range ps {
			cell := strconv.FormatFloat(r.GetCorrelation()[i*n+j], 'f', 3, 64)
			if i != j && (!p.GetDetermined() || !ps[j].GetDetermined()) {
				cell = "–"
			}
			cells = append(cells, cell)
		}
		t.row(cells...)
	}
	return t.flush()
}

// writeFitResidualTable writes one row per datum.
func writeFitResidualTable(w io.Writer, v fitView) error {
	fmt.Fprintf(w, "\nresiduals\n")
	t := newTable(w)
	t.row("source", "datum", "branch", "measured", "σ", "model", "(measured − model)/σ", "unit")
	var zz float64
	for _, r := range v.res.GetResiduals() {
		f, u := v.residualUnit(r.GetDatum())
		t.row(v.source(r.GetDatum()), v.describeDatum(r.GetDatum()), branchCell(r.GetBranch()),
			f4(f*r.GetMeasured()), f4(f*r.GetSigma()), f4(f*r.GetModel()), f4(r.GetNormalized()), u)
		zz = math.Max(zz, math.Abs(r.GetNormalized()))
	}
	if err := t.flush(); err != nil {
		return err
	}
	_, err := fmt.Fprintf(w, "largest |residual|/σ: %s\n", f4(zz))
	return err
}
