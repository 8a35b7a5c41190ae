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
// example (Born charges) also the infrared CSV and figure.
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
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	want := 7*len(examples.Names()) + 2*polar
	if len(entries) != want {
		t.Errorf("demo wrote %d files; want %d", len(entries), want)
	}
	if polar == 0 {
		t.Error("no polar example: the demo should show an infrared response")
	}
	if !strings.Contains(out, fmt.Sprintf("wrote %d files (CSV tables, SVG figures)", want)) || !strings.Contains(out, mustAbs(t, dir)) {
		t.Errorf("summary does not name the folder and file count:\n%s", out)
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
