package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func runCLI(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := run(args, &out, &errb)
	return code, out.String(), errb.String()
}

var exampleDir = filepath.Join("..", "..", "..", "proto", "examples")

func TestModesCSVHeader(t *testing.T) {
	code, out, errs := runCLI(t, "modes", "--model", filepath.Join(exampleDir, "fcc.json"), "--q", "0,0,0;0.5,0,0.5", "--format", "csv")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if lines[0] != "q1,q2,q3,branch,frequency_thz" {
		t.Errorf("header %q", lines[0])
	}
	if len(lines) != 1+2*3 { // 2 q-points × 3 branches
		t.Errorf("got %d lines; want 7", len(lines))
	}
}

// TestInvalidModelExit: an invalid model exits 3 and names every bad field.
func TestInvalidModelExit(t *testing.T) {
	bad := `{
  "lattice": [{"x": 1}, {"x": 2}],
  "sites": [{"label": "A", "massAmu": -1, "frac": [0, 0]},
            {"label": "B", "massAmu": "NaN", "frac": [0.5, 0.5]}],
  "springs": [{"from": 0, "to": 5, "cell": [0, 0], "kLong": 1}]
}`
	path := filepath.Join(t.TempDir(), "bad.json")
	if err := os.WriteFile(path, []byte(bad), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, errs := runCLI(t, "modes", "-m", path, "--q", "0,0")
	if code != exitInvalid {
		t.Fatalf("exit %d; want %d; stderr: %s", code, exitInvalid, errs)
	}
	for _, f := range []string{"lattice", "sites[0].mass_amu: must be > 0, got -1", "sites[1].mass_amu", "springs[0].to"} {
		if !strings.Contains(errs, f) {
			t.Errorf("stderr does not name %q:\n%s", f, errs)
		}
	}
}

func TestUsageExit(t *testing.T) {
	if code, _, _ := runCLI(t, "modes", "--q", "0"); code != exitUsage {
		t.Errorf("missing --model: exit %d; want %d", code, exitUsage)
	}
	if code, _, _ := runCLI(t, "nonsense"); code != exitUsage {
		t.Errorf("unknown command: exit %d; want %d", code, exitUsage)
	}
}
