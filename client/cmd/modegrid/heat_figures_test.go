package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestHeatFigures draws the heat figures end to end (embedded server,
// real computations): α(T) and Cp(T) with measured points, κ(T) of three
// sample sizes on one figure, the cumulative curves; each as PNG (not
// blank) and SVG (its legend text present). -update-figures keeps the
// PNGs in testdata/figures.
func TestHeatFigures(t *testing.T) {
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
		text []string // in the SVG
	}{
		{"qha-fcc-measured", []string{"qha", "--models", heatModels, "--energies", heatEnergies, "--grid", "6", "--temps", "0:600:20",
			"--measured", filepath.Join("testdata", "heat", "measured-cp.csv") + "," + filepath.Join("testdata", "heat", "measured-alpha.csv")},
			[]string{"Cp", "Cv", "measured ± σ", "linear expansion"}},
		{"conductivity-fcc-sizes", []string{"conductivity", "-m", example("fcc"), "--grid", "8", "--temps", "5:400:5",
			"--samples", "film:20nm grain:200nm grain:2um", "--gruneisen", "1.5", "--g2", "2e-4"},
			[]string{"film 20 nm", "grain 200 nm", "grain 2 µm", "thermal conductivity"}},
		{"conductivity-fcc-cumulative", []string{"conductivity", "-m", example("fcc"), "--grid", "8", "--samples", "bulk grain:100nm",
			"--gruneisen", "1.5", "--cumulative", "300"},
			[]string{"mean free path", "cumulative", "bulk", "grain 100 nm"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			for _, kind := range []string{"png", "svg"} {
				file := filepath.Join(dir, tc.name+"."+kind)
				code, _, stderr := runCLI(t, append(tc.args, "--plot", file)...)
				if code != exitOK {
					t.Fatalf("exit %d: %s", code, stderr)
				}
				if kind == "png" {
					if _, _, ink, _ := pngStats(t, file); ink < 0.01 {
						t.Errorf("%s is nearly blank (%.2f%% ink)", file, 100*ink)
					}
					continue
				}
				_, _, _, text := svgStats(t, file)
				for _, w := range tc.text {
					if !strings.Contains(text, w) {
						t.Errorf("%s lacks %q", file, w)
					}
				}
			}
		})
	}
}
