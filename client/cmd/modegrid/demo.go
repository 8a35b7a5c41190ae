package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"text/tabwriter"

	"github.com/materials-lab/modegrid/client"
	"github.com/materials-lab/modegrid/proto/examples"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const demoSummary = `Runs the main job on the built-in example crystals (invented models of a
chain, a two-site chain, a square net, an fcc crystal, a rock-salt-like
crystal and a polar one with Born charges): check, the dispersion along a
path, the DOS per site and the thermal properties, for the polar one its
infrared response (ε(ω) and the reflectivity along x, in cm⁻¹) and for
the rock-salt-like crystal the neutron scattering map S(Q, E) along a path
through four zones; then
the rock-salt-like crystal's thermal expansion and its thermal
conductivity for three grain sizes (volumes, energies and scattering
constants invented); then a fit of the rock-salt-like crystal's four shell
constants to 40 invented "measured" frequencies (its own, computed with
the constants changed by a few per cent and given seeded Gaussian noise:
not real data). Prints a summary table and the fitted parameters, and
writes CSV tables, the data, the fitted model and figures into --dir
(default ./demo-out). Without --server it starts an embedded server, as
every command does.`

// demoRow is one line of the summary.
type demoRow struct {
	name              string
	dim, sites, modes int
	stable            bool
	maxTHz            float64
	cv300, zpe        float64
	theta300          string // θ_D(300 K) as thetaCell prints it (one decimal)
}

func cmdDemo(args []string, e *env) error {
	fs := newFlagSet("demo")
	var conn connFlags
	conn.register(fs)
	dir := fs.String("dir", "demo-out", "folder for the CSV tables and figures (created if needed)")
	kind := fs.String("plot-format", "png", "figure format: png or svg")
	grid := fs.Uint("grid", 0, "grid divisions per direction for DOS, thermal and Debye–Waller factors (default: 512 in 1D, 64 in 2D, 24 in 3D)")
	only := fs.String("examples", "", "comma-separated example names (default: all)")
	if err := parse(fs, args, e.stderr, demoSummary); err != nil {
		return err
	}
	if err := conn.check(); err != nil {
		return err
	}
	if *kind != "png" && *kind != "svg" {
		return usagef("--plot-format must be png or svg, got %q", *kind)
	}
	names := examples.Names()
	if *only != "" {
		names = nil
		for _, n := range strings.Split(*only, ",") {
			n = strings.TrimSpace(n)
			if _, err := examples.JSON(n); err != nil {
				return usagef("--examples: %v", err)
			}
			names = append(names, n)
		}
	}
	if err := os.MkdirAll(*dir, 0o755); err != nil {
		return fmt.Errorf("cannot create the demo folder: %w", err)
	}
	cl, stop, err := connect(conn.server, conn.options()...)
	if err != nil {
		return err
	}
	defer stop()
	ctx, cancel := callContext()
	defer cancel()
	var rows []demoRow
	files := 0
	for _, name := range names {
		row, n, err := demoOne(ctx, cl, e, name, *dir, *kind, uint32(*grid))
		if err != nil {
			return fmt.Errorf("demo %s: %w", name, err)
		}
		rows = append(rows, row)
		files += n
	}
	var heat []string
	if slices.Contains(names, demoHeatExample) {
		lines, n, err := demoHeat(ctx, cl, e, *dir, *kind, uint32(*grid))
		if err != nil {
			return fmt.Errorf("demo heat: %w", err)
		}
		heat, files = lines, files+n
	}
	e.prog.clear()
	width := len("crystal")
	for _, r := range rows {
		width = max(width, len(r.name))
	}
	// Names left-aligned (padded here), numbers right-aligned.
	tw := tabwriter.NewWriter(e.stdout, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "%-*s\td\tsites\tmodes/cell\tstable\tmax ν (THz)\tCv(300 K) (J/(K·mol atoms))\tθD(300 K) (K)\tzero-point (kJ/mol atoms)\t\n", width, "crystal")
	for _, r := range rows {
		fmt.Fprintf(tw, "%-*s\t%d\t%d\t%d\t%s\t%.3f\t%.3f\t%s\t%.4f\t\n", width, r.name, r.dim, r.sites, r.modes,
			map[bool]string{true: "yes", false: "no"}[r.stable], r.maxTHz, r.cv300, r.theta300, r.zpe)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	for _, l := range heat {
		fmt.Fprintln(e.stdout, l)
	}
	if slices.Contains(names, demoFitExample) {
		n, err := demoFit(ctx, cl, e, *dir, *kind)
		if err != nil {
			return fmt.Errorf("demo fit: %w", err)
		}
		files += n
	}
	abs, err := filepath.Abs(*dir)
	if err != nil {
		abs = *dir
	}
	_, err = fmt.Fprintf(e.stdout, "\nwrote %d files (CSV tables, %s figures) to %s\n", files, strings.ToUpper(*kind), abs)
	return err
}

// demoOne runs the four steps on one example and writes its files: check,
// dispersion, DOS per site and thermal properties (one CSV each), then the
// three figures; for a polar example also the infrared response (CSV and
// figure). It returns the summary row and the number of files written.
func demoOne(ctx context.Context, cl *client.Client, e *env, name, dir, kind string, grid uint32) (demoRow, int, error) {
	crystal, err := examples.Load(name)
	if err != nil {
		return demoRow{}, 0, err
	}
	d, p := dims(crystal)
	row := demoRow{name: name, dim: d, sites: len(crystal.GetSites())}
	st := &demoStep{ctx: ctx, cl: cl, e: e, name: name, src: client.Inline(crystal), base: filepath.Join(dir, name)}

	chk, err := st.check(crystal.GetName())
	if err != nil {
		return row, st.files, err
	}
	row.modes, row.stable, row.maxTHz = int(chk.GetModesPerCell()), chk.GetStable(), chk.GetMaxFrequencyThz()
	disp, err := st.dispersion(chk)
	if err != nil {
		return row, st.files, err
	}
	mesh := grid
	if mesh == 0 {
		mesh = defaultMeshFor(d)
	}
	set := client.Grid(expandMesh([]uint32{mesh}, d)...)
	dos, err := st.dos(set)
	if err != nil {
		return row, st.files, err
	}
	th, err := st.thermal(set)
	if err != nil {
		return row, st.files, err
	}
	row.cv300, row.theta300 = thermalNear300(th)
	row.zpe = th.GetZeroPointEnergyKjPerMolAtoms()

	ext := "." + kind
	title := crystal.GetName() + " (example)"
	if err := plotDispersion(st.base+"-dispersion"+ext, kind, dispersionFigure{disp: disp, dos: dos, key: newSiteKey(siteLabels(crystal)), title: title}); err != nil {
		return row, st.files, err
	}
	if err := plotDOS(st.base+"-dos"+ext, kind, dos, false, title); err != nil {
		return row, st.files, err
	}
	if err := plotThermal(st.base+"-thermal"+ext, kind, thermalFigure{th: th, basis: basisAtoms, sites: row.sites, pol: p, title: title}); err != nil {
		return row, st.files, err
	}
	figures := 3
	if len(crystal.GetEpsilonInf()) > 0 {
		ir, err := st.infrared()
		if err != nil {
			return row, st.files, err
		}
		if err := plotInfrared(st.base+"-infrared"+ext, kind, ir, title); err != nil {
			return row, st.files, err
		}
		figures++
	}
	if name == demoScatterExample {
		if err := st.scatterMap(ext, kind, grid, title); err != nil {
			return row, st.files, err
		}
		figures++
	}
	return row, st.files + figures, nil
}

// infrared computes the infrared response of a polar example along x, in
// cm⁻¹ (the spectroscopists' unit), and writes -infrared.csv.
func (st *demoStep) infrared() (*modegridv1.ComputeInfraredResponse, error) {
	done := st.e.prog.running(st.name + ": infrared response")
	ir, err := st.cl.Infrared(st.ctx, &modegridv1.ComputeInfraredRequest{Model: st.src, Direction: &modegridv1.Vec3{X: 1},
		Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1})
	done()
	if err != nil {
		return nil, err
	}
	if err := st.save("-infrared.csv", func(w io.Writer) error { return writeInfrared(w, "csv", ir, false) }); err != nil {
		return nil, err
	}
	return ir, nil
}

// demoScatterExample is the example whose neutron scattering map the demo
// draws.
const demoScatterExample = "rocksalt-like"

// scatterMap computes the neutron S(Q, E) of the rock-salt-like example at
// 300 K along a path through the zones of (200), (300), (311) and (222)
// (conventional cube, a = 5.6 Å), with invented lengths b_P = 3 fm, b_Q =
// 6 fm and σ_inc,Q = 2 barn and a resolution of 1 meV FWHM, and writes
// -scatter-lines.csv (each mode's energy and line weights) and the map
// with the branches over it. grid, when not 0, is the Debye–Waller grid.
func (st *demoStep) scatterMap(ext, kind string, grid uint32, title string) error {
	sc, err := parseScatterers(scattererFlags{b: "P=3;Q=6", sigmaInc: "Q=2"})
	if err != nil {
		return err
	}
	req := &modegridv1.ComputeScatteringRequest{Model: st.src, Scatterers: sc, TemperatureK: 300, Lines: true,
		Frame: modegridv1.QFrame_Q_FRAME_CONVENTIONAL, ConventionalA: 5.6,
		Energy:     &modegridv1.EnergyAxis{Min: -10, Max: 32, Step: 0.2, Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV},
		Resolution: &modegridv1.Resolution{Fwhm: []float64{1}},
		Target: &modegridv1.ComputeScatteringRequest_Path{Path: &modegridv1.QPath{Points: 161, Corners: []*modegridv1.QPathCorner{
			{Label: "200", Q: &modegridv1.QVector{Q1: 2}}, {Label: "300", Q: &modegridv1.QVector{Q1: 3}},
			{Label: "311", Q: &modegridv1.QVector{Q1: 3, Q2: 1, Q3: 1}}, {Label: "222", Q: &modegridv1.QVector{Q1: 2, Q2: 2, Q3: 2}}}}},
	}
	if grid > 0 {
		req.DebyeWaller = &modegridv1.DebyeWaller{Mesh: []uint32{grid, grid, grid}}
	}
	done := st.e.prog.running(st.name + ": neutron scattering map")
	resp, err := st.cl.Scattering(st.ctx, req)
	done()
	if err != nil {
		return err
	}
	out := scatterOutput{resp: resp, kind: "path", probe: req.GetProbe(), frame: req.GetFrame(), a: req.GetConventionalA()}
	if err := st.save("-scatter-lines.csv", func(w io.Writer) error { return out.writeLines(w, "csv") }); err != nil {
		return err
	}
	return plotScatterPath(st.base+"-scatter"+ext, kind, scatterMapFigure{resp: resp, probe: req.GetProbe(),
		title: title + ": neutrons (invented lengths), T = 300 K, FWHM 1 meV"})
}

// demoStep holds what every step of one example's demo needs: the call
// context and client, the example's name and model, and the path prefix
// of its files, with the count of files written so far.
type demoStep struct {
	ctx   context.Context
	cl    *client.Client
	e     *env
	name  string
	src   *modegridv1.ModelSource
	base  string // dir/name; each file adds a suffix
	files int
}

// save writes base+suffix with fn and counts the file.
func (st *demoStep) save(suffix string, fn func(io.Writer) error) error {
	f, err := os.Create(st.base + suffix)
	if err != nil {
		return fmt.Errorf("cannot write: %w", err)
	}
	if err := fn(f); err != nil {
		f.Close()
		return err
	}
	st.files++
	return f.Close()
}

// check checks the example (it must be valid) and writes -check.csv.
func (st *demoStep) check(crystalName string) (*modegridv1.CheckModelResponse, error) {
	done := st.e.prog.running(st.name + ": check")
	chk, err := st.cl.Check(st.ctx, &modegridv1.CheckModelRequest{Model: st.src})
	done()
	if err != nil {
		return nil, err
	}
	if !chk.GetValid() {
		return nil, fmt.Errorf("the example is invalid: %v", chk.GetViolations())
	}
	if err := st.save("-check.csv", func(w io.Writer) error { return writeCheck(w, "csv", crystalName, chk) }); err != nil {
		return nil, err
	}
	return chk, nil
}

// dispersion computes the dispersion along the default path of the
// example's lattice type, with site weights, and writes -path.csv.
func (st *demoStep) dispersion(chk *modegridv1.CheckModelResponse) (*modegridv1.ComputeDispersionResponse, error) {
	corners, err := defaultPath(chk)
	if err != nil {
		return nil, fmt.Errorf("no default path for lattice type %q: %w", chk.GetLatticeType(), err)
	}
	done := st.e.prog.running(st.name + ": dispersion")
	disp, err := st.cl.Dispersion(st.ctx, &modegridv1.ComputeDispersionRequest{Model: st.src, Path: pathPoints(corners), SiteWeights: true})
	done()
	if err != nil {
		return nil, err
	}
	if err := st.save("-path.csv", func(w io.Writer) error { return writePath(w, "csv", disp) }); err != nil {
		return nil, err
	}
	return disp, nil
}

// dos computes the DOS per site on set and writes -dos.csv.
func (st *demoStep) dos(set *modegridv1.QPointSet) (*modegridv1.ComputeDosResponse, error) {
	done := st.e.prog.running(st.name + ": density of states")
	dos, err := st.cl.DOS(st.ctx, &modegridv1.ComputeDosRequest{Model: st.src, Qpoints: set, PerSite: true})
	done()
	if err != nil {
		return nil, err
	}
	if err := st.save("-dos.csv", func(w io.Writer) error { return writeDOS(w, "csv", dos) }); err != nil {
		return nil, err
	}
	return dos, nil
}

// thermal computes the thermal properties on set from 0 to 1000 K in
// steps of 10 K and writes -thermal.csv.
func (st *demoStep) thermal(set *modegridv1.QPointSet) (*modegridv1.ComputeThermalResponse, error) {
	done := st.e.prog.running(st.name + ": thermal properties")
	th, err := st.cl.Thermal(st.ctx, &modegridv1.ComputeThermalRequest{Model: st.src, Qpoints: set,
		Range: &modegridv1.TemperatureRange{StartK: 0, StopK: 1000, StepK: 10}})
	done()
	if err != nil {
		return nil, err
	}
	if err := st.save("-thermal.csv", func(w io.Writer) error { return writeThermal(w, "csv", th, basisAtoms) }); err != nil {
		return nil, err
	}
	return th, nil
}

// thermalNear300 returns the heat capacity (J/(K·mol atoms)) and θ_D as
// thetaCell prints it (one decimal) at the temperature of th nearest 300 K.
func thermalNear300(th *modegridv1.ComputeThermalResponse) (cv float64, theta string) {
	best := math.Inf(1)
	for _, pt := range th.GetPoints() {
		if dT := math.Abs(pt.GetTemperatureK() - 300); dT < best {
			best, cv, theta = dT, pt.GetHeatCapacityJPerMolAtomsK(), thetaCell(pt, 1)
		}
	}
	return cv, theta
}
