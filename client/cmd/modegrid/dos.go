package main

import (
	"io"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const dosSummary = `Phonon density of states g(ν), states per cell per unit, and its integral,
on a Monkhorst–Pack grid (--grid, default by dimension) or for a finite
crystal (--cells). Methods: tetrahedron (default; smooth and exact for
linear bands), gaussian (--width), histogram (--step; the exact spectrum of
a finite crystal). --per-site adds one column and one curve per site.`

func cmdDOS(args []string, e *env) error {
	c := newModelCommand("dos", true)
	fs := c.fs
	var qs qsetFlags
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
	if err := c.parse(args, e, dosSummary); err != nil {
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
	crystal, err := c.m.load()
	if err != nil {
		return err
	}
	d, _ := dims(crystal)
	set, err := qs.set(d, true)
	if err != nil {
		return err
	}
	cl, ctx, release, err := c.dial()
	if err != nil {
		return err
	}
	defer release()
	src := c.source(crystal)
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
	if err := c.out.write(e.stdout, func(w io.Writer) error { return writeDOS(w, c.out.format, resp) }); err != nil {
		return err
	}
	if c.out.plot == "" {
		return nil
	}
	return plotDOS(c.out.plot, c.out.kind, resp, *stack, crystal.GetName())
}
