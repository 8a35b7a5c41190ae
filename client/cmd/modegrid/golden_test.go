package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
)

// go test ./client/cmd/modegrid -run Golden -update rewrites the golden
// files from the current output; review the diff before committing.
var update = flag.Bool("update", false, "rewrite the golden files in testdata/golden")

// goldenCases run every subcommand in every format against the embedded
// server. Numbers are compared with a tolerance (see sameOutput), text
// exactly.
var goldenCases = []struct {
	name string
	args []string
}{
	{"check-fcc-table", []string{"check", "-m", example("fcc")}},
	{"check-fcc-csv", []string{"check", "-m", example("fcc"), "--format", "csv"}},
	{"check-fcc-json", []string{"check", "-m", example("fcc"), "--format", "json"}},
	{"check-rocksalt-like-table", []string{"check", "-m", example("rocksalt-like")}},
	// A supercell force-constant set with invented, deliberately broken
	// numbers: the check reports the fold's corrections.
	{"check-supercell-chain-table", []string{"check", "-m", testdata("broken-sum-rule-supercell-chain.json")}},
	// The same set averaged over its space group (identity and inversion).
	{"check-supercell-chain-symmetrized-table", []string{"check", "-m", testdata("broken-sum-rule-supercell-chain.json"), "--symmetrize"}},

	{"modes-fcc-table", []string{"modes", "-m", example("fcc"), "--q", "0,0,0;0.5,0,0.5;0.5,0.5,0.5"}},
	{"modes-fcc-csv", []string{"modes", "-m", example("fcc"), "--q", "0,0,0;0.5,0,0.5;0.5,0.5,0.5", "--format", "csv"}},
	{"modes-fcc-json", []string{"modes", "-m", example("fcc"), "--q", "0.5,0,0.5", "--format", "json"}},
	{"modes-fcc-mev-csv", []string{"modes", "-m", example("fcc"), "--q", "0.5,0,0.5", "--unit", "mev", "--format", "csv"}},
	{"modes-fcc-cm-1-csv", []string{"modes", "-m", example("fcc"), "--q", "0.5,0,0.5", "--unit", "cm-1", "--format", "csv"}},
	{"modes-chain-grid-csv", []string{"modes", "-m", example("chain"), "--grid", "4", "--format", "csv"}},
	{"modes-chain-shifted-grid-table", []string{"modes", "-m", example("chain"), "--grid", "4", "--shift"}},
	{"modes-square-net-cells-csv", []string{"modes", "-m", example("square-net"), "--cells", "2x2", "--format", "csv"}},

	{"modes-diatomic-chain-extras-table", []string{"modes", "-m", example("diatomic-chain"), "--q", "0;0.25;0.5", "--eigenvectors", "--velocities"}},
	{"modes-diatomic-chain-extras-csv", []string{"modes", "-m", example("diatomic-chain"), "--q", "0;0.25;0.5", "--eigenvectors", "--velocities", "--format", "csv"}},
	{"modes-diatomic-chain-extras-json", []string{"modes", "-m", example("diatomic-chain"), "--q", "0.25", "--eigenvectors", "--velocities", "--format", "json"}},
	{"modes-rocksalt-like-eigenvectors-csv", []string{"modes", "-m", example("rocksalt-like"), "--q", "0.5,0,0.5", "--eigenvectors", "--format", "csv"}},
	{"modes-fcc-velocities-table", []string{"modes", "-m", example("fcc"), "--q", "0.1,0,0.1", "--velocities"}},

	{"shape-diatomic-chain-xyz", []string{"shape", "-m", example("diatomic-chain"), "--q", "0.25", "--branch", "2", "--frames", "3", "--xyz", "-"}},

	{"path-fcc-table", []string{"path", "-m", example("fcc"), "--path", "G=0,0,0 X=0.5,0,0.5 L=0.5,0.5,0.5", "--points", "9"}},
	{"path-fcc-csv", []string{"path", "-m", example("fcc"), "--path", "G=0,0,0 X=0.5,0,0.5 L=0.5,0.5,0.5", "--points", "9", "--format", "csv"}},
	{"path-fcc-json", []string{"path", "-m", example("fcc"), "--path", "G=0,0,0 X=0.5,0,0.5", "--points", "3", "--format", "json"}},
	// No --path on a 2D hexagonal net: the default 2D path Γ–M–K–Γ (not the 3D one).
	{"path-honeycomb-default-csv", []string{"path", "-m", testdata("honeycomb.json"), "--points", "7", "--format", "csv"}},
	{"path-square-net-builtin-csv", []string{"path", "-m", example("square-net"), "--path", "G-X-M-G", "--points", "7", "--format", "csv"}},

	{"dos-chain-table", []string{"dos", "-m", example("chain"), "--grid", "64", "--step", "0.5"}},
	{"dos-chain-csv", []string{"dos", "-m", example("chain"), "--grid", "64", "--step", "0.5", "--format", "csv"}},
	{"dos-chain-json", []string{"dos", "-m", example("chain"), "--grid", "16", "--step", "1", "--format", "json"}},
	{"dos-chain-gaussian-csv", []string{"dos", "-m", example("chain"), "--grid", "64", "--method", "gaussian", "--width", "0.3", "--step", "0.5", "--format", "csv"}},
	{"dos-chain-histogram-cells-csv", []string{"dos", "-m", example("chain"), "--cells", "16", "--method", "histogram", "--step", "0.5", "--format", "csv"}},
	{"dos-diatomic-chain-per-site-csv", []string{"dos", "-m", example("diatomic-chain"), "--grid", "64", "--step", "0.5", "--per-site", "--format", "csv"}},
	{"dos-twin-chain-per-site-csv", []string{"dos", "-m", testdata("twin-chain.json"), "--grid", "32", "--step", "0.5", "--per-site", "--format", "csv"}},

	{"thermal-chain-table", []string{"thermal", "-m", example("chain"), "--grid", "64", "--temps", "0:300:100"}},
	{"thermal-chain-csv", []string{"thermal", "-m", example("chain"), "--grid", "64", "--temps", "0:300:100", "--format", "csv"}},
	{"thermal-chain-json", []string{"thermal", "-m", example("chain"), "--grid", "64", "--temps", "300", "--format", "json"}},
	// Undetermined θ_D (coarse grid at low T) and divergent 1D displacements are named, not printed as numbers.
	{"thermal-fcc-low-t-table", []string{"thermal", "-m", example("fcc"), "--grid", "8", "--temps", "0,0.5,1,2,50"}},
	{"thermal-chain-msd-table", []string{"thermal", "-m", example("chain"), "--grid", "64", "--temps", "0,300", "--msd"}},
	{"thermal-chain-msd-csv", []string{"thermal", "-m", example("chain"), "--grid", "64", "--temps", "0,300", "--msd", "--format", "csv"}},
	{"thermal-chain-msd-json", []string{"thermal", "-m", example("chain"), "--grid", "64", "--temps", "300", "--msd", "--format", "json"}},
	{"thermal-rocksalt-like-cells-csv", []string{"thermal", "-m", example("rocksalt-like"), "--grid", "6", "--temps", "100,300,1000", "--basis", "cells", "--format", "csv"}},
	{"thermal-rocksalt-like-kg-table", []string{"thermal", "-m", example("rocksalt-like"), "--grid", "6", "--temps", "100,300,1000", "--basis", "kg"}},
	{"thermal-rocksalt-like-atoms-table", []string{"thermal", "-m", example("rocksalt-like"), "--grid", "6", "--temps", "100,300,1000"}},
	{"thermal-fcc-msd-csv", []string{"thermal", "-m", example("fcc"), "--grid", "6", "--temps", "100,300", "--msd", "--format", "csv"}},

	// The polar example: its charges in the check, Γ twice on a path (one
	// sample per side, LO above TO), Γ along a direction, and the infrared
	// response in every format.
	{"check-polar-rocksalt-like-table", []string{"check", "-m", example("polar-rocksalt-like")}},
	{"path-polar-rocksalt-like-csv", []string{"path", "-m", example("polar-rocksalt-like"), "--path", "X=0.5,0,0.5 G=0,0,0 L=0.5,0.5,0.5", "--points", "7", "--format", "csv"}},
	{"modes-polar-rocksalt-like-gamma-dir-csv", []string{"modes", "-m", example("polar-rocksalt-like"), "--q", "0,0,0;0.5,0,0.5", "--gamma-dir", "1,1,0", "--unit", "cm-1", "--format", "csv"}},
	{"infrared-polar-rocksalt-like-table", []string{"infrared", "-m", example("polar-rocksalt-like"), "--points", "11"}},
	{"infrared-polar-rocksalt-like-csv", []string{"infrared", "-m", example("polar-rocksalt-like"), "--min", "150", "--max", "350", "--points", "9", "--damping", "4", "--format", "csv"}},
	{"infrared-polar-rocksalt-like-modes-csv", []string{"infrared", "-m", example("polar-rocksalt-like"), "--dir", "1,1,0", "--modes", "--format", "csv"}},
	{"infrared-polar-rocksalt-like-json", []string{"infrared", "-m", example("polar-rocksalt-like"), "--unit", "thz", "--points", "3", "--format", "json"}},
	// Fits to invented data (testdata/fit-*.csv say how they were made).
	{"fit-rocksalt-like-table", fitRocksaltArgs()},
	{"fit-rocksalt-like-csv", append(fitRocksaltArgs(), "--format", "csv")},
	{"fit-rocksalt-like-json", append(fitRocksaltArgs(), "--format", "json")},
	{"fit-rocksalt-like-tie-bound-table", []string{"fit", "-m", example("rocksalt-like"), "--data", testdata("fit-rocksalt-like-dispersion.csv"),
		"--free", "shells[0].k_long,shells[0].k_trans,shells[1].k_long", "--tie", "shells[2].k_long=shells[1].k_long*0.8", "--bound", "shells[0].k_trans=1.5:3"}},
	{"fit-chain-heat-capacity-table", []string{"fit", "-m", example("chain"), "--data", testdata("fit-chain-heat-capacity.csv"),
		"--data", testdata("fit-chain-velocity.csv"), "--free", "springs[0].k_long", "--grid", "64"}},
	{"fit-spring-and-shell-chain-table", []string{"fit", "-m", testdata("spring-and-shell-chain.json"), "--data", testdata("fit-chain-dispersion.csv"),
		"--free", "springs[0].k_long", "--free", "shells[0].k_long"}},
	// Scattering: invented lengths for the invented species P and Q of the rock-salt-like example.
	{"scatter-rocksalt-like-path-table", []string{"scatter", "-m", example("rocksalt-like"), "--b", "P=3;Q=6", "--sigma-inc", "Q=2",
		"--path", "200=2,0,0 300=3,0,0", "--frame", "conv", "--a", "5.6", "--points", "3", "--temp", "100", "--dw-grid", "6"}},
	{"scatter-rocksalt-like-path-csv", []string{"scatter", "-m", example("rocksalt-like"), "--b", "P=3;Q=6", "--sigma-inc", "Q=2",
		"--path", "200=2,0,0 300=3,0,0", "--frame", "conv", "--a", "5.6", "--points", "3", "--temp", "100", "--dw-grid", "6",
		"--emin", "-30", "--emax", "30", "--estep", "5", "--fwhm", "2", "--format", "csv"}},
	{"scatter-fcc-list-lines-csv", []string{"scatter", "-m", example("fcc"), "--b", "M=5", "--q", "1.2,0.3,0;0.1,0.2,0.3",
		"--no-debye-waller", "--temp", "0", "--lines", "--format", "csv"}},
	{"scatter-fcc-slice-csv", []string{"scatter", "-m", example("fcc"), "--b", "M=5", "--slice", "1,0,0;1,0,0;0,1,0", "--u", "0:0.5:2", "--v", "0:0.5:2",
		"--no-debye-waller", "--emin", "5", "--emax", "5", "--estep", "1", "--fwhm", "3", "--format", "csv"}},
	{"scatter-fcc-xray-json", []string{"scatter", "-m", example("fcc"), "--probe", "xray", "--xray-f", "M=20,10,5,30,2", "--q", "1.5,0,0",
		"--no-debye-waller", "--emax", "20", "--estep", "10", "--format", "json"}},
	{"powder-fcc-table", []string{"powder", "-m", example("fcc"), "--b", "M=5", "--sigma-inc", "M=1", "--qmin", "1", "--qmax", "3", "--qpoints", "3",
		"--max-directions", "256", "--emax", "24", "--estep", "4", "--dw-grid", "6"}},
	{"powder-fcc-csv", []string{"powder", "-m", example("fcc"), "--b", "M=5", "--sigma-inc", "M=1", "--qmin", "1", "--qmax", "3", "--qpoints", "3",
		"--max-directions", "256", "--emax", "24", "--estep", "4", "--dw-grid", "6", "--format", "csv"}},
	{"weighted-dos-rocksalt-like-csv", []string{"weighted-dos", "-m", example("rocksalt-like"), "--b", "P=3;Q=6", "--sigma-inc", "Q=2", "--grid", "6",
		"--emax", "32", "--estep", "4", "--format", "csv"}},
	{"weighted-dos-rocksalt-like-table", []string{"weighted-dos", "-m", example("rocksalt-like"), "--b", "P=3;Q=6", "--grid", "6", "--emax", "32", "--estep", "8"}},
}

// fitRocksaltArgs fit the four shell constants of the rock-salt-like
// example to its invented dispersion and Γ data.
func fitRocksaltArgs() []string {
	return []string{"fit", "-m", example("rocksalt-like"), "--data", testdata("fit-rocksalt-like-dispersion.csv"),
		"--data", testdata("fit-rocksalt-like-gamma.csv"), "--free", "shells[0].k_long,shells[0].k_trans,shells[1].k_long,shells[2].k_long"}
}

func goldenFile(name string) string {
	ext := ".txt"
	switch {
	case strings.HasSuffix(name, "-csv"):
		ext = ".csv"
	case strings.HasSuffix(name, "-json"):
		ext = ".json"
	}
	return filepath.Join("testdata", "golden", name+ext)
}

// TestGolden compares every subcommand and format with its golden file.
func TestGolden(t *testing.T) {
	for _, tc := range goldenCases {
		t.Run(tc.name, func(t *testing.T) {
			code, out, stderr := runCLI(t, tc.args...)
			if code != exitOK {
				t.Fatalf("exit %d: %s", code, stderr)
			}
			checkGolden(t, goldenFile(tc.name), out)
		})
	}
}

func checkGolden(t *testing.T, file, got string) {
	t.Helper()
	if *update {
		if err := os.WriteFile(file, []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(file)
	if err != nil {
		t.Fatalf("%v (run with -update to create it)", err)
	}
	if err := sameOutput(filepath.Ext(file), got, string(want)); err != nil {
		t.Errorf("%s: %v\n--- got:\n%s", file, err, got)
	}
}

// Tolerances of the golden comparison: CSV and JSON carry full precision,
// tables four decimals.
const (
	fullAbsTol, fullRelTol   = 1e-6, 1e-7
	tableAbsTol, tableRelTol = 1.5e-4, 1e-6
)

var numberRE = regexp.MustCompile(`[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?`)

// sameOutput compares output with its golden text: JSON structurally, CSV
// and tables line by line with the numbers compared within a tolerance and
// everything else (headers, labels, separators up to alignment) exactly.
func sameOutput(ext, got, want string) error {
	if ext == ".json" {
		var g, w any
		if err := json.Unmarshal([]byte(got), &g); err != nil {
			return fmt.Errorf("output is not JSON: %v", err)
		}
		if err := json.Unmarshal([]byte(want), &w); err != nil {
			return fmt.Errorf("golden file is not JSON: %v", err)
		}
		return sameJSON("$", g, w)
	}
	abs, rel := fullAbsTol, fullRelTol
	if ext == ".txt" {
		abs, rel = tableAbsTol, tableRelTol
	}
	gl := strings.Split(strings.TrimRight(got, "\n"), "\n")
	wl := strings.Split(strings.TrimRight(want, "\n"), "\n")
	if len(gl) != len(wl) {
		return fmt.Errorf("%d lines; want %d", len(gl), len(wl))
	}
	for i := range gl {
		if err := sameLine(gl[i], wl[i], abs, rel); err != nil {
			return fmt.Errorf("line %d: %v\n  got:  %s\n  want: %s", i+1, err, gl[i], wl[i])
		}
	}
	return nil
}

func sameLine(got, want string, abs, rel float64) error {
	skel := func(s string) string {
		return strings.Join(strings.Fields(numberRE.ReplaceAllString(s, "#")), " ")
	}
	if skel(got) != skel(want) {
		return fmt.Errorf("text differs")
	}
	gn, wn := numberRE.FindAllString(got, -1), numberRE.FindAllString(want, -1)
	for k := range gn {
		if gn[k] == wn[k] {
			continue // also covers digits inside a hex hash, which need not parse
		}
		g, _ := strconv.ParseFloat(gn[k], 64)
		w, _ := strconv.ParseFloat(wn[k], 64)
		if !near(g, w, abs, rel) {
			return fmt.Errorf("number %d is %s; want %s", k+1, gn[k], wn[k])
		}
	}
	return nil
}

func near(a, b, abs, rel float64) bool {
	return math.Abs(a-b) <= abs+rel*math.Max(math.Abs(a), math.Abs(b))
}

func sameJSON(path string, got, want any) error {
	switch w := want.(type) {
	case map[string]any:
		g, ok := got.(map[string]any)
		if !ok {
			return fmt.Errorf("%s: got %T; want an object", path, got)
		}
		for k := range w {
			if _, ok := g[k]; !ok {
				return fmt.Errorf("%s.%s missing", path, k)
			}
		}
		for k, gv := range g {
			wv, ok := w[k]
			if !ok {
				return fmt.Errorf("%s.%s not in the golden file", path, k)
			}
			if err := sameJSON(path+"."+k, gv, wv); err != nil {
				return err
			}
		}
	case []any:
		g, ok := got.([]any)
		if !ok || len(g) != len(w) {
			return fmt.Errorf("%s: got %v; want %d elements", path, got, len(w))
		}
		for i := range w {
			if err := sameJSON(fmt.Sprintf("%s[%d]", path, i), g[i], w[i]); err != nil {
				return err
			}
		}
	case float64:
		g, ok := got.(float64)
		if !ok || !near(g, w, fullAbsTol, fullRelTol) {
			return fmt.Errorf("%s: got %v; want %v", path, got, w)
		}
	default:
		if got != want {
			return fmt.Errorf("%s: got %v; want %v", path, got, want)
		}
	}
	return nil
}

// TestCSVHeaders: the CSV headers are exactly the documented ones, the
// frequency column follows --unit, and per-site columns are named by label
// (with the site index for a shared label).
func TestCSVHeaders(t *testing.T) {
	tests := []struct {
		name string
		args []string
		want string
	}{
		{"modes", []string{"modes", "-m", example("chain"), "--q", "0.5"}, "q1,q2,q3,branch,frequency_thz"},
		{"modes mev", []string{"modes", "-m", example("chain"), "--q", "0.5", "--unit", "mev"}, "q1,q2,q3,branch,frequency_mev"},
		{"modes cm-1", []string{"modes", "-m", example("chain"), "--q", "0.5", "--unit", "cm-1"}, "q1,q2,q3,branch,frequency_cm-1"},
		{"modes velocities", []string{"modes", "-m", example("chain"), "--q", "0.5", "--velocities"}, "q1,q2,q3,branch,frequency_thz,v_x_km_s,v_y_km_s,v_z_km_s"},
		{"modes eigenvectors", []string{"modes", "-m", example("rocksalt-like"), "--q", "0.5,0,0", "--eigenvectors"},
			"q1,q2,q3,branch,frequency_thz,e_P_x_re,e_P_x_im,e_P_y_re,e_P_y_im,e_P_z_re,e_P_z_im,e_Q_x_re,e_Q_x_im,e_Q_y_re,e_Q_y_im,e_Q_z_re,e_Q_z_im"},
		{"modes both, shared label", []string{"modes", "-m", testdata("twin-chain.json"), "--q", "0.5", "--velocities", "--eigenvectors"},
			"q1,q2,q3,branch,frequency_thz,v_x_km_s,v_y_km_s,v_z_km_s,e_A_0_x_re,e_A_0_x_im,e_A_1_x_re,e_A_1_x_im"},
		{"path", []string{"path", "-m", example("chain"), "--path", "G=0 X=0.5", "--points", "5"}, "distance,label,q1,q2,q3,branch,frequency_thz"},
		{"dos", []string{"dos", "-m", example("chain"), "--grid", "32"}, "frequency_thz,dos,integrated"},
		{"dos mev", []string{"dos", "-m", example("chain"), "--grid", "32", "--unit", "mev"}, "frequency_mev,dos,integrated"},
		{"dos per site", []string{"dos", "-m", example("rocksalt-like"), "--grid", "4", "--per-site"}, "frequency_thz,dos,integrated,dos_P,dos_Q"},
		{"dos shared label", []string{"dos", "-m", testdata("twin-chain.json"), "--grid", "16", "--per-site"}, "frequency_thz,dos,integrated,dos_A_0,dos_A_1"},
		{"thermal", []string{"thermal", "-m", example("chain"), "--grid", "32", "--temps", "300"},
			// θ_D's status column: the number alone read as a Debye temperature where none is determined.
			"temperature_k,heat_capacity_j_per_mol_atoms_k,entropy_j_per_mol_atoms_k,free_energy_kj_per_mol_atoms,internal_energy_kj_per_mol_atoms,debye_temperature_k,debye_temperature_status"},
		{"thermal per mole of cells", []string{"thermal", "-m", example("chain"), "--grid", "32", "--temps", "300", "--basis", "cells"},
			"temperature_k,heat_capacity_j_per_mol_cells_k,entropy_j_per_mol_cells_k,free_energy_kj_per_mol_cells,internal_energy_kj_per_mol_cells,debye_temperature_k,debye_temperature_status"},
		{"thermal per kg", []string{"thermal", "-m", example("chain"), "--grid", "32", "--temps", "300", "--basis", "kg"},
			"temperature_k,heat_capacity_j_per_kg_k,entropy_j_per_kg_k,free_energy_kj_per_kg,internal_energy_kj_per_kg,debye_temperature_k,debye_temperature_status"},
		{"scatter path", []string{"scatter", "-m", example("fcc"), "--b", "M=5", "--path", "A=1,0,0 B=1.5,0,0", "--points", "3", "--no-debye-waller"},
			"distance_invA,label,q1,q2,q3,qx_invA,qy_invA,qz_invA,energy_mev,s_barn_per_sr_mev"},
		{"scatter conventional frame in THz", []string{"scatter", "-m", example("fcc"), "--b", "M=5", "--q", "1,0,0", "--frame", "conv", "--a", "4", "--no-debye-waller", "--unit", "thz"},
			"q1,q2,q3,qx_invA,qy_invA,qz_invA,h,k,l,energy_thz,s_barn_per_sr_thz"},
		{"scatter slice lines", []string{"scatter", "-m", example("fcc"), "--b", "M=5", "--slice", "0,0,0;1,0,0;0,1,0", "--u", "0:1:2", "--v", "0:1:2", "--no-debye-waller", "--lines"},
			"u,v,q1,q2,q3,qx_invA,qy_invA,qz_invA,mode,energy_mev,creation_barn_per_sr,annihilation_barn_per_sr"},
		{"scatter X-ray", []string{"scatter", "-m", example("fcc"), "--probe", "xray", "--xray-f", "M=26", "--q", "1,0,0", "--no-debye-waller"},
			"q1,q2,q3,qx_invA,qy_invA,qz_invA,energy_mev,s_electrons2_per_mev"},
		{"powder", []string{"powder", "-m", example("fcc"), "--b", "M=5", "--qpoints", "2", "--max-directions", "128", "--no-debye-waller", "--coherent-only"},
			"q_invA,energy_mev,s_barn_per_sr_mev"},
		{"weighted DOS", []string{"weighted-dos", "-m", example("fcc"), "--b", "M=5", "--grid", "4"},
			"energy_mev,weighted_dos_barn_per_amu_mev,weighted_dos_normalized_per_mev"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			code, out, stderr := runCLI(t, append(tc.args, "--format", "csv")...)
			if code != exitOK {
				t.Fatalf("exit %d: %s", code, stderr)
			}
			if got, _, _ := strings.Cut(out, "\n"); got != tc.want {
				t.Errorf("header %q; want %q", got, tc.want)
			}
		})
	}
}
