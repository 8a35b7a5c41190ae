package main

import (
	"io"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const modesSummary = `Normal-mode frequencies at explicit q-points (--q), on a Monkhorst–Pack
grid (--grid, --shift) or for a finite crystal of N cells (--cells). q is in
fractional reciprocal coordinates; imaginary modes are negative numbers.
--velocities adds the group velocity (km/s, Cartesian x, y, z) of every
mode, --eigenvectors its normalised eigenvector (one complex component per
site and axis, cell phase convention: the mode shape of site s in cell n is
e_s·exp(2πi q·n)/sqrt(m_s)); both give one row per q-point and branch.`

func cmdModes(args []string, e *env) error {
	c := newModelCommand("modes", false)
	fs := c.fs
	var qs qsetFlags
	qs.register(fs, true)
	unit := fs.String("unit", "thz", "frequency unit: thz, mev or cm-1")
	vectors := fs.Bool("eigenvectors", false, "also give each mode's normalised eigenvector (complex, per site and axis)")
	velocities := fs.Bool("velocities", false, "also give each mode's group velocity (km/s, Cartesian)")
	if err := c.parse(args, e, modesSummary); err != nil {
		return err
	}
	u, err := parseUnit(*unit)
	if err != nil {
		return usagef("%v", err)
	}
	crystal, err := c.m.load()
	if err != nil {
		return err
	}
	d, p := dims(crystal)
	set, err := qs.set(d, false)
	if err != nil {
		return err
	}
	cl, ctx, release, err := c.dial()
	if err != nil {
		return err
	}
	defer release()
	src := c.source(crystal)
	resp, err := cl.Modes(ctx, &modegridv1.ComputeModesRequest{Model: src, Qpoints: set, Unit: u, Eigenvectors: *vectors, GroupVelocities: *velocities},
		client.Progress(func(done, total int) { e.prog.update("modes", done, total) }))
	e.prog.clear()
	if err != nil {
		return err
	}
	x := modesExtras{vectors: *vectors, velocities: *velocities, pol: p}
	for _, s := range crystal.GetSites() {
		x.labels = append(x.labels, s.GetLabel())
	}
	return c.out.write(e.stdout, func(w io.Writer) error { return writeModes(w, c.out.format, resp, x) })
}
