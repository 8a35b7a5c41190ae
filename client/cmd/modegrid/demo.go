package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"text/tabwriter"

	"github.com/materials-lab/modegrid/client"
	"github.com/materials-lab/modegrid/proto/examples"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const demoSummary = `Runs the main job on the built-in example crystals (invented models of a
chain, a two-site chain, a square net, an fcc crystal and a rock-salt-like
crystal): check, the dispersion along a path, the DOS per site and the
thermal properties. Prints a summary table and writes CSV tables and
figures into --dir (default ./demo-out). Without --server it starts an
embedded server, as every command does.`

// demoRow is one line of the summary.
type demoRow struct {
	name              string
	dim, sites, modes int
	stable            bool
	maxTHz            float64
	cv300, zpe        float64
	theta300          string // θ_D(300 K) as thermalTheta prints it
}

func cmdDemo(args []string, e *env) error {
	fs := newFlagSet("demo")
	var conn connFlags
	conn.register(fs)
	dir := fs.String("dir", "demo-out", "folder for the CSV tables and figures (created if needed)")
	kind := fs.String("plot-format", "png", "figure format: png or svg")
	grid := fs.Uint("grid", 0, "grid divisions per direction for DOS and thermal (default: 512 in 1D, 64 in 2D, 24 in 3D)")
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
	abs, err := filepath.Abs(*dir)
	if err != nil {
		abs = *dir
	}
	_, err = fmt.Fprintf(e.stdout, "\nwrote %d files (CSV tables, %s figures) to %s\n", files, strings.ToUpper(*kind), abs)
	return err
}

// demoOne runs the four steps on one example and writes its files.
func demoOne(ctx context.Context, cl *client.Client, e *env, name, dir, kind string, grid uint32) (demoRow, int, error) {
	crystal, err := examples.Load(name)
	if err != nil {
		return demoRow{}, 0, err
	}
	d, p := dims(crystal)
	row := demoRow{name: name, dim: d, sites: len(crystal.GetSites())}
	src := client.Inline(crystal)
	base := filepath.Join(dir, name)
	files := 0
	save := func(suffix string, fn func(io.Writer) error) error {
		f, err := os.Create(base + suffix)
		if err != nil {
			return fmt.Errorf("cannot write: %w", err)
		}
		if err := fn(f); err != nil {
			f.Close()
			return err
		}
		files++
		return f.Close()
	}

	done := e.prog.running(name + ": check")
	chk, err := cl.Check(ctx, &modegridv1.CheckModelRequest{Model: src})
	done()
	if err != nil {
		return row, files, err
	}
	if !chk.GetValid() {
		return row, files, fmt.Errorf("the example is invalid: %v", chk.GetViolations())
	}
	row.modes, row.stable, row.maxTHz = int(chk.GetModesPerCell()), chk.GetStable(), chk.GetMaxFrequencyThz()
	if err := save("-check.csv", func(w io.Writer) error { return writeCheck(w, "csv", crystal.GetName(), chk) }); err != nil {
		return row, files, err
	}

	corners, err := defaultPath(chk)
	if err != nil {
		return row, files, fmt.Errorf("no default path for lattice type %q: %w", chk.GetLatticeType(), err)
	}
	done = e.prog.running(name + ": dispersion")
	disp, err := cl.Dispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: src, Path: pathPoints(corners), SiteWeights: true})
	done()
	if err != nil {
		return row, files, err
	}
	if err := save("-path.csv", func(w io.Writer) error { return writePath(w, "csv", disp) }); err != nil {
		return row, files, err
	}

	mesh := grid
	if mesh == 0 {
		mesh = defaultMeshFor(d)
	}
	set := client.Grid(expandMesh([]uint32{mesh}, d)...)
	done = e.prog.running(name + ": density of states")
	dos, err := cl.DOS(ctx, &modegridv1.ComputeDosRequest{Model: src, Qpoints: set, PerSite: true})
	done()
	if err != nil {
		return row, files, err
	}
	if err := save("-dos.csv", func(w io.Writer) error { return writeDOS(w, "csv", dos) }); err != nil {
		return row, files, err
	}

	done = e.prog.running(name + ": thermal properties")
	th, err := cl.Thermal(ctx, &modegridv1.ComputeThermalRequest{Model: src, Qpoints: set,
		Range: &modegridv1.TemperatureRange{StartK: 0, StopK: 1000, StepK: 10}})
	done()
	if err != nil {
		return row, files, err
	}
	if err := save("-thermal.csv", func(w io.Writer) error { return writeThermal(w, "csv", th, basisAtoms) }); err != nil {
		return row, files, err
	}
	best := math.Inf(1)
	for _, pt := range th.GetPoints() {
		if dT := math.Abs(pt.GetTemperatureK() - 300); dT < best {
			best, row.cv300, row.theta300 = dT, pt.GetHeatCapacityJPerMolAtomsK(), thetaCell(pt, 1)
		}
	}
	row.zpe = th.GetZeroPointEnergyKjPerMolAtoms()

	ext := "." + kind
	title := crystal.GetName() + " (example)"
	if err := plotDispersion(base+"-dispersion"+ext, kind, dispersionFigure{disp: disp, dos: dos, key: newSiteKey(siteLabels(crystal)), title: title}); err != nil {
		return row, files, err
	}
	if err := plotDOS(base+"-dos"+ext, kind, dos, false, title); err != nil {
		return row, files, err
	}
	if err := plotThermal(base+"-thermal"+ext, kind, thermalFigure{th: th, basis: basisAtoms, sites: row.sites, pol: p, title: title}); err != nil {
		return row, files, err
	}
	return row, files + 3, nil
}
