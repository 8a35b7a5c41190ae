package main

import (
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
// with their documented headers and three figures that parse; for the
// rock-salt-like example besides, its scattering lines and map.
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
	for _, name := range examples.Names() {
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
	if want := 7*len(examples.Names()) + 2; len(entries) != want {
		t.Errorf("demo wrote %d files; want %d", len(entries), want)
	}
	if !strings.Contains(out, "wrote 37 files (CSV tables, SVG figures)") || !strings.Contains(out, mustAbs(t, dir)) {
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

var thermalHeaderLine = strings.Join(thermalHeader(basisAtoms), ",")

func mustAbs(t *testing.T, p string) string {
	t.Helper()
	a, err := filepath.Abs(p)
	if err != nil {
		t.Fatal(err)
	}
	return a
}
