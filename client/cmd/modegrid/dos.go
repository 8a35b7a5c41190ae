package main

import (
	"io"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const dosSummary = `Phonon density of states g(ν), states per cell per unit, and its integral,
on a Monkhorst–Pack grid (--grid, default by dimension) or for a finite
crystal (--cells). Methods: tetrahedron (default; smooth and exact for
linear bands), gaussian (--width), histogram (--step; the exact spectrum of
a finite crystal). --per-site adds one column and one curve per site.`

func cmdDOS(args []string, e *env) error {
	fs := newFlagSet("dos")
	var m modelFlag
	var conn connFlags
	var out outFlags
	var qs qsetFlags
	m.register(fs)
	conn.register(fs)
	out.register(fs, true)
	qs.register(fs, false)
	unit := fs.String("unit", "thz", "frequency unit: thz, mev or cm-1")
	method := fs.String("method", "tetrahedron", "tetrahedron, gaussian or histogram")
	width := fs.Float64("width", 0, "Gaussian standard deviation, in --unit (default: from the grid)")
	step := fs.Float64("step", 0, "frequency step (histogram bin width), in --unit (default: from the window)")
	lo := fs.Float64("min", 0, "lower end of the frequency window, in --unit (default: from the modes)")
	hi := fs.Float64("max", 0, "upper end of the frequency window, in --unit (default: from the modes)")
	perSite := fs.Bool("per-site", false, "also give the DOS projected on each site")
	stack := fs.Bool("stack", false, "with --plot and --per-site: draw the sites as stacked bands")
	negative := fs.Bool("show-imaginary", false, "put imaginary modes on the negative frequency axis instead of leaving them out")
	sumRule := fs.Bool("sum-rule", false, "impose the acoustic sum rule on explicit blocks")
	if err := parse(fs, args, e.stderr, dosSummary); err != nil {
		return err
	}
	if err := out.check(fs); err != nil {
		return err
	}
	if err := conn.check(); err != nil {
		return err
	}
	u, err := parseUnit(*unit)
	if err != nil {
		return usagef("%v", err)
	}
	meth, err := parseMethod(*method)
	if err != nil {
		return usagef("%v", err)
	}
	crystal, err := m.load()
	if err != nil {
		return err
	}
	d, _ := dims(crystal)
	set, err := qs.set(d, true)
	if err != nil {
		return err
	}
	cl, stop, err := connect(conn.server, conn.options()...)
	if err != nil {
		return err
	}
	defer stop()
	ctx, cancel := callContext()
	defer cancel()
	src := client.Inline(crystal)
	src.EnforceSumRule = *sumRule
	req := &modegridv1.ComputeDosRequest{
		Model: src, Qpoints: set, Method: meth, Unit: u,
		Min: *lo, Max: *hi, Step: *step, Width: *width, PerSite: *perSite,
	}
	if *negative {
		req.Imaginary = modegridv1.ImaginaryModes_IMAGINARY_MODES_NEGATIVE_AXIS
	}
	done := e.prog.running("density of states on the " + describe(set))
	resp, err := cl.DOS(ctx, req)
	done()
	if err != nil {
		return err
	}
	if n := resp.GetImaginaryModes(); n > 0 && !*negative {
		e.note("%d imaginary modes on the %s are left out of the DOS (--show-imaginary shows them)", n, describe(set))
	}
	if err := out.write(e.stdout, func(w io.Writer) error { return writeDOS(w, out.format, resp) }); err != nil {
		return err
	}
	if out.plot == "" {
		return nil
	}
	return plotDOS(out.plot, out.kind, resp, *stack, crystal.GetName())
}
