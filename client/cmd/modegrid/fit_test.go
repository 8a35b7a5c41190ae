package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// fitJSON runs fit with --format json and returns the result.
func fitJSON(t *testing.T, args ...string) map[string]any {
	t.Helper()
	code, out, stderr := runCLI(t, append(append([]string{"fit"}, args...), "--format", "json")...)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var res map[string]any
	if err := json.Unmarshal([]byte(out), &res); err != nil {
		t.Fatal(err)
	}
	return res
}

// TestFitWritesFittedModel: --fitted writes the fitted model in the
// format its name says (JSON, protobuf binary), which --model reads back
// as the same model: check gives the fitted model's hash of the fit, and
// the file holds the fitted values.
func TestFitWritesFittedModel(t *testing.T) {
	dir := t.TempDir()
	for _, name := range []string{"fitted.json", "fitted.pb"} {
		out := filepath.Join(dir, name)
		res := fitJSON(t, "-m", example("chain"), "--data", testdata("fit-chain-heat-capacity.csv"), "--free", "springs[0].k_long",
			"--grid", "64", "--fitted", out)
		code, chk, stderr := runCLI(t, "check", "-m", out, "--format", "json")
		if code != exitOK {
			t.Fatalf("%s: check exit %d: %s", name, code, stderr)
		}
		var c map[string]any
		if err := json.Unmarshal([]byte(chk), &c); err != nil {
			t.Fatal(err)
		}
		if c["modelHash"] != res["fittedModelHash"] {
			t.Errorf("%s: check hash %v; the fit named %v", name, c["modelHash"], res["fittedModelHash"])
		}
		b, err := os.ReadFile(out)
		if err != nil {
			t.Fatal(err)
		}
		c2, err := parseModelFile(out, b)
		if err != nil {
			t.Fatal(err)
		}
		want := res["parameters"].([]any)[0].(map[string]any)["value"].(float64)
		if got := c2.GetSprings()[0].GetKLong(); got != want {
			t.Errorf("%s: k_long %v in the file; fitted %v", name, got, want)
		}
	}
}

// TestFitUnits: the same dispersion in THz and in meV (the file's unit,
// converted with h = 4.135667697e-15 eV·s, CODATA 2018) fits to the same
// spring constant, and the table shows the file's unit.
func TestFitUnits(t *testing.T) {
	dir := t.TempDir()
	mev, err := os.ReadFile(testdata("fit-chain-dispersion.csv"))
	if err != nil {
		t.Fatal(err)
	}
	const mevPerTHz = 4.135667697
	var thz strings.Builder
	thz.WriteString("q1,q2,q3,frequency_thz,sigma_thz\n")
	for _, line := range strings.Split(string(mev), "\n") {
		var q1, q2, q3, f, s float64
		if n, _ := fmtSscanCSV(line, &q1, &q2, &q3, &f, &s); n == 5 {
			thz.WriteString(strings.Join([]string{num(q1), num(q2), num(q3), num(f / mevPerTHz), num(s / mevPerTHz)}, ",") + "\n")
		}
	}
	if strings.Count(thz.String(), "\n") != 6 {
		t.Fatalf("converted %d rows of the meV file; want 5", strings.Count(thz.String(), "\n")-1)
	}
	file := filepath.Join(dir, "thz.csv")
	if err := os.WriteFile(file, []byte(thz.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	a := fitJSON(t, "-m", example("chain"), "--data", testdata("fit-chain-dispersion.csv"), "--free", "springs[0].k_long")
	b := fitJSON(t, "-m", example("chain"), "--data", file, "--free", "springs[0].k_long")
	ka := a["parameters"].([]any)[0].(map[string]any)["value"].(float64)
	kb := b["parameters"].([]any)[0].(map[string]any)["value"].(float64)
	if math.Abs(ka-kb) > 1e-9*ka {
		t.Errorf("k from meV data %v, from THz data %v", ka, kb)
	}
	_, out, _ := runCLI(t, "fit", "-m", example("chain"), "--data", testdata("fit-chain-dispersion.csv"), "--free", "springs[0].k_long")
	if !strings.Contains(out, "meV\n") {
		t.Errorf("the table does not show the file's unit (meV):\n%s", out)
	}
}

// fmtSscanCSV reads comma-separated numbers (no comments).
func fmtSscanCSV(line string, v ...*float64) (int, error) {
	if strings.HasPrefix(line, "#") {
		return 0, nil
	}
	parts := strings.Split(line, ",")
	n := 0
	for i, p := range parts {
		if i >= len(v) {
			break
		}
		x, err := parseFloatCell(p)
		if err != nil {
			return n, err
		}
		*v[i] = x
		n++
	}
	return n, nil
}

func parseFloatCell(s string) (float64, error) { return strconv.ParseFloat(strings.TrimSpace(s), 64) }

// TestFitFigureAndResiduals: --plot draws the page (PNG of the figure
// size, with ink; SVG with the title and the residual axis), --residuals
// writes one CSV row per datum.
func TestFitFigureAndResiduals(t *testing.T) {
	dir := t.TempDir()
	png, svg, res := filepath.Join(dir, "fit.png"), filepath.Join(dir, "fit.svg"), filepath.Join(dir, "res.csv")
	for _, fig := range []string{png, svg} {
		code, out, stderr := runCLI(t, "fit", "-m", example("rocksalt-like"), "--data", testdata("fit-rocksalt-like-dispersion.csv"),
			"--data", testdata("fit-rocksalt-like-gamma.csv"), "--free", "shells[0].k_long,shells[1].k_long", "--plot", fig, "--residuals", res)
		if code != exitOK || out != "" {
			t.Fatalf("exit %d, output %q (want none with --plot alone): %s", code, out, stderr)
		}
	}
	w, h, ink, _ := pngStats(t, png)
	if w != pixels(fitSize[0]) || h != pixels(fitSize[1]) || ink < 0.01 {
		t.Errorf("fit.png: %d×%d px, %.2f%% ink", w, h, 100*ink)
	}
	if _, _, paths, text := svgStats(t, svg); paths < 20 || !strings.Contains(text, "rocksalt-like fitted") || !strings.Contains(text, "(measured − model)/σ") {
		t.Errorf("fit.svg: %d paths, text %q", paths, text)
	}
	b, err := os.ReadFile(res)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	if lines[0] != "source,datum,what,branch,measured,sigma,model,residual,residual_over_sigma,unit" || len(lines) != 1+34 {
		t.Errorf("residuals: header %q, %d rows; want 34", lines[0], len(lines)-1)
	}
}

// TestFitBadInputs: mistakes on the command line or in a data file are
// usage errors naming the file, line and column; a request the server
// refuses exits 3 naming the request's fields.
func TestFitBadInputs(t *testing.T) {
	dir := t.TempDir()
	write := func(name, text string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	badHeader := write("bad-header.csv", "q1,q2,q3,freq,sigma\n0.1,0,0,1,0.1\n")
	badCell := write("bad-cell.csv", "q1,q2,q3,frequency_thz,sigma_thz\n0.1,0,0,1,0.1\n0.2,0,zero,1,0.1\n")
	extra := write("extra.csv", "frequency_thz,sigma_thz,colour\n1,0.1,red\n")
	ok := testdata("fit-chain-dispersion.csv")
	m := example("chain")
	tests := []struct {
		name string
		args []string
		code int
		want []string
	}{
		{"no data", []string{"-m", m, "--free", "springs[0].k_long"}, exitUsage, []string{"--data FILE.csv is required"}},
		{"no free", []string{"-m", m, "--data", ok}, exitUsage, []string{"--free PATH is required"}},
		{"unknown header", []string{"-m", m, "--data", badHeader, "--free", "springs[0].k_long"}, exitUsage, []string{"bad-header.csv:1", "names no data kind"}},
		{"bad cell", []string{"-m", m, "--data", badCell, "--free", "springs[0].k_long"}, exitUsage, []string{"bad-cell.csv:3: column 3", `"zero" is not a finite number`}},
		{"extra column", []string{"-m", m, "--data", extra, "--free", "springs[0].k_long"}, exitUsage, []string{"extra.csv:1: column 3", `"colour"`}},
		{"bound syntax", []string{"-m", m, "--data", ok, "--free", "springs[0].k_long", "--bound", "springs[0].k_long=1"}, exitUsage, []string{"PATH=lo:hi"}},
		{"bound not free", []string{"-m", m, "--data", ok, "--free", "springs[0].k_long", "--bound", "springs[0].k_trans=0:1"}, exitUsage, []string{"not a --free parameter"}},
		{"tie syntax", []string{"-m", m, "--data", ok, "--free", "springs[0].k_long", "--tie", "springs[0].k_trans"}, exitUsage, []string{"PATH=OTHER"}},
		{"fitted npz", []string{"-m", m, "--data", ok, "--free", "springs[0].k_long", "--fitted", "x.npz"}, exitUsage, []string{".json, .pb or .binpb"}},
		{"server refuses", []string{"-m", m, "--data", ok, "--free", "springs[2].k_long,shells[0].k_long", "--tie", "springs[0].k_trans=springs[0].k_trans"}, exitInvalid,
			[]string{"free[0].path", "free[1].path", "ties[0].to"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			code, _, stderr := runCLI(t, append([]string{"fit"}, tc.args...)...)
			if code != tc.code {
				t.Fatalf("exit %d, want %d: %s", code, tc.code, stderr)
			}
			for _, w := range tc.want {
				if !strings.Contains(stderr, w) {
					t.Errorf("stderr lacks %q:\n%s", w, stderr)
				}
			}
		})
	}
}

// TestFitDataKinds: each documented header is recognised as its kind,
// whatever the column order; frequencies in meV and cm⁻¹ are converted
// to THz with the CODATA 2018 factors (1 THz = 4.135667697 meV =
// 33.35640952 cm⁻¹).
func TestFitDataKinds(t *testing.T) {
	for header, want := range map[string]string{
		"q1,q2,q3,frequency_thz,sigma_thz":                                                    "dispersion",
		"sigma_mev,frequency_mev,q3,q2,q1,polarization,branch":                                "dispersion",
		"frequency_cm-1,sigma_cm-1":                                                           "Γ frequencies",
		"frequency_thz,sigma_thz,branch":                                                      "Γ frequencies",
		"direction_x,direction_y,direction_z,velocity_km_s,sigma_km_s,branch":                 "sound velocities",
		"ij,elastic_constant_gpa,sigma_gpa":                                                   "elastic constants",
		"temperature_k,heat_capacity_j_per_mol_cells_k,sigma_heat_capacity_j_per_mol_cells_k": "heat capacities",
		"temperature_k,heat_capacity_j_per_kg_k,sigma_heat_capacity_j_per_kg_k":               "heat capacities",
	} {
		k, _, err := kindOf("f.csv", strings.Split(header, ","))
		if err != nil || k.name != want {
			t.Errorf("%s: kind %q, %v; want %s", header, k.name, err, want)
		}
	}
	for u, perTHz := range map[string]float64{"mev": 4.135667697, "cm-1": 33.35640952} {
		file := filepath.Join(t.TempDir(), "d.csv")
		if err := os.WriteFile(file, []byte("q1,q2,q3,frequency_"+u+",sigma_"+u+"\n0.1,0,0,10,1\n"), 0o644); err != nil {
			t.Fatal(err)
		}
		var f fitFlags
		f.data, f.free = listFlag{file}, listFlag{"springs[0].k_long"}
		f.unit = "thz"
		in, err := f.check(1)
		if err != nil {
			t.Fatal(err)
		}
		d := in.req.GetFrequencies()[0]
		if math.Abs(d.GetFrequencyThz()-10/perTHz) > 1e-8 || math.Abs(d.GetSigmaThz()-1/perTHz) > 1e-9 {
			t.Errorf("%s: %v ± %v THz; want %v ± %v", u, d.GetFrequencyThz(), d.GetSigmaThz(), 10/perTHz, 1/perTHz)
		}
	}
}
