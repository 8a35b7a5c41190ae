package main

// Measured data beside the model (--measured FILE on thermal and path): the
// CSV files, the model values at the measured points, and the residuals.
//
// Both files are comma-separated, with a header row naming the columns (in
// this order; the header states the units), '#' lines and blank lines
// ignored, every value a finite number:
//
//	thermal:  T_K,Cv_J_per_molatom_K[,sigma]
//	      or  T_K,Cv_J_per_molcell_K[,sigma]
//	      or  T_K,Cv_J_per_kg_K[,sigma]
//	path:     q1,q2,q3,freq_UNIT[,sigma][,branch]
//	      or  distance_invA,freq_UNIT[,sigma][,branch]
//
// Heat capacity is at constant volume, J/K per mole of atoms ("molatom"),
// per mole of unit cells ("molcell") or per kilogram; it is converted to the
// --basis of the output (sites per cell and cell mass from the server's
// answer). UNIT is THz,
// meV or cm-1; the values are converted to the --unit of the output. q is in
// fractional reciprocal coordinates and must lie on the path; distance is
// the cumulative distance along the path in 1/Å (2π included), as printed
// by `modegrid path`. sigma is the standard uncertainty, > 0, in the unit of
// the value before it. branch (1-based, in ascending frequency at that q)
// says which mode was measured; without it the nearest model frequency is
// taken.

import (
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"

	"github.com/materials-lab/modegrid/physics"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// measuredRow is one row of a measured-data file.
type measuredRow struct {
	line   int        // in the file, 1-based
	x      float64    // T (K), or path distance (1/Å)
	q      [3]float64 // path form with q columns
	hasQ   bool
	y      float64 // Cv (J/K per the file's basis) or frequency (output unit)
	sigma  float64 // 0: not given
	branch int     // 1-based; 0: nearest
}

// csvError is a problem at a line and column of a measured-data file.
type csvError struct {
	file         string
	line, column int // 1-based; column 0: the whole line
	msg          string
}

func (e *csvError) Error() string {
	if e.column > 0 {
		return fmt.Sprintf("%s:%d: column %d: %s", e.file, e.line, e.column, e.msg)
	}
	return fmt.Sprintf("%s:%d: %s", e.file, e.line, e.msg)
}

// readMeasuredCSV reads the header and rows of file, skipping '#' and blank
// lines, and returns the header and the rows with their line numbers.
func readMeasuredCSV(file string) ([]string, [][]string, []int, error) {
	return readCSV("--measured", file)
}

// readCSV is readMeasuredCSV for the file of flag.
func readCSV(flag, file string) ([]string, [][]string, []int, error) {
	f, err := os.Open(file)
	if err != nil {
		return nil, nil, nil, usagef("%s: %v", flag, err)
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.Comment = '#'
	r.FieldsPerRecord = -1
	r.TrimLeadingSpace = true
	var header []string
	var rows [][]string
	var lines []int
	for {
		rec, err := r.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			var pe *csv.ParseError
			if errors.As(err, &pe) {
				return nil, nil, nil, &csvError{file: file, line: pe.Line, column: pe.Column, msg: pe.Err.Error()}
			}
			return nil, nil, nil, fmt.Errorf("%s %s: %w", flag, file, err)
		}
		line, _ := r.FieldPos(0)
		if header == nil {
			header = rec
			for i := range header {
				header[i] = strings.TrimSpace(header[i])
			}
			continue
		}
		rows, lines = append(rows, rec), append(lines, line)
	}
	if header == nil {
		return nil, nil, nil, &csvError{file: file, line: 1, msg: "empty file: a header row is required"}
	}
	if len(rows) == 0 {
		return nil, nil, nil, &csvError{file: file, line: 2, msg: "no data rows after the header"}
	}
	return header, rows, lines, nil
}

// cell parses column col (0-based) of a row as a finite number.
func cell(file string, line int, rec []string, col int, name string) (float64, error) {
	s := strings.TrimSpace(rec[col])
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, &csvError{file: file, line: line, column: col + 1, msg: fmt.Sprintf("%s: %q is not a finite number", name, s)}
	}
	return v, nil
}

// readThermalMeasured reads a thermal file and returns its rows, Cv as
// given, and the basis its header declares.
func readThermalMeasured(file string) ([]measuredRow, thermalBasis, error) {
	header, rows, lines, err := readMeasuredCSV(file)
	if err != nil {
		return nil, 0, err
	}
	bases := []thermalBasis{basisAtoms, basisCells, basisKg}
	names := make([]string, len(bases))
	for i, b := range bases {
		names[i] = b.measuredColumn()
	}
	want := "T_K,Cv_J_per_<basis>_K[,sigma], <basis> one of " + strings.Join([]string{"molatom", "molcell", "kg"}, ", ")
	if len(header) < 2 || len(header) > 3 || header[0] != "T_K" || len(header) == 3 && header[2] != "sigma" {
		return nil, 0, &csvError{file: file, line: 1, msg: fmt.Sprintf("header %q; want %s", strings.Join(header, ","), want)}
	}
	bi := slices.Index(names, header[1])
	if bi < 0 {
		return nil, 0, &csvError{file: file, line: 1, column: 2, msg: fmt.Sprintf("%q; want %s", header[1], strings.Join(names, ", "))}
	}
	var errs []error
	out := make([]measuredRow, 0, len(rows))
	for i, rec := range rows {
		m, err := parseRow(file, lines[i], rec, header, func(m *measuredRow, v []float64) error {
			if v[0] < 0 {
				return &csvError{file: file, line: lines[i], column: 1, msg: fmt.Sprintf("T_K must be ≥ 0, got %v", v[0])}
			}
			m.x, m.y = v[0], v[1]
			if len(v) == 3 {
				m.sigma = v[2]
			}
			return nil
		})
		if err != nil {
			errs = append(errs, err)
			continue
		}
		out = append(out, m)
	}
	return out, bases[bi], errors.Join(errs...)
}

// convertRows turns the Cv (and σ) of thermal rows from basis from to
// basis to, for a cell of sites sites and cellMassAmu amu.
func convertRows(rows []measuredRow, from, to thermalBasis, sites int, cellMassAmu float64) []measuredRow {
	out := make([]measuredRow, len(rows))
	for i, m := range rows {
		m.y, m.sigma = to.convert(m.y, from, sites, cellMassAmu), to.convert(m.sigma, from, sites, cellMassAmu)
		out[i] = m
	}
	return out
}

// parseRow checks the column count and sigma of a row, parses its numbers
// and hands them to set.
func parseRow(file string, line int, rec, header []string, set func(*measuredRow, []float64) error) (measuredRow, error) {
	m := measuredRow{line: line}
	if len(rec) != len(header) {
		return m, &csvError{file: file, line: line, msg: fmt.Sprintf("%d columns; the header has %d", len(rec), len(header))}
	}
	v := make([]float64, len(rec))
	for c := range rec {
		x, err := cell(file, line, rec, c, header[c])
		if err != nil {
			return m, err
		}
		if header[c] == "sigma" && !(x > 0) {
			return m, &csvError{file: file, line: line, column: c + 1, msg: fmt.Sprintf("sigma must be > 0, got %v", x)}
		}
		v[c] = x
	}
	return m, set(&m, v)
}

// freqPerTHz is the value of 1 THz in a measured-file unit (CODATA 2018
// constants of physics/units.go).
var freqPerTHz = map[string]float64{
	"THz":  1,
	"meV":  physics.THzToEV * 1e3,
	"cm-1": 1e12 / (physics.SpeedOfLightMPerS * 100),
}

// readPathMeasured reads a path file; outPerTHz is the output unit's value
// of 1 THz.
func readPathMeasured(file string, outPerTHz float64) ([]measuredRow, error) {
	header, rows, lines, err := readMeasuredCSV(file)
	if err != nil {
		return nil, err
	}
	want := "q1,q2,q3,freq_UNIT[,sigma][,branch] or distance_invA,freq_UNIT[,sigma][,branch], UNIT one of THz, meV, cm-1"
	lead := 1
	if len(header) >= 3 && strings.Join(header[:3], ",") == "q1,q2,q3" {
		lead = 3
	} else if len(header) < 1 || header[0] != "distance_invA" {
		return nil, &csvError{file: file, line: 1, msg: fmt.Sprintf("header %q; want %s", strings.Join(header, ","), want)}
	}
	rest := header[lead:]
	if len(rest) == 0 || !strings.HasPrefix(rest[0], "freq_") || freqPerTHz[strings.TrimPrefix(rest[0], "freq_")] == 0 {
		return nil, &csvError{file: file, line: 1, column: lead + 1, msg: fmt.Sprintf("want freq_THz, freq_meV or freq_cm-1; got %q", strings.Join(rest[:min(1, len(rest))], ""))}
	}
	conv := outPerTHz / freqPerTHz[strings.TrimPrefix(rest[0], "freq_")]
	sigmaCol, branchCol := -1, -1
	for i, h := range rest[1:] {
		c := lead + 1 + i
		switch {
		case h == "sigma" && sigmaCol < 0 && branchCol < 0:
			sigmaCol = c
		case h == "branch" && branchCol < 0:
			branchCol = c
		default:
			return nil, &csvError{file: file, line: 1, column: c + 1, msg: fmt.Sprintf("unexpected column %q; want %s", h, want)}
		}
	}
	var errs []error
	out := make([]measuredRow, 0, len(rows))
	for i, rec := range rows {
		m, err := parseRow(file, lines[i], rec, header, func(m *measuredRow, v []float64) error {
			if lead == 3 {
				m.q, m.hasQ = [3]float64{v[0], v[1], v[2]}, true
			} else {
				m.x = v[0]
			}
			m.y = v[lead] * conv
			if sigmaCol >= 0 {
				m.sigma = v[sigmaCol] * conv
			}
			if branchCol >= 0 {
				b := v[branchCol]
				if b != math.Trunc(b) || b < 1 {
					return &csvError{file: file, line: lines[i], column: branchCol + 1, msg: fmt.Sprintf("branch must be a whole number ≥ 1, got %v", b)}
				}
				m.branch = int(b)
			}
			return nil
		})
		if err != nil {
			errs = append(errs, err)
			continue
		}
		out = append(out, m)
	}
	return out, errors.Join(errs...)
}

// residual is one measured point against the model.
type residual struct {
	Line     int         `json:"line"`
	X        float64     `json:"x"`           // T (K) or path distance (1/Å)
	Q        *[3]float64 `json:"q,omitempty"` // path: fractional q
	Branch   int         `json:"branch,omitempty"`
	Measured float64     `json:"measured"`
	Sigma    *float64    `json:"sigma"`
	Model    float64     `json:"model"`
	Diff     float64     `json:"residual"` // measured − model
	Z        *float64    `json:"residual_over_sigma"`
}

func newResidual(m measuredRow, model float64) residual {
	r := residual{Line: m.line, X: m.x, Branch: m.branch, Measured: m.y, Model: model, Diff: m.y - model}
	if m.sigma > 0 {
		s, z := m.sigma, (m.y-model)/m.sigma
		r.Sigma, r.Z = &s, &z
	}
	return r
}

// residualTable describes the columns of a residual listing.
type residualTable struct {
	xName, xCSV string // "T (K)", "T_K"
	yName, yCSV string // "Cv (J/(K·mol atoms))", "Cv_J_per_molatom_K"
	path        bool
}

// writeResiduals writes rs as format, with a summary line in a table: the
// root-mean-square residual and, when every point has σ, χ²/N.
func writeResiduals(w io.Writer, format string, t residualTable, rs []residual) error {
	switch format {
	case "json":
		b, err := json.MarshalIndent(struct {
			X         string     `json:"x"`
			Quantity  string     `json:"quantity"`
			Residuals []residual `json:"residuals"`
		}{t.xCSV, t.yCSV, rs}, "", "  ")
		if err != nil {
			return fmt.Errorf("encode JSON: %w", err)
		}
		_, err = fmt.Fprintf(w, "%s\n", b)
		return err
	case "csv":
		c := newCSV(w)
		head := []string{"line", t.xCSV}
		if t.path {
			head = append(head, "q1", "q2", "q3", "branch")
		}
		c.row(append(head, "measured_"+t.yCSV, "sigma", "model_"+t.yCSV, "residual", "residual_over_sigma")...)
		for _, r := range rs {
			cells := []string{strconv.Itoa(r.Line), num(r.X)}
			if t.path {
				cells = append(cells, num(r.Q[0]), num(r.Q[1]), num(r.Q[2]), strconv.Itoa(r.Branch))
			}
			c.row(append(cells, num(r.Measured), optNum(r.Sigma, num, ""), num(r.Model), num(r.Diff), optNum(r.Z, num, ""))...)
		}
		return c.flush()
	}
	tb := newTable(w)
	head := []string{"line", t.xName}
	if t.path {
		head = append(head, "q1", "q2", "q3", "branch")
	}
	tb.row(append(head, "measured "+t.yName, "σ", "model", "measured − model", "(measured − model)/σ")...)
	var ss, zz float64
	allSigma := true
	for _, r := range rs {
		cells := []string{strconv.Itoa(r.Line), f4(r.X)}
		if t.path {
			cells = append(cells, f4(r.Q[0]), f4(r.Q[1]), f4(r.Q[2]), strconv.Itoa(r.Branch))
		}
		tb.row(append(cells, f4(r.Measured), optNum(r.Sigma, f4, "n/a"), f4(r.Model), f4(r.Diff), optNum(r.Z, f4, "n/a"))...)
		ss += r.Diff * r.Diff
		if r.Z == nil {
			allSigma = false
		} else {
			zz += *r.Z * *r.Z
		}
	}
	if err := tb.flush(); err != nil {
		return err
	}
	n := float64(len(rs))
	fmt.Fprintf(w, "%d measured points: rms(measured − model) = %s", len(rs), f4(math.Sqrt(ss/n)))
	if allSigma {
		fmt.Fprintf(w, ", χ²/N = %s", f4(zz/n))
	}
	_, err := fmt.Fprintln(w)
	return err
}

// optNum formats an optional number, absent as the given text (never a
// number that is not one).
func optNum(v *float64, f func(float64) string, absent string) string {
	if v != nil {
		return f(*v)
	}
	return absent
}

// locateOnPath places measured rows on the path of a dispersion: a row
// with q gets its distance (q must lie on a segment), a row with a
// distance gets its q (the distance must lie within the path). Rows that
// cannot be placed are reported with their line.
func locateOnPath(file string, rows []measuredRow, samples []*modegridv1.DispersionSample) error {
	var errs []error
	for i := range rows {
		m := &rows[i]
		found := false
		for k := 1; k < len(samples) && !found; k++ {
			a, b := samples[k-1], samples[k]
			da, db := a.GetDistanceInvA(), b.GetDistanceInvA()
			if !(db > da) {
				continue // a break between pieces
			}
			qa, qb := qArray(a.GetQ()), qArray(b.GetQ())
			if m.hasQ {
				t, ok := onSegment(m.q, qa, qb)
				if ok {
					m.x, found = da+t*(db-da), true
				}
				continue
			}
			if m.x >= da-1e-12 && m.x <= db+1e-12 {
				t := (m.x - da) / (db - da)
				for c := range m.q {
					m.q[c] = qa[c] + t*(qb[c]-qa[c])
				}
				found = true
			}
		}
		if !found {
			what := fmt.Sprintf("distance %v 1/Å is outside the path (0 to %v)", m.x, samples[len(samples)-1].GetDistanceInvA())
			if m.hasQ {
				what = fmt.Sprintf("q = (%v, %v, %v) is not on the path", m.q[0], m.q[1], m.q[2])
			}
			errs = append(errs, &csvError{file: file, line: m.line, column: 1, msg: what})
		}
	}
	return errors.Join(errs...)
}

func qArray(q *modegridv1.QPoint) [3]float64 { return [3]float64{q.GetQ1(), q.GetQ2(), q.GetQ3()} }

// onSegment says whether q lies on the segment from a to b (fractional
// coordinates, within 1e-6) and where, as t in [0, 1].
func onSegment(q, a, b [3]float64) (float64, bool) {
	var d, dd float64
	for c := range q {
		d += (q[c] - a[c]) * (b[c] - a[c])
		dd += (b[c] - a[c]) * (b[c] - a[c])
	}
	if dd == 0 {
		return 0, false
	}
	t := d / dd
	if t < -1e-9 || t > 1+1e-9 {
		return 0, false
	}
	t = math.Min(1, math.Max(0, t))
	for c := range q {
		if math.Abs(a[c]+t*(b[c]-a[c])-q[c]) > 1e-6 {
			return 0, false
		}
	}
	return t, true
}

// pathResiduals compares rows (placed on the path) with the model's
// frequencies at their q (ascending, the output unit): the given branch, or
// the nearest frequency.
func pathResiduals(file string, rows []measuredRow, modes []*modegridv1.Modes) ([]residual, error) {
	var errs []error
	out := make([]residual, 0, len(rows))
	for i, m := range rows {
		f := modes[i].GetFrequencies()
		if m.branch > len(f) {
			errs = append(errs, &csvError{file: file, line: m.line, msg: fmt.Sprintf("branch %d; the model has %d", m.branch, len(f))})
			continue
		}
		if m.branch == 0 {
			best := 0
			for b := range f {
				if math.Abs(f[b]-m.y) < math.Abs(f[best]-m.y) {
					best = b
				}
			}
			m.branch = best + 1
		}
		r := newResidual(m, f[m.branch-1])
		q := m.q
		r.Q = &q
		out = append(out, r)
	}
	return out, errors.Join(errs...)
}

// plotPoints are the rows as points of a figure.
func plotPoints(rows []measuredRow) []plotPoint {
	out := make([]plotPoint, len(rows))
	for i, m := range rows {
		out[i] = plotPoint{X: m.x, Y: m.y, Sigma: m.sigma}
	}
	return out
}
