package main

import (
	"context"
	"math"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// TestShapePlotFiles: `shape --plot` draws PNG and SVG figures of 1D and 2D
// crystals end to end (embedded server); the SVG shows the caption with the
// arrow scale and the axis labels with units.
func TestShapePlotFiles(t *testing.T) {
	dir := t.TempDir()
	tests := []struct {
		name string
		args []string
		want []string // in the SVG text, besides the common caption
	}{
		{"chain", []string{"-m", example("chain"), "--q", "0.5"},
			[]string{"x, along the chain (Å)", "across the chain (Å)", "the displacement along the chain (longitudinal)", "branch 1", "THz"}},
		{"diatomic-chain", []string{"-m", example("diatomic-chain"), "--q", "0.5", "--branch", "2", "--phase", "0"},
			[]string{"x, along the chain (Å)", "snapshot at t = 0", "site:", "L", "H"}},
		{"square-net", []string{"-m", example("square-net"), "--q", "0.5,0", "--branch", "2"},
			[]string{"x (Å)", "y (Å)", "q = (0.5, 0)", "4×4 cells"}},
		{"honeycomb-in-plane", []string{"-m", testdata("honeycomb.json"), "--q", "0.5,0", "--branch", "5"},
			[]string{"x (Å)", "y (Å)", "in-plane displacement"}},
		{"honeycomb-out-of-plane", []string{"-m", testdata("honeycomb.json"), "--q", "0,0", "--branch", "3"},
			[]string{"circles: out-of-plane displacement"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			for _, kind := range []string{"png", "svg"} {
				file := filepath.Join(dir, tc.name+"."+kind)
				code, out, stderr := runCLI(t, append([]string{"shape", "--plot", file}, tc.args...)...)
				if code != exitOK {
					t.Fatalf("%s: exit %d: %s", kind, code, stderr)
				}
				if out != "" {
					t.Errorf("%s: --plot alone printed %q", kind, out)
				}
				if kind == "png" {
					if _, _, ink, _ := pngStats(t, file); ink < 0.01 {
						t.Errorf("%s is nearly blank (%.2f%% ink)", file, 100*ink)
					}
					continue
				}
				_, _, paths, text := svgStats(t, file)
				if paths == 0 {
					t.Errorf("%s draws no paths", file)
				}
				for _, w := range append([]string{"arrows ×", "largest displacement", "nearest-neighbour distance"}, tc.want...) {
					if !strings.Contains(text, w) {
						t.Errorf("%s lacks %q; has %q", file, w, text)
					}
				}
			}
		})
	}
}

// shapeFigureFor computes mode (q, branch) of an example crystal through
// the embedded server and lays out its figure.
func shapeFigureFor(t *testing.T, model string, q [3]float64, branch int, cells [3]int, po shapePlotOptions) (*shapeFigure, *modePattern) {
	t.Helper()
	crystal, err := client.LoadModel(model)
	if err != nil {
		t.Fatal(err)
	}
	cl, stop, err := connect("")
	if err != nil {
		t.Fatal(err)
	}
	defer stop()
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	resp, err := cl.Modes(ctx, &modegridv1.ComputeModesRequest{Model: client.Inline(crystal), Eigenvectors: true,
		Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: []*modegridv1.QPoint{{Q1: q[0], Q2: q[1], Q3: q[2]}}}}}})
	if err != nil {
		t.Fatal(err)
	}
	d, p := dims(crystal)
	o := shapeOptions{q: q, branch: branch, amplitudeA: 0.1, cells: cells, frames: 1}
	m, err := newModePattern(crystal, p, resp.GetPoints()[0], o)
	if err != nil {
		t.Fatal(err)
	}
	f, err := buildShapeFigure(crystal, d, p, m, o, po)
	if err != nil {
		t.Fatal(err)
	}
	checkPNGText(t, f.figure(), []string{f.caption[0]})
	return f, m
}

// TestShapePlotZoneBoundary: at q = ½ the monatomic chain's mode is
// u_n ∝ (−1)ⁿ (derived: exp(i2π·½·n)), so the arrows alternate in sign
// from cell to cell with equal length, and the largest is the stated
// fraction of the nearest-neighbour distance (the lattice constant, 2.5 Å
// in the example). In the diatomic chain's optical mode at q = ½ the heavy
// site stands still (derived from the 2×2 dynamical matrix with equal
// springs: its off-diagonal 2k cos(qa/2) vanishes at the zone boundary,
// Ashcroft & Mermin ch. 22), and the light one alternates.
func TestShapePlotZoneBoundary(t *testing.T) {
	po := shapePlotOptions{peakPhase: true, arrowFrac: 0.4}
	f, _ := shapeFigureFor(t, example("chain"), [3]float64{0.5}, 1, [3]int{6, 1, 1}, po)
	if len(f.arrows) != 6 {
		t.Fatalf("%d arrows; want 6 (one per atom, p = 1)", len(f.arrows))
	}
	if want := 0.4 * 2.5; math.Abs(math.Abs(f.arrows[0].D[0])-want) > 1e-9 {
		t.Errorf("largest arrow %.6f Å; want %.6f (0.4 × 2.5 Å)", math.Abs(f.arrows[0].D[0]), want)
	}
	for i := 1; i < len(f.arrows); i++ {
		a, b := f.arrows[i-1].D[0], f.arrows[i].D[0]
		if math.Abs(a+b) > 1e-9*math.Abs(a) || a == 0 {
			t.Errorf("arrows %d, %d: %.6f, %.6f Å; want equal and opposite", i-1, i, a, b)
		}
		if f.arrows[i].D[1] != 0 || f.arrows[i].Comp != arrowLong {
			t.Errorf("arrow %d: %+v; want longitudinal only", i, f.arrows[i])
		}
	}
	f, m := shapeFigureFor(t, example("diatomic-chain"), [3]float64{0.5}, 2, [3]int{4, 1, 1}, po)
	var light []float64
	for _, a := range f.arrows {
		switch m.labels[a.Atom] {
		case "H":
			if math.Abs(a.D[0]) > 1e-6 {
				t.Errorf("heavy atom %d moves by %.6f Å in the figure; want 0", a.Atom, a.D[0])
			}
		case "L":
			light = append(light, a.D[0])
		}
	}
	for i := 1; i < len(light); i++ {
		if light[i]*light[i-1] >= 0 {
			t.Errorf("light-site arrows %v do not alternate in sign cell to cell", light)
			break
		}
	}
}

// TestShapePlotPeakPhase: on a standing wave the peak phase is a turning
// point, where the largest displacement is the amplitude; for the square
// net at q = (½, 0) every atom moves equally (|cos πn| = 1).
func TestShapePlotPeakPhase(t *testing.T) {
	f, _ := shapeFigureFor(t, example("square-net"), [3]float64{0.5, 0}, 2, [3]int{4, 4, 1}, shapePlotOptions{peakPhase: true, arrowFrac: 0.5})
	if math.Abs(f.largestA-0.1) > 1e-9 {
		t.Errorf("largest displacement %.9f Å; want 0.1 (the amplitude)", f.largestA)
	}
	for _, a := range f.arrows {
		if l := math.Hypot(a.D[0], a.D[1]); math.Abs(l-0.5*3) > 1e-9 {
			t.Errorf("arrow of atom %d is %.6f Å long; want 1.5 (0.5 × 3 Å)", a.Atom, l)
		}
	}
}

// TestShapePlotRefused: 3D crystals and bad plot flags are refused before
// any work, with the flag named.
func TestShapePlotRefused(t *testing.T) {
	dir := t.TempDir()
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"-m", example("fcc"), "--q", "0.5,0,0.5", "--plot", filepath.Join(dir, "fcc.png")}, "--plot draws 1D and 2D crystals only; this crystal is 3D: write --xyz FILE"},
		{[]string{"-m", example("chain"), "--q", "0.5", "--plot", filepath.Join(dir, "x.pdf")}, "must end in .png or .svg"},
		{[]string{"-m", example("chain"), "--q", "0.5", "--plot", filepath.Join(dir, "x.png"), "--phase", "90"}, "--phase must be peak or 0"},
		{[]string{"-m", example("chain"), "--q", "0.5", "--plot", filepath.Join(dir, "x.png"), "--arrow-length", "0"}, "--arrow-length must be"},
		{[]string{"-m", example("square-net"), "--q", "0,0", "--plot", filepath.Join(dir, "x.png"), "--cells", "100x100"}, "atoms a figure can show"},
	} {
		code, _, stderr := runCLI(t, append([]string{"shape"}, tc.args...)...)
		if code != exitUsage || !strings.Contains(stderr, tc.want) {
			t.Errorf("%v: exit %d, stderr %q; want exit %d with %q", tc.args, code, stderr, exitUsage, tc.want)
		}
	}
}

// TestRepeatCells: the default block for a figure is whole periodic blocks
// of at least 4 cells per lattice vector, untouched past d.
func TestRepeatCells(t *testing.T) {
	for _, tc := range []struct {
		in   [3]int
		d    int
		want [3]int
	}{
		{[3]int{1, 1, 1}, 1, [3]int{4, 1, 1}},
		{[3]int{2, 3, 1}, 2, [3]int{4, 6, 1}},
		{[3]int{8, 5, 1}, 2, [3]int{8, 5, 1}},
	} {
		if got := repeatCells(tc.in, tc.d, 4); got != tc.want {
			t.Errorf("repeatCells(%v, %d) = %v; want %v", tc.in, tc.d, got, tc.want)
		}
	}
}
