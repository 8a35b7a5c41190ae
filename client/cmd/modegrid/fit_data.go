package main

// Data files of `fit` (--data FILE.csv, repeatable). Comma-separated, '#'
// lines and blank lines ignored, a header row naming the columns; the kind
// of a file follows from its header (any column order; the columns in
// brackets are optional, an empty cell of them means "not given"):
//
//	dispersion:        q1,q2,q3,frequency_U,sigma_U[,branch][,polarization]
//	Γ frequencies:     frequency_U,sigma_U[,branch]
//	sound velocities:  direction_x,direction_y,direction_z,velocity_km_s,sigma_km_s[,branch][,polarization]
//	elastic constants: ij,elastic_constant_gpa,sigma_gpa
//	heat capacity:     temperature_k,heat_capacity_j_per_B_k,sigma_heat_capacity_j_per_B_k
//
// U is a frequency unit as the outputs name their columns (thz, mev,
// cm-1); B the basis as `thermal` names its columns (mol_atoms, mol_cells,
// kg). q is fractional reciprocal; the direction Cartesian; branch is
// 1-based in ascending frequency (speed) at that q (direction);
// polarization is longitudinal or transverse (L, T); ij is a Voigt pair
// 11…66. Every sigma is the standard uncertainty, > 0, in the unit of its
// value.

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// datumSource is where a datum of the request came from.
type datumSource struct {
	file string
	line int
}

// fitData collects the data of every --data file into a request, and
// where each datum came from (by the request's field path of the datum).
type fitData struct {
	req     *modegridv1.FitRequest
	sources map[string]datumSource
	grid    *modegridv1.MonkhorstPackGrid // of heat-capacity series
	units   map[string]bool               // frequency units of the files (thz, mev, cm-1)
}

// columns is a header: column name → index.
type columns map[string]int

func (c columns) has(names ...string) bool {
	for _, n := range names {
		if _, ok := c[n]; !ok {
			return false
		}
	}
	return true
}

// fitKind is one data file kind: its required and optional columns and
// how a row adds to the request.
type fitKind struct {
	name     string
	required []string
	optional []string
	add      func(d *fitData, r fitRow) error
}

// fitRow is one row being read: its file, line, cells and header.
type fitRow struct {
	file string
	line int
	rec  []string
	cols columns
}

// num parses the cell of column name as a finite number.
func (r fitRow) num(name string) (float64, error) {
	i := r.cols[name]
	s := strings.TrimSpace(r.rec[i])
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, &csvError{file: r.file, line: r.line, column: i + 1, msg: fmt.Sprintf("%s: %q is not a finite number", name, s)}
	}
	return v, nil
}

// empty reports an optional column absent or its cell empty.
func (r fitRow) empty(name string) bool {
	i, ok := r.cols[name]
	return !ok || strings.TrimSpace(r.rec[i]) == ""
}

// branch parses the optional branch column (0: not given).
func (r fitRow) branch() (uint32, error) {
	if r.empty("branch") {
		return 0, nil
	}
	b, err := r.num("branch")
	if err != nil {
		return 0, err
	}
	if b != math.Trunc(b) || b < 1 || b > 1<<20 {
		return 0, &csvError{file: r.file, line: r.line, column: r.cols["branch"] + 1, msg: fmt.Sprintf("branch must be a whole number ≥ 1, got %v", b)}
	}
	return uint32(b), nil
}

// polarization parses the optional polarization column.
func (r fitRow) polarization() (modegridv1.Polarization, error) {
	if r.empty("polarization") {
		return modegridv1.Polarization_POLARIZATION_UNSPECIFIED, nil
	}
	switch s := strings.ToLower(strings.TrimSpace(r.rec[r.cols["polarization"]])); s {
	case "l", "longitudinal":
		return modegridv1.Polarization_POLARIZATION_LONGITUDINAL, nil
	case "t", "transverse":
		return modegridv1.Polarization_POLARIZATION_TRANSVERSE, nil
	default:
		return 0, &csvError{file: r.file, line: r.line, column: r.cols["polarization"] + 1, msg: fmt.Sprintf("polarization must be longitudinal, transverse, L, T or empty, got %q", s)}
	}
}

// nums parses several columns.
func (r fitRow) nums(names ...string) ([]float64, error) {
	out := make([]float64, len(names))
	var errs []error
	for i, n := range names {
		v, err := r.num(n)
		out[i] = v
		errs = append(errs, err)
	}
	return out, errors.Join(errs...)
}

// source records where the datum at field came from.
func (d *fitData) source(field string, r fitRow) {
	d.sources[field] = datumSource{file: r.file, line: r.line}
}

// frequencyKinds are the dispersion and Γ kinds for frequency unit u
// (its CSV suffix) of perTHz per THz.
func frequencyKinds(u string, perTHz float64) []fitKind {
	f, s := "frequency_"+u, "sigma_"+u
	return []fitKind{
		{name: "dispersion", required: []string{"q1", "q2", "q3", f, s}, optional: []string{"branch", "polarization"},
			add: func(d *fitData, r fitRow) error {
				v, err := r.nums("q1", "q2", "q3", f, s)
				if err != nil {
					return err
				}
				b, err1 := r.branch()
				p, err2 := r.polarization()
				if err := errors.Join(err1, err2); err != nil {
					return err
				}
				d.source(fmt.Sprintf("frequencies[%d]", len(d.req.Frequencies)), r)
				d.req.Frequencies = append(d.req.Frequencies, &modegridv1.FrequencyDatum{Q: &modegridv1.QPoint{Q1: v[0], Q2: v[1], Q3: v[2]},
					FrequencyThz: v[3] / perTHz, SigmaThz: v[4] / perTHz, Branch: b, Polarization: p})
				return nil
			}},
		{name: "Γ frequencies", required: []string{f, s}, optional: []string{"branch"},
			add: func(d *fitData, r fitRow) error {
				v, err := r.nums(f, s)
				if err != nil {
					return err
				}
				b, err := r.branch()
				if err != nil {
					return err
				}
				d.source(fmt.Sprintf("gamma_frequencies[%d]", len(d.req.GammaFrequencies)), r)
				d.req.GammaFrequencies = append(d.req.GammaFrequencies, &modegridv1.GammaFrequencyDatum{FrequencyThz: v[0] / perTHz, SigmaThz: v[1] / perTHz, Branch: b})
				return nil
			}},
	}
}

// otherKinds are the velocity, elastic-constant and heat-capacity kinds.
func otherKinds() []fitKind {
	kinds := []fitKind{
		{name: "sound velocities", required: []string{"direction_x", "direction_y", "direction_z", "velocity_km_s", "sigma_km_s"}, optional: []string{"branch", "polarization"},
			add: func(d *fitData, r fitRow) error {
				v, err := r.nums("direction_x", "direction_y", "direction_z", "velocity_km_s", "sigma_km_s")
				if err != nil {
					return err
				}
				b, err1 := r.branch()
				p, err2 := r.polarization()
				if err := errors.Join(err1, err2); err != nil {
					return err
				}
				d.source(fmt.Sprintf("sound_velocities[%d]", len(d.req.SoundVelocities)), r)
				d.req.SoundVelocities = append(d.req.SoundVelocities, &modegridv1.SoundVelocityDatum{Direction: &modegridv1.Vec3{X: v[0], Y: v[1], Z: v[2]},
					KmS: v[3], SigmaKmS: v[4], Branch: b, Polarization: p})
				return nil
			}},
		{name: "elastic constants", required: []string{"ij", "elastic_constant_gpa", "sigma_gpa"},
			add: func(d *fitData, r fitRow) error {
				v, err := r.nums("ij", "elastic_constant_gpa", "sigma_gpa")
				if err != nil {
					return err
				}
				if v[0] != math.Trunc(v[0]) || v[0] < 11 || v[0] > 66 {
					return &csvError{file: r.file, line: r.line, column: r.cols["ij"] + 1, msg: fmt.Sprintf("ij must be a Voigt pair 11…66, got %v", v[0])}
				}
				d.source(fmt.Sprintf("elastic_constants[%d]", len(d.req.ElasticConstants)), r)
				d.req.ElasticConstants = append(d.req.ElasticConstants, &modegridv1.ElasticConstantDatum{Ij: uint32(v[0]), Gpa: v[1], SigmaGpa: v[2]})
				return nil
			}},
	}
	for _, b := range []thermalBasis{basisAtoms, basisCells, basisKg} {
		cv := b.csvColumns()[0]
		basis := heatBasisProto(b)
		kinds = append(kinds, fitKind{name: "heat capacities", required: []string{"temperature_k", cv, "sigma_" + cv},
			add: func(d *fitData, r fitRow) error {
				v, err := r.nums("temperature_k", cv, "sigma_"+cv)
				if err != nil {
					return err
				}
				set := d.req.HeatCapacities[len(d.req.HeatCapacities)-1]
				if set.Basis == modegridv1.HeatCapacityBasis_HEAT_CAPACITY_BASIS_UNSPECIFIED {
					set.Basis = basis
				}
				d.source(fmt.Sprintf("heat_capacities[%d].points[%d]", len(d.req.HeatCapacities)-1, len(set.Points)), r)
				set.Points = append(set.Points, &modegridv1.HeatCapacityPoint{TemperatureK: v[0], Value: v[1], Sigma: v[2]})
				return nil
			}})
	}
	return kinds
}

// heatBasisProto is the API's basis of b.
func heatBasisProto(b thermalBasis) modegridv1.HeatCapacityBasis {
	switch b {
	case basisCells:
		return modegridv1.HeatCapacityBasis_HEAT_CAPACITY_BASIS_PER_MOL_CELLS
	case basisKg:
		return modegridv1.HeatCapacityBasis_HEAT_CAPACITY_BASIS_PER_KG
	}
	return modegridv1.HeatCapacityBasis_HEAT_CAPACITY_BASIS_PER_MOL_ATOMS
}

// allFitKinds are the data file kinds, the more specific headers first
// (a dispersion header holds a Γ one).
func allFitKinds() []fitKind {
	var out []fitKind
	for _, u := range []string{"thz", "mev", "cm-1"} {
		out = append(out, frequencyKinds(u, unitPerTHz(units[u]))[0])
	}
	for _, u := range []string{"thz", "mev", "cm-1"} {
		out = append(out, frequencyKinds(u, unitPerTHz(units[u]))[1])
	}
	return append(out, otherKinds()...)
}

// fitHeaders lists the accepted headers, for error messages.
const fitHeaders = "q1,q2,q3,frequency_U,sigma_U[,branch][,polarization] (dispersion); frequency_U,sigma_U[,branch] (Γ); " +
	"direction_x,direction_y,direction_z,velocity_km_s,sigma_km_s[,branch][,polarization] (sound velocities); " +
	"ij,elastic_constant_gpa,sigma_gpa (elastic constants); temperature_k,heat_capacity_j_per_B_k,sigma_heat_capacity_j_per_B_k (heat capacity); " +
	"U one of thz, mev, cm-1; B one of mol_atoms, mol_cells, kg"

// kindOf chooses the kind of a header: the first kind whose required
// columns are all present and every other column optional for it.
func kindOf(file string, header []string) (fitKind, columns, error) {
	cols := columns{}
	for i, h := range header {
		if _, dup := cols[h]; dup {
			return fitKind{}, nil, &csvError{file: file, line: 1, column: i + 1, msg: fmt.Sprintf("column %q appears twice", h)}
		}
		cols[h] = i
	}
	for _, k := range allFitKinds() {
		if !cols.has(k.required...) {
			continue
		}
		for i, h := range header {
			if !slices.Contains(k.required, h) && !slices.Contains(k.optional, h) {
				return fitKind{}, nil, &csvError{file: file, line: 1, column: i + 1,
					msg: fmt.Sprintf("column %q does not belong in a file of %s (columns %s, optional %s)", h, k.name, strings.Join(k.required, ","), strings.Join(k.optional, ","))}
			}
		}
		return k, cols, nil
	}
	return fitKind{}, nil, &csvError{file: file, line: 1, msg: fmt.Sprintf("header %q names no data kind; want one of: %s", strings.Join(header, ","), fitHeaders)}
}

// read adds the data of one file.
func (d *fitData) read(file string) error {
	header, rows, lines, err := readCSV("--data", file)
	if err != nil {
		return err
	}
	k, cols, err := kindOf(file, header)
	if err != nil {
		return err
	}
	for _, u := range []string{"thz", "mev", "cm-1"} {
		if cols.has("frequency_" + u) {
			d.units[u] = true
		}
	}
	if k.name == "heat capacities" {
		d.req.HeatCapacities = append(d.req.HeatCapacities, &modegridv1.HeatCapacityData{Grid: d.grid})
	}
	var errs []error
	for i, rec := range rows {
		r := fitRow{file: file, line: lines[i], rec: rec, cols: cols}
		if len(rec) != len(header) {
			errs = append(errs, &csvError{file: file, line: lines[i], msg: fmt.Sprintf("%d columns; the header has %d", len(rec), len(header))})
			continue
		}
		errs = append(errs, k.add(d, r))
	}
	return errors.Join(errs...)
}
