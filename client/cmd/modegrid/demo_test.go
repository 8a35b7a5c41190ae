package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gonum.org/v1/plot/vg"

	"github.com/materials-lab/modegrid/proto/examples"
)

// TestDemo runs the demo end to end on every built-in example (small grid
// and SVG figures to stay fast under -race; TestDemoPNG covers the default
// PNG): exit 0, a summary row per example, and per example four CSV files
// with their documented headers and three figures that parse; for a polar
// example (Born charges) also the infrared CSV and figure, for the
// rock-salt-like example its scattering lines and map.
func TestDemo(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "out")
	code, out, stderr := runCLI(t, "demo", "--dir", dir, "--grid", "6", "--plot-format", "svg")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	checkGolden(t, filepath.Join("testdata", "golden", "demo-summary.txt"), strings.ReplaceAll(out, mustAbs(t, dir), "DIR"))
	headers := map[string]string{
		"-check.csv":   "property,value",
		"-path.csv":    "distance,label,q1,q2,q3,branch,frequency_thz",
		"-dos.csv":     "frequency_thz,dos,integrated,dos_",
		"-thermal.csv": thermalHeaderLine,
	}
	polar := 0
	for _, name := range examples.Names() {
		if c, err := examples.Load(name); err != nil {
			t.Fatal(err)
		} else if len(c.GetEpsilonInf()) > 0 {
			polar++
			checkInfraredDemo(t, dir, name)
		}
		if !strings.Contains(out, name) {
			t.Errorf("summary lacks %s:\n%s", name, out)
		}
		for suffix, head := range headers {
			b, err := os.ReadFile(filepath.Join(dir, name+suffix))
			if err != nil {
				t.Error(err)
				continue
			}
			if first, _, _ := strings.Cut(string(b), "\n"); !strings.HasPrefix(first, head) {
				t.Errorf("%s%s header %q; want %q", name, suffix, first, head)
			}
		}
		for _, fig := range []string{"-dispersion.svg", "-dos.svg", "-thermal.svg"} {
			if _, _, paths, text := svgStats(t, filepath.Join(dir, name+fig)); paths < 10 || !strings.Contains(text, name) {
				t.Errorf("%s%s: %d paths, text %q", name, fig, paths, text)
			}
		}
	}
	// The rock-salt-like example adds its neutron scattering map and the
	// lines it shows.
	b, err := os.ReadFile(filepath.Join(dir, demoScatterExample+"-scatter-lines.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if first, _, _ := strings.Cut(string(b), "\n"); first != "distance_invA,label,q1,q2,q3,qx_invA,qy_invA,qz_invA,h,k,l,mode,energy_mev,creation_barn_per_sr,annihilation_barn_per_sr" {
		t.Errorf("scatter lines header %q", first)
	}
	if _, _, paths, text := svgStats(t, filepath.Join(dir, demoScatterExample+"-scatter.svg")); paths < 10 ||
		!strings.Contains(text, "S(Q, E) (barn/(sr·meV) per cell)") || !strings.Contains(text, "222") {
		t.Errorf("scatter map: %d paths, text %q", paths, text)
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	want := 7*len(examples.Names()) + 2*polar + 2 + 4 + 4 // + the scattering map's 2, the heat section's 4, the fit's 4
	if len(entries) != want {
		t.Errorf("demo wrote %d files; want %d", len(entries), want)
	}
	if polar == 0 {
		t.Error("no polar example: the demo should show an infrared response")
	}
	if !strings.Contains(out, fmt.Sprintf("wrote %d files (CSV tables, SVG figures)", want)) || !strings.Contains(out, mustAbs(t, dir)) {
		t.Errorf("summary does not name the folder and file count:\n%s", out)
	}
	checkDemoFit(t, dir, out)
}

// checkDemoFit: the demo's fit says its data are invented, writes them as
// a fit data file that `fit` reads back to the same result, the parameter
// table, the fitted model and the figure, and prints each parameter with
// its error beside the invented truth.
func checkDemoFit(t *testing.T, dir, out string) {
	t.Helper()
	base := filepath.Join(dir, demoFitExample)
	data, err := os.ReadFile(base + "-fit-data.csv")
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(string(data), "# Invented") || !strings.Contains(string(data), "not real data") {
		t.Errorf("the demo's data file does not say it is invented:\n%.200s", data)
	}
	if !strings.Contains(out, "invented frequencies (not real data)") || !strings.Contains(out, "invented truth") {
		t.Errorf("the demo's fit table:\n%s", out)
	}
	code, again, stderr := runCLI(t, "fit", "-m", example(demoFitExample), "--data", base+"-fit-data.csv", "--free", strings.Join(demoFitPaths, ","), "--format", "csv")
	if code != exitOK {
		t.Fatalf("fit of the demo's data file: exit %d: %s", code, stderr)
	}
	table, err := os.ReadFile(base + "-fit.csv")
	if err != nil {
		t.Fatal(err)
	}
	if err := sameOutput(".csv", again, string(table)); err != nil {
		t.Errorf("fit of the demo's data file differs from the demo's table: %v", err)
	}
	if code, _, stderr := runCLI(t, "check", "-m", base+"-fitted.json"); code != exitOK {
		t.Errorf("the fitted model file does not check: %s", stderr)
	}
	if _, _, paths, text := svgStats(t, base+"-fit.svg"); paths < 20 || !strings.Contains(text, "fitted") {
		t.Errorf("%s-fit.svg: %d paths, text %q", base, paths, text)
	}
}

// TestDemoPNG: by default the demo writes PNG figures of the report size
// with visible content (one example, to stay fast).
func TestDemoPNG(t *testing.T) {
	dir := t.TempDir()
	code, out, stderr := runCLI(t, "demo", "--dir", dir, "--grid", "8", "--examples", "diatomic-chain")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if !strings.Contains(out, "wrote 7 files (CSV tables, PNG figures)") {
		t.Errorf("summary:\n%s", out)
	}
	for fig, size := range map[string][2]vg.Length{"-dispersion.png": dispersionSize, "-dos.png": dosSize, "-thermal.png": thermalSize} {
		w, h, ink, branch := pngStats(t, filepath.Join(dir, "diatomic-chain"+fig))
		if fig == "-dispersion.png" { // coloured by site: at the zone boundary each branch is on one site
			branch = pngHasColor(t, filepath.Join(dir, "diatomic-chain"+fig), siteColors[0]) && pngHasColor(t, filepath.Join(dir, "diatomic-chain"+fig), siteColors[1])
		}
		if w != pixels(size[0]) || h != pixels(size[1]) || ink < 0.01 || (fig != "-dos.png" && !branch) {
			t.Errorf("%s: %d×%d px, %.2f%% ink, branch colour %v", fig, w, h, 100*ink, branch)
		}
	}
}

// checkInfraredDemo checks a polar example's infrared files: the CSV
// header of the README and a figure with text and curves.
func checkInfraredDemo(t *testing.T, dir, name string) {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, name+"-infrared.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if first, _, _ := strings.Cut(string(b), "\n"); first != "frequency_cm-1,epsilon_real,epsilon_imag,reflectivity" {
		t.Errorf("%s-infrared.csv header %q", name, first)
	}
	if _, _, paths, text := svgStats(t, filepath.Join(dir, name+"-infrared.svg")); paths < 10 || !strings.Contains(text, "reflectivity") {
		t.Errorf("%s-infrared.svg: %d paths, text %q", name, paths, text)
	}
}

var thermalHeaderLine = strings.Join(thermalHeader(basisAtoms), ",")

func mustAbs(t *testing.T, p string) string {
	t.Helper()
	a, err := filepath.Abs(p)
	if err != nil {
		t.Fatal(err)
	}
	return a
}
