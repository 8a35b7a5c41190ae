package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/proto/examples"
)

// TestDemo runs the demo end to end on every built-in example (small grid
// to stay fast): exit 0, a summary row per example, and per example four
// CSV files with their documented headers and three figures that decode.
func TestDemo(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "out")
	code, out, stderr := runCLI(t, "demo", "--dir", dir, "--grid", "6")
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
		for _, fig := range []string{"-dispersion.png", "-dos.png", "-thermal.png"} {
			_, _, ink, _ := pngStats(t, filepath.Join(dir, name+fig))
			if ink < 0.01 {
				t.Errorf("%s%s is nearly blank (%.2f%% ink)", name, fig, 100*ink)
			}
		}
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if want := 7 * len(examples.Names()); len(entries) != want {
		t.Errorf("demo wrote %d files; want %d", len(entries), want)
	}
	if !strings.Contains(out, "wrote 35 files") || !strings.Contains(out, mustAbs(t, dir)) {
		t.Errorf("summary does not name the folder and file count:\n%s", out)
	}
}

// TestDemoSVG: --plot-format svg writes SVG figures that parse.
func TestDemoSVG(t *testing.T) {
	dir := t.TempDir()
	code, _, stderr := runCLI(t, "demo", "--dir", dir, "--grid", "4", "--examples", "square-net", "--plot-format", "svg")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	for _, fig := range []string{"-dispersion.svg", "-dos.svg", "-thermal.svg"} {
		_, _, paths, text := svgStats(t, filepath.Join(dir, "square-net"+fig))
		if paths < 10 || !strings.Contains(text, "square-net") {
			t.Errorf("%s: %d paths, text %q", fig, paths, text)
		}
	}
}

var thermalHeaderLine = strings.Join(thermalHeader, ",")

func mustAbs(t *testing.T, p string) string {
	t.Helper()
	a, err := filepath.Abs(p)
	if err != nil {
		t.Fatal(err)
	}
	return a
}
