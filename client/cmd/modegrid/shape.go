package main

import (
	"bufio"
	"flag"
	"fmt"
	"io"
	"math"
	"math/cmplx"
	"os"
	"strings"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const shapeSummary = `The motion of one normal mode, as a multi-frame XYZ trajectory (--xyz
FILE, or - for stdout): per frame a line with the atom count, a comment
line, then "label x y z" (Å) per atom of a block of --cells cells. Site s of
cell n moves by Re[A e_s(q) exp(i(2π q·n − ωt))]/sqrt(m_s) (the engine's
cell phase convention: eigenvectors carry the phase within the cell), A
scaled so that the largest site amplitude is --amplitude Å; the --frames
frames sample one period. The default block is the fewest cells (up to 12
per lattice vector) on which the mode is periodic.

--plot FILE.png|.svg draws, for a 1D or 2D crystal, the sites of the block
at rest (coloured by site) with arrows for the displacement at one phase
(--phase peak: the phase of largest total displacement, or 0: t = 0), the
largest arrow --arrow-length times the nearest-neighbour distance; the
caption states the scale. With --plot and no --cells, the periodic block
is repeated to at least 4 cells per lattice vector. 3D crystals: use --xyz
and a molecular viewer.`

// shapeOptions are the parsed flags of `shape`.
type shapeOptions struct {
	q          [3]float64
	branch     int     // 1-based
	amplitudeA float64 // largest site amplitude, Å
	cells      [3]int
	frames     int
}

// shapeFlags are the flags of `shape` beyond the model, connection and
// output ones.
type shapeFlags struct {
	q          string
	branch     int
	amplitudeA float64
	cells      string
	frames     int
	xyz        string
	phase      string
	arrowFrac  float64
}

// register defines the flags on fs.
func (f *shapeFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&f.q, "q", "", "the q-point, fractional reciprocal coordinates: q1[,q2[,q3]]")
	fs.IntVar(&f.branch, "branch", 1, "the branch, 1 = lowest frequency at q")
	fs.Float64Var(&f.amplitudeA, "amplitude", 0.1, "largest site displacement amplitude, Å")
	fs.StringVar(&f.cells, "cells", "", "block of N1xN2xN3 cells to show (default: the fewest on which the mode is periodic)")
	fs.IntVar(&f.frames, "frames", 20, "frames per period")
	fs.StringVar(&f.xyz, "xyz", "", "write the trajectory to this XYZ file (- for stdout)")
	fs.StringVar(&f.phase, "phase", "peak", "--plot snapshot: peak (the phase of largest total displacement) or 0 (t = 0)")
	fs.Float64Var(&f.arrowFrac, "arrow-length", 0.4, "--plot: the largest arrow as a fraction of the nearest-neighbour distance")
}

// check checks the flags that need no model (plot: --plot was given) and
// returns the q-point and the figure's options.
func (f *shapeFlags) check(plot bool) ([3]float64, shapePlotOptions, error) {
	if f.xyz == "" && !plot {
		return [3]float64{}, shapePlotOptions{}, usagef("--xyz FILE (- for stdout) or --plot FILE.png|.svg is required")
	}
	po, err := parseShapePlot(f.phase, f.arrowFrac)
	if err != nil {
		return [3]float64{}, po, err
	}
	if f.q == "" {
		return [3]float64{}, po, usagef("--q is required")
	}
	qs, err := parseQList(f.q)
	if err != nil {
		return [3]float64{}, po, usagef("--q: %v", err)
	}
	if len(qs) != 1 {
		return [3]float64{}, po, usagef("--q: one q-point, got %d", len(qs))
	}
	switch {
	case f.branch < 1:
		return qs[0], po, usagef("--branch must be ≥ 1, got %d", f.branch)
	case !(f.amplitudeA > 0) || math.IsInf(f.amplitudeA, 0):
		return qs[0], po, usagef("--amplitude must be a number of Å > 0, got %v", f.amplitudeA)
	case f.frames < 1 || f.frames > 10000:
		return qs[0], po, usagef("--frames must be in [1, 10000], got %d", f.frames)
	}
	return qs[0], po, nil
}

// options checks the flags against the crystal (d dimensions; plot:
// --plot was given) and returns the mode to show and the block of cells:
// --cells, or the default block (repeated for a figure).
func (f *shapeFlags) options(q [3]float64, crystal *modegridv1.Crystal, d int, plot bool) (shapeOptions, error) {
	if plot && (d < 1 || d > 2) {
		return shapeOptions{}, usagef("--plot draws 1D and 2D crystals only; this crystal is %dD: write --xyz FILE and play it in a molecular viewer", d)
	}
	opt := shapeOptions{q: q, branch: f.branch, amplitudeA: f.amplitudeA, frames: f.frames, cells: defaultShapeCells(q, d)}
	if plot {
		opt.cells = repeatCells(opt.cells, d, 4)
	}
	if f.cells == "" {
		return opt, nil
	}
	mesh, err := parseMesh(f.cells)
	if err != nil {
		return opt, usagef("--cells: %v", err)
	}
	mesh = expandMesh(mesh, d)
	if len(mesh) != d {
		return opt, usagef("--cells: %d numbers for a %d-dimensional crystal", len(mesh), d)
	}
	opt.cells = [3]int{1, 1, 1}
	total := 1
	for k, n := range mesh {
		opt.cells[k] = int(n)
		total *= int(n)
	}
	sites := len(crystal.GetSites())
	if total*sites > 1_000_000 {
		return opt, usagef("--cells: %s cells of %d sites is over a million atoms", f.cells, sites)
	}
	if plot && total*sites > maxShapePlotAtoms {
		return opt, usagef("--cells: %s cells of %d sites is over the %d atoms a figure can show legibly", f.cells, sites, maxShapePlotAtoms)
	}
	return opt, nil
}

// cmdShape shows one normal mode: as an XYZ trajectory (--xyz) and/or a
// figure of the displacements (--plot).
func cmdShape(args []string, e *env) error {
	c := newModelCommand("shape", true)
	var f shapeFlags
	f.register(c.fs)
	if err := c.parse(args, e, shapeSummary); err != nil {
		return err
	}
	plot := c.out.plot != ""
	q, po, err := f.check(plot)
	if err != nil {
		return err
	}
	crystal, err := c.m.load()
	if err != nil {
		return err
	}
	d, p := dims(crystal)
	opt, err := f.options(q, crystal, d, plot)
	if err != nil {
		return err
	}
	pm, err := c.shapeModes(crystal, opt)
	if err != nil {
		return err
	}
	if plot {
		if err := plotShape(c.out.plot, c.out.kind, crystal, d, p, pm, opt, po); err != nil {
			return err
		}
	}
	if f.xyz == "" {
		return nil
	}
	tr, err := modeTrajectory(crystal, p, pm, opt)
	if err != nil {
		return err
	}
	return writeShapeXYZ(f.xyz, e.stdout, tr)
}

// shapeModes asks the server for the frequencies and eigenvectors at
// opt.q and checks that opt.branch is one of them.
func (c *modelCommand) shapeModes(crystal *modegridv1.Crystal, opt shapeOptions) (*modegridv1.Modes, error) {
	cl, ctx, release, err := c.dial()
	if err != nil {
		return nil, err
	}
	defer release()
	resp, err := cl.Modes(ctx, &modegridv1.ComputeModesRequest{Model: c.source(crystal), Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_THZ,
		Qpoints:      &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: []*modegridv1.QPoint{{Q1: opt.q[0], Q2: opt.q[1], Q3: opt.q[2]}}}}},
		Eigenvectors: true})
	if err != nil {
		return nil, err
	}
	pts := resp.GetPoints()
	if len(pts) != 1 {
		return nil, fmt.Errorf("the server sent %d points for one q-point", len(pts))
	}
	if n := len(pts[0].GetFrequencies()); opt.branch > n {
		return nil, usagef("--branch must be ≤ %d (the modes per cell), got %d", n, opt.branch)
	}
	return pts[0], nil
}

// writeShapeXYZ writes the trajectory to file, or to stdout for "-".
func writeShapeXYZ(file string, stdout io.Writer, tr *trajectory) error {
	if file == "-" {
		return tr.writeXYZ(stdout)
	}
	f, err := os.Create(file)
	if err != nil {
		return fmt.Errorf("cannot write the output: %w", err)
	}
	if err := tr.writeXYZ(f); err != nil {
		f.Close()
		return fmt.Errorf("cannot write the output: %w", err)
	}
	return f.Close()
}

// maxShapePlotAtoms bounds the atoms of a mode-shape figure.
const maxShapePlotAtoms = 5000

// parseShapePlot checks --phase and --arrow-length.
func parseShapePlot(phase string, frac float64) (shapePlotOptions, error) {
	var po shapePlotOptions
	switch strings.ToLower(strings.TrimSpace(phase)) {
	case "peak":
		po.peakPhase = true
	case "0":
	default:
		return po, usagef("--phase must be peak or 0, got %q", phase)
	}
	if !(frac > 0 && frac <= 2) {
		return po, usagef("--arrow-length must be a fraction of the nearest-neighbour distance in (0, 2], got %v", frac)
	}
	po.arrowFrac = frac
	return po, nil
}

// repeatCells repeats the block along each of the d lattice vectors until
// it has at least n cells (a whole number of blocks: still periodic).
func repeatCells(cells [3]int, d, n int) [3]int {
	for k := 0; k < d; k++ {
		for r := cells[k]; cells[k] < n; {
			cells[k] += r
		}
	}
	return cells
}

// plotShape draws the mode-shape figure of mode pm into file as kind.
func plotShape(file, kind string, c *modegridv1.Crystal, d, p int, pm *modegridv1.Modes, o shapeOptions, po shapePlotOptions) error {
	m, err := newModePattern(c, p, pm, o)
	if err != nil {
		return err
	}
	f, err := buildShapeFigure(c, d, p, m, o, po)
	if err != nil {
		return err
	}
	return f.figure().write(file, kind)
}

// defaultShapeCells is, per lattice vector, the fewest cells N ≤ 12 with
// N·q_k an integer (the mode is then periodic on the block, so the frames
// tile space and loop); 8 when there is none; 1 past the dimensionality.
func defaultShapeCells(q [3]float64, d int) [3]int {
	out := [3]int{1, 1, 1}
	for k := 0; k < d; k++ {
		out[k] = 8
		for n := 1; n <= 12; n++ {
			x := float64(n) * q[k]
			if math.Abs(x-math.Round(x)) < 1e-9 {
				out[k] = n
				break
			}
		}
	}
	return out
}

// trajectory is the frames of a mode's motion: labels[i] and
// frames[f][i] (Cartesian Å) for every atom of the block.
type trajectory struct {
	labels  []string
	frames  [][][3]float64
	comment []string // one per frame
}

// modePattern is one mode on a block of cells, the single place the CLI
// turns an eigenvector into atom displacements (the XYZ frames and the
// figure both read it): atom i (site[i] of cell[i]) rests at rest[i] and is
// displaced by Re[disp[i] exp(−iωt)] (Cartesian Å).
type modePattern struct {
	labels []string
	site   []int
	cell   [][3]int
	rest   [][3]float64
	disp   [][3]complex128
	nuTHz  float64
}

// newModePattern computes the pattern: disp = A e_s exp(i 2π q·n)/sqrt(m_s)
// (the cell phase convention: the phase between cells from the cell offset
// n only), the eigenvector's global phase fixed so that its largest
// component is real and positive (ωt = 0 is then a turning point of that
// atom), A such that the largest site amplitude is o.amplitudeA.
func newModePattern(c *modegridv1.Crystal, pol int, pm *modegridv1.Modes, o shapeOptions) (*modePattern, error) {
	sites := c.GetSites()
	e, err := branchEigenvector(pm, len(sites)*pol, o.branch)
	if err != nil {
		return nil, err
	}
	// Scale: the largest |e_s|/sqrt(m_s) becomes the amplitude.
	var peak float64
	for s, site := range sites {
		var l2 float64
		for a := 0; a < pol; a++ {
			l2 += real(e[s*pol+a] * cmplx.Conj(e[s*pol+a]))
		}
		peak = math.Max(peak, math.Sqrt(l2/site.GetMassAmu()))
	}
	if !(peak > 0) {
		return nil, fmt.Errorf("branch %d at q has a zero eigenvector", o.branch)
	}
	amp := o.amplitudeA / peak
	m := &modePattern{nuTHz: pm.GetFrequencies()[o.branch-1]}
	for n1 := 0; n1 < o.cells[0]; n1++ {
		for n2 := 0; n2 < o.cells[1]; n2++ {
			for n3 := 0; n3 < o.cells[2]; n3++ {
				cell := [3]int{n1, n2, n3}
				phase := 2 * math.Pi * (o.q[0]*float64(n1) + o.q[1]*float64(n2) + o.q[2]*float64(n3))
				for s, site := range sites {
					w := cmplx.Exp(complex(0, phase)) * complex(amp/math.Sqrt(site.GetMassAmu()), 0)
					var u [3]complex128
					for a := 0; a < pol; a++ {
						u[a] = e[s*pol+a] * w
					}
					m.labels = append(m.labels, site.GetLabel())
					m.site = append(m.site, s)
					m.cell = append(m.cell, cell)
					m.rest = append(m.rest, restPosition(c, s, cell))
					m.disp = append(m.disp, u)
				}
			}
		}
	}
	return m, nil
}

// branchEigenvector is the eigenvector of a 1-based branch, its global
// phase fixed so that its largest component is real and positive.
func branchEigenvector(pm *modegridv1.Modes, n, branch int) ([]complex128, error) {
	b := branch - 1
	raw := pm.GetEigenvectors()
	if len(raw) != 2*n*len(pm.GetFrequencies()) {
		return nil, fmt.Errorf("the server sent %d eigenvector numbers for %d modes of %d components", len(raw), len(pm.GetFrequencies()), n)
	}
	e := make([]complex128, n)
	big := 0
	for i := range e {
		e[i] = complex(raw[2*(b*n+i)], raw[2*(b*n+i)+1])
		if cmplx.Abs(e[i]) > cmplx.Abs(e[big]) {
			big = i
		}
	}
	if a := cmplx.Abs(e[big]); a > 0 {
		g := cmplx.Conj(e[big]) / complex(a, 0)
		for i := range e {
			e[i] *= g
		}
	}
	return e, nil
}

// restPosition is R_n + τ_s in Cartesian Å.
func restPosition(c *modegridv1.Crystal, s int, cell [3]int) [3]float64 {
	lat, frac := c.GetLattice(), c.GetSites()[s].GetFrac()
	var r [3]float64
	for k := 0; k < 3 && k < len(lat); k++ {
		x := float64(cell[k])
		if k < len(frac) {
			x += frac[k]
		}
		v := [3]float64{lat[k].GetX(), lat[k].GetY(), lat[k].GetZ()}
		for a := range r {
			r[a] += x * v[a]
		}
	}
	return r
}

// at is the displacement of every atom at phase ωt (radians), Å.
func (m *modePattern) at(wt float64) [][3]float64 {
	rot := cmplx.Exp(complex(0, -wt))
	out := make([][3]float64, len(m.disp))
	for i, u := range m.disp {
		for a := range u {
			out[i][a] = real(u[a] * rot)
		}
	}
	return out
}

// modeTrajectory samples the pattern at ωt = 2π f/F for the F frames.
func modeTrajectory(c *modegridv1.Crystal, pol int, pm *modegridv1.Modes, o shapeOptions) (*trajectory, error) {
	m, err := newModePattern(c, pol, pm, o)
	if err != nil {
		return nil, err
	}
	tr := &trajectory{labels: m.labels}
	for f := 0; f < o.frames; f++ {
		t := 2 * math.Pi * float64(f) / float64(o.frames) // ωt
		pos := m.at(t)
		for i := range pos {
			for a := range pos[i] {
				pos[i][a] += m.rest[i][a]
			}
		}
		tr.frames = append(tr.frames, pos)
		tr.comment = append(tr.comment, fmt.Sprintf("%s q=(%g,%g,%g) branch %d frequency %.6g THz%s frame %d/%d phase %.4f rad amplitude %g Angstrom cells %dx%dx%d",
			strings.ReplaceAll(c.GetName(), "\n", " "), o.q[0], o.q[1], o.q[2], o.branch, m.nuTHz, imaginaryNote(m.nuTHz), f+1, o.frames, t, o.amplitudeA, o.cells[0], o.cells[1], o.cells[2]))
	}
	return tr, nil
}

// imaginaryNote marks an imaginary mode, whose pattern grows instead of
// oscillating: the frames then cycle the pattern's phase only.
func imaginaryNote(nu float64) string {
	if nu < 0 {
		return " (imaginary: the frames cycle the pattern's phase; it does not oscillate)"
	}
	return ""
}

// writeXYZ writes the frames in the XYZ format: atom count, comment, then
// "label x y z" per atom.
func (tr *trajectory) writeXYZ(w io.Writer) error {
	bw := bufio.NewWriter(w)
	for f, pos := range tr.frames {
		fmt.Fprintf(bw, "%d\n%s\n", len(pos), tr.comment[f])
		for i, r := range pos {
			label := tr.labels[i]
			if label == "" || strings.ContainsAny(label, " \t") {
				label = "X"
			}
			fmt.Fprintf(bw, "%s %.6f %.6f %.6f\n", label, r[0], r[1], r[2])
		}
	}
	return bw.Flush()
}
