package main

import (
	"encoding/csv"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
)

var updateFigures = flag.Bool("update-figures", false, "rewrite testdata/figures/*.png for reviewers")

// TestFigureGallery draws the figures of the CLI end to end on the example
// crystals (embedded server, real computations), with measured data from
// testdata, and checks the residual listings. With -update-figures the
// PNGs are written to testdata/figures for a look.
func TestFigureGallery(t *testing.T) {
	dir := t.TempDir()
	if *updateFigures {
		dir = filepath.Join("testdata", "figures")
		if err := os.MkdirAll(dir, 0o755); err != nil {
			t.Fatal(err)
		}
	}
	tests := []struct {
		name string
		args []string
		want []string // in standard output
	}{
		{"path-rocksalt-like-measured", []string{"path", "-m", example("rocksalt-like"), "--unit", "mev", "--grid", "12",
			"--follow-modes", "--measured", testdata("measured-path.csv")},
			[]string{"measured ν (meV)", "(measured − model)/σ", "7 measured points: rms(measured − model) ="}},
		{"path-diatomic-chain-cm-1", []string{"path", "-m", example("diatomic-chain"), "--unit", "cm-1", "--grid", "64"}, nil},
		{"dos-rocksalt-like-stacked", []string{"dos", "-m", example("rocksalt-like"), "--grid", "12", "--per-site", "--stack"}, nil},
		{"thermal-diatomic-chain-measured", []string{"thermal", "-m", example("diatomic-chain"), "--grid", "64", "--temps", "0:400:10",
			"--measured", testdata("measured-thermal.csv")},
			[]string{"measured Cv (J/(K·mol atoms))", "5 measured points", "χ²/N ="}},
		{"shape-diatomic-chain-zone-boundary", []string{"shape", "-m", example("diatomic-chain"), "--q", "0.5", "--branch", "2"}, nil},
		{"fit-rocksalt-like", []string{"fit", "-m", example("rocksalt-like"), "--data", testdata("fit-rocksalt-like-dispersion.csv"),
			"--data", testdata("fit-rocksalt-like-gamma.csv"), "--free", "shells[0].k_long,shells[0].k_trans,shells[1].k_long,shells[2].k_long", "--format", "table"},
			[]string{"χ²/dof =", "shells[0].k_trans", "correlation", "(measured − model)/σ"}},
		{"path-polar-rocksalt-like", []string{"path", "-m", example("polar-rocksalt-like"), "--grid", "12"}, nil},
		{"infrared-polar-rocksalt-like", []string{"infrared", "-m", example("polar-rocksalt-like"), "--damping", "3", "--format", "table"},
			[]string{"static ε₀ along ê", "active", "acoustic"}},
		// Invented lengths for the invented species P and Q.
		{"scatter-rocksalt-like-path", []string{"scatter", "-m", example("rocksalt-like"), "--b", "P=3;Q=6", "--sigma-inc", "Q=2", "--frame", "conv", "--a", "5.6",
			"--path", "200=2,0,0 300=3,0,0 311=3,1,1 222=2,2,2", "--points", "161", "--emin", "-10", "--emax", "32", "--estep", "0.2", "--fwhm", "1", "--dw-grid", "12"}, nil},
		{"powder-rocksalt-like", []string{"powder", "-m", example("rocksalt-like"), "--b", "P=3;Q=6", "--sigma-inc", "Q=2", "--qmin", "0.2", "--qmax", "8", "--qpoints", "40",
			"--max-directions", "65536", "--emax", "32", "--estep", "0.25", "--fwhm", "1", "--dw-grid", "12"}, nil},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			file := filepath.Join(dir, tc.name+".png")
			code, out, stderr := runCLI(t, append(tc.args, "--plot", file)...)
			if code != exitOK {
				t.Fatalf("exit %d: %s", code, stderr)
			}
			for _, w := range tc.want {
				if !strings.Contains(out, w) {
					t.Errorf("output lacks %q:\n%s", w, out)
				}
			}
			if _, _, ink, _ := pngStats(t, file); ink < 0.01 {
				t.Errorf("%s is nearly blank (%.2f%% ink)", file, 100*ink)
			}
		})
	}
}

// TestMeasuredCSVErrors: bad measured files are refused with the file,
// line and column, every bad row at once.
func TestMeasuredCSVErrors(t *testing.T) {
	dir := t.TempDir()
	write := func(name, body string) string {
		f := filepath.Join(dir, name)
		if err := os.WriteFile(f, []byte(body), 0o644); err != nil {
			t.Fatal(err)
		}
		return f
	}
	tests := []struct {
		name, body string
		thermal    bool
		want       []string
	}{
		{"header", "T,Cv\n1,2\n", true, []string{":1: header \"T,Cv\"; want T_K,Cv_J_per_<basis>_K[,sigma]"}},
		{"basis", "T_K,Cv_J_per_mol_K\n1,2\n", true,
			[]string{":1: column 2: \"Cv_J_per_mol_K\"; want Cv_J_per_molatom_K, Cv_J_per_molcell_K, Cv_J_per_kg_K"}},
		{"numbers", "# c\nT_K,Cv_J_per_molcell_K,sigma\n10,abc,1\n-5,1,1\n20,1,0\n", true,
			[]string{":3: column 2: Cv_J_per_molcell_K: \"abc\" is not a finite number", ":4: column 1: T_K must be ≥ 0",
				":5: column 3: sigma must be > 0"}},
		{"unit", "q1,q2,q3,freq_GHz\n0,0,0,1\n", false, []string{":1: column 4: want freq_THz, freq_meV or freq_cm-1"}},
		{"branch", "distance_invA,freq_THz,branch\n0.1,1,1.5\n0.2,1,2,3\n", false,
			[]string{":2: column 3: branch must be a whole number ≥ 1", ":3: 4 columns; the header has 3"}},
		{"empty", "# nothing\n", false, []string{":1: empty file"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			f := write(tc.name+".csv", tc.body)
			var err error
			if tc.thermal {
				_, _, err = readThermalMeasured(f)
			} else {
				_, err = readPathMeasured(f, 1)
			}
			if err == nil {
				t.Fatal("accepted")
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), f+w) {
					t.Errorf("error %q lacks %q", err, f+w)
				}
			}
		})
	}
	// Off the path: the CLI names the line.
	f := write("off.csv", "q1,q2,q3,freq_THz\n0.25,0.1,0,1\n")
	code, _, stderr := runCLI(t, "path", "-m", example("diatomic-chain"), "--measured", f)
	if code == exitOK || !strings.Contains(stderr, f+":2: column 1: q = (0.25, 0.1, 0) is not on the path") {
		t.Errorf("exit %d, stderr %q; want the line of the point off the path", code, stderr)
	}
}

// TestConnectDeprecated: the old --connect still follows modes, with a note.
func TestConnectDeprecated(t *testing.T) {
	code, out, stderr := runCLI(t, "path", "-m", example("diatomic-chain"), "--points", "5", "--connect", "--format", "json")
	if code != exitOK || !strings.Contains(stderr, "--connect is deprecated; it is now called --follow-modes") ||
		!strings.Contains(out, "follow_modes=true") {
		t.Errorf("exit %d, stderr %q, output %q", code, stderr, out)
	}
}

// TestThermalBasisConvert: a measured heat capacity moves between bases by
// the amount of each basis in a mole of cells. For two sites in a cell of
// 60 amu, a mole of cells is 2 mol of atoms and 60 g (the molar mass in
// g/mol is the mass in amu, to 1e-9: M_u = 0.99999999965 g/mol, CODATA
// 2018), so 3 J/(K·mol atoms) is 6 J/(K·mol cells) and 6/0.060 J/(kg·K).
func TestThermalBasisConvert(t *testing.T) {
	const sites, mass = 2, 60.0
	tests := []struct {
		v        float64
		from, to thermalBasis
		want     float64
	}{
		{3, basisAtoms, basisCells, 6},
		{6, basisCells, basisAtoms, 3},
		{3, basisAtoms, basisKg, 100},
		{100, basisKg, basisCells, 6},
		{100, basisKg, basisAtoms, 3},
		{6, basisCells, basisCells, 6},
	}
	for _, tc := range tests {
		got := tc.to.convert(tc.v, tc.from, sites, mass)
		if math.Abs(got-tc.want) > 1e-8*tc.want {
			t.Errorf("%v per %s = %v per %s; want %v", tc.v, tc.from.per(), got, tc.to.per(), tc.want)
		}
	}
	rows := convertRows([]measuredRow{{x: 10, y: 3, sigma: 0.5}}, basisAtoms, basisCells, sites, mass)
	if rows[0].y != 6 || rows[0].sigma != 1 || rows[0].x != 10 {
		t.Errorf("converted row %+v; want y 6, σ 1 at 10 K", rows[0])
	}
}

// thermalResiduals runs `thermal --measured file --basis basis` on the
// diatomic chain and returns the CSV header and the rows as numbers.
func thermalResiduals(t *testing.T, file, basis string) ([]string, [][]float64) {
	t.Helper()
	code, out, stderr := runCLI(t, "thermal", "-m", example("diatomic-chain"), "--grid", "16", "--measured", file,
		"--basis", basis, "--format", "csv")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	recs, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil || len(recs) < 2 {
		t.Fatalf("CSV %q: %v", out, err)
	}
	var vals [][]float64
	for _, r := range recs[1:] {
		row := make([]float64, len(r))
		for i, c := range r {
			if row[i], err = strconv.ParseFloat(c, 64); err != nil {
				t.Fatalf("cell %q: %v", c, err)
			}
		}
		vals = append(vals, row)
	}
	return recs[0], vals
}

// writeThermalMeasured writes a measured heat-capacity file at path: per
// row of rows (residual tables; T in column 1) its temperature and the
// value and σ col takes from it, under the header column.
func writeThermalMeasured(t *testing.T, path string, rows [][]float64, column string, col func(r []float64) (float64, float64)) string {
	t.Helper()
	var b strings.Builder
	fmt.Fprintf(&b, "T_K,%s,sigma\n", column)
	for _, r := range rows {
		y, s := col(r)
		fmt.Fprintf(&b, "%s,%s,%s\n", num(r[1]), num(y), num(s))
	}
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// TestMeasuredBasis: the measured heat capacities of a file declared per
// mole of atoms, per mole of cells or per kilogram are converted to the
// --basis of the residual table, whose columns name that basis. The same
// data in any file basis gives the same table; across output bases the
// measured values scale as the model's (so measured/model and the
// residual over σ do not change), and per mole of cells they are twice
// those per mole of atoms (the chain has two sites per cell).
func TestMeasuredBasis(t *testing.T) {
	dir := t.TempDir()
	// Columns: line, T_K, measured, sigma, model, residual, residual_over_sigma.
	atomsHead, atoms := thermalResiduals(t, testdata("measured-thermal.csv"), "atoms")
	if atomsHead[2] != "measured_Cv_J_per_molatom_K" || atomsHead[4] != "model_Cv_J_per_molatom_K" {
		t.Errorf("header %q; want the per-atom basis named", atomsHead)
	}
	cellsHead, cells := thermalResiduals(t, testdata("measured-thermal.csv"), "cells")
	if cellsHead[2] != "measured_Cv_J_per_molcell_K" || cellsHead[4] != "model_Cv_J_per_molcell_K" {
		t.Errorf("header %q; want the per-cell basis named", cellsHead)
	}
	kgHead, kg := thermalResiduals(t, testdata("measured-thermal.csv"), "kg")
	if kgHead[2] != "measured_Cv_J_per_kg_K" {
		t.Errorf("header %q; want the per-kg basis named", kgHead)
	}
	same := func(a, b float64) bool { return math.Abs(a-b) <= 1e-9*math.Max(math.Abs(a), math.Abs(b)) }
	for i := range atoms {
		a, c, k := atoms[i], cells[i], kg[i]
		if !same(c[2], 2*a[2]) || !same(c[3], 2*a[3]) || !same(c[4], 2*a[4]) {
			t.Errorf("row %d per cell %v; want twice per atom %v", i, c, a)
		}
		if !same(k[2]/k[4], a[2]/a[4]) || !same(k[6], a[6]) || !same(c[6], a[6]) {
			t.Errorf("row %d: measured/model or residual/σ depends on the basis: atoms %v, cells %v, kg %v", i, a, c, k)
		}
	}
	// The same data declared per mole of cells and per kilogram (written
	// from the kg table) give the per-atom table again.
	perCell := writeThermalMeasured(t, filepath.Join(dir, "cells.csv"), kg, "Cv_J_per_molcell_K", func(r []float64) (float64, float64) {
		i := slices.IndexFunc(cells, func(c []float64) bool { return c[1] == r[1] })
		return cells[i][2], cells[i][3]
	})
	perKg := writeThermalMeasured(t, filepath.Join(dir, "kg.csv"), kg, "Cv_J_per_kg_K", func(r []float64) (float64, float64) { return r[2], r[3] })
	for _, f := range []string{perCell, perKg} {
		_, again := thermalResiduals(t, f, "atoms")
		for i := range atoms {
			for c := 2; c < len(atoms[i]); c++ {
				if !same(again[i][c], atoms[i][c]) && math.Abs(again[i][c]-atoms[i][c]) > 1e-9 {
					t.Errorf("%s row %d column %d: %v; want %v as from the per-atom file", filepath.Base(f), i, c, again[i][c], atoms[i][c])
				}
			}
		}
	}
}
