package main

// Writers of the three output formats. "table" is aligned for people;
// "csv" has fixed headers for programs (long format for modes and paths;
// frequency columns carry the --unit value as suffix); "json" is the
// protobuf JSON of the response with every field and a stable layout.

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"text/tabwriter"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// wideBranches is the most branches a table shows side by side; past it a
// table lists one row per branch.
const wideBranches = 12

// jsonOptions emit every field, zero values included (a temperature of
// 0 K, site 0, an empty list, false), so that a reader finds each key it
// expects instead of having to know protobuf's rule of omitting defaults.
var jsonOptions = protojson.MarshalOptions{EmitUnpopulated: true}

// writeJSON writes m as protobuf JSON with byte-stable layout: protojson
// varies its whitespace on purpose (so that nobody relies on it), so its
// output is re-indented by encoding/json, which drops that whitespace and
// writes two-space indentation. Values and field order are protojson's own
// (field order of the .proto, map keys sorted), so the bytes change only
// when a value does.
func writeJSON(w io.Writer, m proto.Message) error {
	b, err := jsonOptions.Marshal(m)
	if err != nil {
		return fmt.Errorf("encode JSON: %w", err)
	}
	var out bytes.Buffer
	if err := json.Indent(&out, b, "", "  "); err != nil {
		return fmt.Errorf("encode JSON: %w", err)
	}
	out.WriteByte('\n')
	_, err = w.Write(out.Bytes())
	return err
}

// num formats a number for CSV: the shortest decimal that reads back to the
// same float64.
func num(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }

// csvWriter writes records and remembers the first error.
type csvWriter struct {
	w   *csv.Writer
	err error
}

func newCSV(w io.Writer) *csvWriter { return &csvWriter{w: csv.NewWriter(w)} }

func (c *csvWriter) row(fields ...string) {
	if c.err == nil {
		c.err = c.w.Write(fields)
	}
}

func (c *csvWriter) flush() error {
	c.w.Flush()
	if c.err != nil {
		return c.err
	}
	return c.w.Error()
}

// table writes right-aligned columns.
type table struct {
	tw *tabwriter.Writer
}

func newTable(w io.Writer) *table {
	return &table{tw: tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)}
}

func (t *table) row(cells ...string) {
	fmt.Fprintln(t.tw, strings.Join(cells, "\t")+"\t")
}

func (t *table) flush() error { return t.tw.Flush() }

// f4 formats a number for tables with four decimals; values that would
// print as -0.0000 (numerical noise around zero) print as 0.0000.
func f4(x float64) string {
	if math.Abs(x) < 5e-5 {
		x = 0
	}
	return strconv.FormatFloat(x, 'f', 4, 64)
}

// siteColumns names one column per site: prefix+label, or
// prefix+label+"_"+index when several sites share the label.
func siteColumns(prefix string, labels []string, index []int) []string {
	count := map[string]int{}
	for _, l := range labels {
		count[l]++
	}
	out := make([]string, len(labels))
	for i, l := range labels {
		if count[l] > 1 {
			out[i] = fmt.Sprintf("%s%s_%d", prefix, l, index[i])
		} else {
			out[i] = prefix + l
		}
	}
	return out
}

// ---- check ----

// checkRow is one property of a check report: its CSV key, its table
// label and its value as printed.
type checkRow struct{ key, human, value string }

// writeCheck writes a check report as JSON, CSV (property,value; full
// precision) or a two-column table (rounded for reading).
func writeCheck(w io.Writer, format, name string, r *modegridv1.CheckModelResponse) error {
	if format == "json" {
		return writeJSON(w, r)
	}
	csv := format == "csv"
	rows := []checkRow{
		{"name", "model", name},
		{"valid", "valid", yesNo(r.GetValid())},
	}
	if r.GetValid() {
		rows = append(rows, checkValidRows(r, csv)...)
	}
	for _, v := range r.GetViolations() {
		rows = append(rows, checkRow{"violation", "violation", v.GetField() + ": " + v.GetDescription()})
	}
	if csv {
		c := newCSV(w)
		c.row("property", "value")
		for _, r := range rows {
			c.row(r.key, r.value)
		}
		return c.flush()
	}
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	for _, r := range rows {
		fmt.Fprintf(tw, "%s\t%s\n", r.human, r.value)
	}
	return tw.Flush()
}

// symmetryHint says when a looser symmetry tolerance finds more
// operations than the one used ("" when none does), naming the smallest
// such tolerance.
func symmetryHint(r *modegridv1.CheckModelResponse) string {
	n := len(r.GetSymmetry())
	for _, l := range r.GetSymmetryAtLooserTolerance() {
		if int(l.GetOperations()) > n {
			tol := strconv.FormatFloat(l.GetToleranceA(), 'g', 3, 64)
			return fmt.Sprintf("%d operations at %s Å, %d at %s Å: consider --sym-tol %s (and --symmetrize)",
				n, strconv.FormatFloat(r.GetSymmetryToleranceA(), 'g', 3, 64), l.GetOperations(), tol, tol)
		}
	}
	return ""
}

// yesNo spells a boolean of a check report.
func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}

// checkValidRows are the rows only a valid model has: its description,
// shells, sum rule, stability and the typical costs of requests. Tables
// round numbers for reading; CSV (csv true) keeps full precision.
func checkValidRows(r *modegridv1.CheckModelResponse, csv bool) []checkRow {
	real := func(x float64) string {
		if csv {
			return num(x)
		}
		return strconv.FormatFloat(x, 'g', 6, 64)
	}
	freq := func(x float64) string {
		if csv {
			return num(x)
		}
		return f4(x)
	}
	var labels []string
	for _, p := range r.GetStandardPoints() {
		labels = append(labels, displayLabel(p.GetLabel()))
	}
	rows := []checkRow{
		{"model_hash", "model hash", r.GetModelHash()},
		{"dimensions", "dimensions", fmt.Sprint(r.GetDimensions())},
		{"lattice_type", "lattice type", r.GetLatticeType()},
		{"standard_points", "built-in points", strings.Join(labels, " ")},
		{"sites", "sites", fmt.Sprint(r.GetSites())},
		{"polarizations", "polarizations", fmt.Sprint(r.GetPolarizations())},
		{"modes_per_cell", "modes per cell", fmt.Sprint(r.GetModesPerCell())},
		{"interactions", "interactions", fmt.Sprint(r.GetInteractions())},
	}
	for _, s := range r.GetShells() {
		rows = append(rows,
			checkRow{fmt.Sprintf("shell_%d_bonds", s.GetShell()), fmt.Sprintf("shells[%d] bonds", s.GetShell()), fmt.Sprint(s.GetBonds())},
			checkRow{fmt.Sprintf("shell_%d_distance_a", s.GetShell()), fmt.Sprintf("shells[%d] distance (Å)", s.GetShell()), real(s.GetDistanceA())},
		)
	}
	rows = append(rows,
		checkRow{"sum_rule_violation_ev_per_a2", "sum-rule violation (eV/Å²)", real(r.GetSumRuleViolationEvPerA2())},
	)
	rows = append(rows, foldRows(r.GetSupercellFold(), real)...)
	rows = append(rows, polarRows(r.GetPolar(), real)...)
	rows = append(rows,
		checkRow{"symmetry_operations", "symmetry operations", fmt.Sprint(len(r.GetSymmetry()))},
		checkRow{"symmetry_tolerance_a", "symmetry tolerance (Å)", strconv.FormatFloat(r.GetSymmetryToleranceA(), 'g', -1, 64)},
	)
	if h := symmetryHint(r); h != "" {
		rows = append(rows, checkRow{"symmetry_hint", "symmetry hint", h})
	}
	if r.GetSymmetrized() {
		rows = append(rows, checkRow{"symmetrized", "symmetrized", "yes (the figures are those of the symmetrised model)"})
	}
	rows = append(rows,
		checkRow{"stable", "stable (coarse grid)", yesNo(r.GetStable())},
		checkRow{"min_frequency_thz", "lowest frequency (THz)", freq(r.GetMinFrequencyThz())},
		checkRow{"max_frequency_thz", "highest frequency (THz)", freq(r.GetMaxFrequencyThz())},
	)
	for _, c := range r.GetTypicalCosts() {
		key := "cost " + c.GetRequest()
		val := fmt.Sprintf("%s, %s s", humanBytes(c.GetPeakBytes()), strconv.FormatFloat(c.GetSeconds(), 'g', 2, 64))
		if !c.GetAdmitted() {
			val += " (refused by this server)"
		}
		rows = append(rows, checkRow{strings.ReplaceAll(key, " ", "_"), key, val})
	}
	return rows
}

// foldRows report the fold of a supercell force-constant set (none when
// the model has no set): atoms mapped, tolerance, pairs that shared images
// and each violation before → after its correction; when it was
// symmetrised (--symmetrize), the operations and the symmetry violation.
func foldRows(f *modegridv1.SupercellFold, real func(float64) string) []checkRow {
	if f == nil {
		return nil
	}
	rows := []checkRow{
		{"fold_atoms_mapped", "supercell atoms mapped", fmt.Sprint(f.GetAtomsMapped())},
		{"fold_tolerance_a", "supercell tolerance (Å)", strconv.FormatFloat(f.GetToleranceA(), 'g', -1, 64)},
		{"fold_shared_image_pairs", "pairs sharing images", fmt.Sprint(f.GetSharedImagePairs())},
		{"fold_permutation_before_ev_per_a2", "permutation violation before (eV/Å²)", real(f.GetPermutationBeforeEvPerA2())},
		{"fold_permutation_after_ev_per_a2", "permutation violation after (eV/Å²)", real(f.GetPermutationAfterEvPerA2())},
		{"fold_sum_rule_before_ev_per_a2", "supercell sum-rule violation before (eV/Å²)", real(f.GetSumRuleBeforeEvPerA2())},
		{"fold_sum_rule_after_ev_per_a2", "supercell sum-rule violation after (eV/Å²)", real(f.GetSumRuleAfterEvPerA2())},
	}
	if f.GetOperations() > 0 {
		rows = append(rows,
			checkRow{"fold_operations", "supercell set averaged over operations", fmt.Sprint(f.GetOperations())},
			checkRow{"fold_invariance_before_ev_per_a2", "symmetry violation before (eV/Å²)", real(f.GetInvarianceBeforeEvPerA2())},
			checkRow{"fold_invariance_after_ev_per_a2", "symmetry violation after (eV/Å²)", real(f.GetInvarianceAfterEvPerA2())},
		)
	}
	return rows
}

// polarRows report a polar model's charges and dipole–dipole sum (none
// without Born charges).
func polarRows(p *modegridv1.PolarCheck, real func(float64) string) []checkRow {
	if p == nil {
		return nil
	}
	return []checkRow{
		{"charge_neutrality_violation_e", "charge-neutrality violation (e)", real(p.GetChargeNeutralityViolationE())},
		{"charge_neutrality_enforced", "charge neutrality enforced", yesNo(p.GetChargeNeutralityEnforced())},
		{"ewald_parameter_inv_a", "Ewald parameter (Å⁻¹)", real(p.GetEwaldParameterInvA())},
		{"ewald_real_terms", "Ewald real-space terms", fmt.Sprint(p.GetEwaldRealTerms())},
		{"ewald_reciprocal_vectors", "Ewald reciprocal vectors", fmt.Sprint(p.GetEwaldReciprocalVectors())},
	}
}

// ---- modes ----

func writeModes(w io.Writer, format string, r *modegridv1.ComputeModesResponse, x modesExtras) error {
	if x.any() && format != "json" {
		return writeModesExtras(w, format, r, x)
	}
	unit := r.GetUnit()
	switch format {
	case "json":
		return writeJSON(w, r)
	case "csv":
		c := newCSV(w)
		c.row("q1", "q2", "q3", "branch", "frequency_"+unitName(unit))
		for _, p := range r.GetPoints() {
			q := p.GetQ()
			for b, f := range p.GetFrequencies() {
				c.row(num(q.GetQ1()), num(q.GetQ2()), num(q.GetQ3()), strconv.Itoa(b+1), num(f))
			}
		}
		return c.flush()
	}
	t := newTable(w)
	branches := 0
	for _, p := range r.GetPoints() {
		branches = max(branches, len(p.GetFrequencies()))
	}
	if branches <= wideBranches {
		head := []string{"q1", "q2", "q3", "weight"}
		for b := range branches {
			head = append(head, fmt.Sprintf("ν%d (%s)", b+1, unitLabel(unit)))
		}
		t.row(head...)
		for _, p := range r.GetPoints() {
			q := p.GetQ()
			cells := []string{f4(q.GetQ1()), f4(q.GetQ2()), f4(q.GetQ3()), strconv.FormatFloat(p.GetWeight(), 'g', 6, 64)}
			for _, f := range p.GetFrequencies() {
				cells = append(cells, f4(f))
			}
			t.row(cells...)
		}
		return t.flush()
	}
	t.row("q1", "q2", "q3", "branch", fmt.Sprintf("ν (%s)", unitLabel(unit)))
	for _, p := range r.GetPoints() {
		q := p.GetQ()
		for b, f := range p.GetFrequencies() {
			t.row(f4(q.GetQ1()), f4(q.GetQ2()), f4(q.GetQ3()), strconv.Itoa(b+1), f4(f))
		}
	}
	return t.flush()
}

// ---- path ----

func writePath(w io.Writer, format string, r *modegridv1.ComputeDispersionResponse) error {
	unit := r.GetUnit()
	switch format {
	case "json":
		return writeJSON(w, r)
	case "csv":
		c := newCSV(w)
		c.row("distance", "label", "q1", "q2", "q3", "branch", "frequency_"+unitName(unit))
		for _, s := range r.GetSamples() {
			q := s.GetQ()
			for b, f := range s.GetFrequencies() {
				c.row(num(s.GetDistanceInvA()), s.GetLabel(), num(q.GetQ1()), num(q.GetQ2()), num(q.GetQ3()), strconv.Itoa(b+1), num(f))
			}
		}
		return c.flush()
	}
	t := newTable(w)
	branches := 0
	for _, s := range r.GetSamples() {
		branches = max(branches, len(s.GetFrequencies()))
	}
	wide := branches <= wideBranches
	head := []string{"distance (1/Å)", "label", "q1", "q2", "q3"}
	if wide {
		for b := range branches {
			head = append(head, fmt.Sprintf("ν%d (%s)", b+1, unitLabel(unit)))
		}
	} else {
		head = append(head, "branch", fmt.Sprintf("ν (%s)", unitLabel(unit)))
	}
	t.row(head...)
	for _, s := range r.GetSamples() {
		q := s.GetQ()
		lead := []string{f4(s.GetDistanceInvA()), displayLabel(s.GetLabel()), f4(q.GetQ1()), f4(q.GetQ2()), f4(q.GetQ3())}
		if wide {
			cells := lead
			for _, f := range s.GetFrequencies() {
				cells = append(cells, f4(f))
			}
			t.row(cells...)
			continue
		}
		for b, f := range s.GetFrequencies() {
			t.row(append(append([]string(nil), lead...), strconv.Itoa(b+1), f4(f))...)
		}
	}
	return t.flush()
}

// displayLabel writes the built-in G as Γ for people.
func displayLabel(l string) string {
	parts := strings.Split(l, "|")
	for i, p := range parts {
		if p == "G" {
			parts[i] = "Γ"
		}
	}
	return strings.Join(parts, "|")
}

// ---- dos ----

// dosSiteColumns returns the per-site projections of r and their column
// names.
func dosSiteColumns(r *modegridv1.ComputeDosResponse) ([]*modegridv1.ProjectedDos, []string) {
	sites := r.GetSites()
	labels := make([]string, len(sites))
	index := make([]int, len(sites))
	for i, s := range sites {
		labels[i], index[i] = s.GetLabel(), int(s.GetSite())
	}
	return sites, siteColumns("dos_", labels, index)
}

func writeDOS(w io.Writer, format string, r *modegridv1.ComputeDosResponse) error {
	if format == "json" {
		return writeJSON(w, r)
	}
	sites, cols := dosSiteColumns(r)
	value := func(p *modegridv1.ProjectedDos, i int) float64 {
		if i < len(p.GetDos()) {
			return p.GetDos()[i]
		}
		return 0
	}
	freqs := r.GetFrequencies()
	if format == "csv" {
		c := newCSV(w)
		c.row(append([]string{"frequency_" + unitName(r.GetUnit()), "dos", "integrated"}, cols...)...)
		for i, f := range freqs {
			rec := []string{num(f), num(at(r.GetDos(), i)), num(at(r.GetIntegrated(), i))}
			for _, s := range sites {
				rec = append(rec, num(value(s, i)))
			}
			c.row(rec...)
		}
		return c.flush()
	}
	t := newTable(w)
	u := unitLabel(r.GetUnit())
	head := []string{fmt.Sprintf("ν (%s)", u), fmt.Sprintf("g (1/%s)", u), "integrated"}
	for _, col := range cols {
		head = append(head, strings.TrimPrefix(col, "dos_"))
	}
	t.row(head...)
	g := func(x float64) string { return strconv.FormatFloat(x, 'f', 5, 64) }
	for i, f := range freqs {
		cells := []string{f4(f), g(at(r.GetDos(), i)), g(at(r.GetIntegrated(), i))}
		for _, s := range sites {
			cells = append(cells, g(value(s, i)))
		}
		t.row(cells...)
	}
	return t.flush()
}

func at(v []float64, i int) float64 {
	if i < len(v) {
		return v[i]
	}
	return 0
}

// ---- thermal ----

// thermalHeader is the CSV header of `thermal` on basis b.
func thermalHeader(b thermalBasis) []string {
	h := []string{"temperature_k"}
	h = append(h, b.csvColumns()...)
	return append(h, "debye_temperature_k", "debye_temperature_status")
}

// msdColumns names the mean-square-displacement columns of --msd.
func msdColumns(r *modegridv1.ComputeThermalResponse) (uiso, b []string) {
	if len(r.GetPoints()) == 0 {
		return nil, nil
	}
	ds := r.GetPoints()[0].GetDisplacements()
	labels := make([]string, len(ds))
	index := make([]int, len(ds))
	for i, d := range ds {
		labels[i], index[i] = d.GetLabel(), int(d.GetSite())
	}
	return siteColumns("u_iso_a2_", labels, index), siteColumns("b_a2_", labels, index)
}

func writeThermal(w io.Writer, format string, r *modegridv1.ComputeThermalResponse, b thermalBasis) error {
	if format == "json" {
		return writeJSON(w, r)
	}
	uiso, bcol := msdColumns(r)
	if format == "csv" {
		c := newCSV(w)
		head := thermalHeader(b)
		for i := range uiso {
			head = append(head, uiso[i], bcol[i])
		}
		c.row(head...)
		for _, p := range r.GetPoints() {
			cv, s, f, u := b.values(p)
			rec := []string{num(p.GetTemperatureK()), num(cv), num(s), num(f), num(u), thetaCSV(p), thetaStatusName(p.GetDebyeTemperatureStatus())}
			for i := range uiso {
				if d := displacement(p, i); d.GetDivergent() {
					rec = append(rec, "divergent", "divergent")
				} else {
					rec = append(rec, num(d.GetUIsoA2()), num(d.GetBA2()))
				}
			}
			c.row(rec...)
		}
		return c.flush()
	}
	t := newTable(w)
	head := []string{"T (K)", "Cv (" + b.entropyUnit() + ")", "S (" + b.entropyUnit() + ")", "F (" + b.energyUnit() + ")", "U (" + b.energyUnit() + ")", "θD (K)"}
	for i := range uiso {
		head = append(head, "Uiso "+strings.TrimPrefix(uiso[i], "u_iso_a2_")+" (Å²)")
	}
	t.row(head...)
	var notes thermalNotes
	for _, p := range r.GetPoints() {
		cv, s, f, u := b.values(p)
		cells := []string{strconv.FormatFloat(p.GetTemperatureK(), 'f', 2, 64), f4(cv), f4(s), f4(f), f4(u), thetaCell(p, 2)}
		notes.theta(p)
		for i := range uiso {
			d := displacement(p, i)
			if d.GetDivergent() {
				cells = append(cells, "divergent")
				// One line per reason: zero-point and thermal divergences grow differently.
				notes.add("Uiso divergent", p.GetTemperatureK(), d.GetDivergenceReason(), true)
				continue
			}
			cells = append(cells, strconv.FormatFloat(d.GetUIsoA2(), 'f', 6, 64))
		}
		t.row(cells...)
	}
	if err := t.flush(); err != nil {
		return err
	}
	if _, err := fmt.Fprintf(w, "zero-point energy: %s %s (included in F and U); elastic Debye temperature: %s\n",
		f4(b.zeroPoint(r)), b.energyUnit(), elasticTheta(r.GetDebyeTemperatureElasticK())); err != nil {
		return err
	}
	return notes.write(w)
}

// elasticTheta prints the elastic θ_D, "not defined" when the server sent 0.
func elasticTheta(k float64) string {
	if !(k > 0) {
		return "not defined"
	}
	return strconv.FormatFloat(k, 'f', 2, 64) + " K"
}

// thetaCell is the table cell of θ_D(T): the number when determined, the
// number marked as the T → 0 limit at T = 0, otherwise "n/d (why)".
func thetaCell(p *modegridv1.ThermalPoint, prec int) string {
	v := strconv.FormatFloat(p.GetDebyeTemperatureK(), 'f', prec, 64)
	switch s := p.GetDebyeTemperatureStatus(); s {
	case modegridv1.DebyeTemperatureStatus_DEBYE_TEMPERATURE_STATUS_DETERMINED:
		return v
	case modegridv1.DebyeTemperatureStatus_DEBYE_TEMPERATURE_STATUS_ELASTIC_LIMIT:
		return v + " (T→0 limit)"
	default:
		return "n/d (" + strings.ReplaceAll(thetaStatusName(s), "-", " ") + ")"
	}
}

// thetaCSV is the CSV value of θ_D(T): the number when the status gives
// it one, "n/d" otherwise (the status column says why).
func thetaCSV(p *modegridv1.ThermalPoint) string {
	switch p.GetDebyeTemperatureStatus() {
	case modegridv1.DebyeTemperatureStatus_DEBYE_TEMPERATURE_STATUS_DETERMINED,
		modegridv1.DebyeTemperatureStatus_DEBYE_TEMPERATURE_STATUS_ELASTIC_LIMIT:
		return num(p.GetDebyeTemperatureK())
	}
	return "n/d"
}

// thetaStatusName is the status in lower-case words joined by dashes
// ("grid-too-coarse"); "unknown" for a response without one.
func thetaStatusName(s modegridv1.DebyeTemperatureStatus) string {
	if s == modegridv1.DebyeTemperatureStatus_DEBYE_TEMPERATURE_STATUS_UNSPECIFIED {
		return "unknown"
	}
	name := strings.TrimPrefix(s.String(), "DEBYE_TEMPERATURE_STATUS_")
	return strings.ToLower(strings.ReplaceAll(name, "_", "-"))
}

// thermalNotes gathers, under the table, why values are not given: one
// line per kind with the temperatures and the first reason.
type thermalNotes struct {
	order []string
	temps map[string][]string
	why   map[string]string
}

func (n *thermalNotes) theta(p *modegridv1.ThermalPoint) {
	if r := p.GetDebyeTemperatureReason(); r != "" && p.GetDebyeTemperatureStatus() !=
		modegridv1.DebyeTemperatureStatus_DEBYE_TEMPERATURE_STATUS_ELASTIC_LIMIT {
		n.add("θD n/d ("+strings.ReplaceAll(thetaStatusName(p.GetDebyeTemperatureStatus()), "-", " ")+")", p.GetTemperatureK(), r, false)
	}
}

// add notes the reason at tempK; with byReason every distinct reason gets
// its own line, otherwise the first reason of the kind stands for all.
func (n *thermalNotes) add(kind string, tempK float64, reason string, byReason bool) {
	if byReason {
		kind += "\x00" + reason
	}
	if n.temps == nil {
		n.temps, n.why = map[string][]string{}, map[string]string{}
	}
	if _, ok := n.temps[kind]; !ok {
		n.order = append(n.order, kind)
		n.why[kind] = reason
	}
	ts := n.temps[kind]
	if s := strconv.FormatFloat(tempK, 'g', -1, 64); len(ts) == 0 || ts[len(ts)-1] != s {
		n.temps[kind] = append(ts, s)
	}
}

func (n *thermalNotes) write(w io.Writer) error {
	for _, k := range n.order {
		ts := n.temps[k]
		list := strings.Join(ts, ", ")
		if len(ts) > 6 {
			list = fmt.Sprintf("%s … %s (%d temperatures)", ts[0], ts[len(ts)-1], len(ts))
		}
		label, _, _ := strings.Cut(k, "\x00")
		if _, err := fmt.Fprintf(w, "%s at T = %s K: %s\n", label, list, n.why[k]); err != nil {
			return err
		}
	}
	return nil
}

func displacement(p *modegridv1.ThermalPoint, i int) *modegridv1.SiteDisplacement {
	if i < len(p.GetDisplacements()) {
		return p.GetDisplacements()[i]
	}
	return nil
}

// humanBytes prints a byte count with a binary unit, two significant
// digits past the point at most.
func humanBytes(b uint64) string {
	switch {
	case b >= 1<<30:
		return fmt.Sprintf("%.3g GiB", float64(b)/(1<<30))
	case b >= 1<<20:
		return fmt.Sprintf("%.3g MiB", float64(b)/(1<<20))
	case b >= 1<<10:
		return fmt.Sprintf("%.3g KiB", float64(b)/(1<<10))
	}
	return fmt.Sprintf("%d B", b)
}
