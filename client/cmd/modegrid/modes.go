package main

import (
	"io"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const modesSummary = `Normal-mode frequencies at explicit q-points (--q), on a Monkhorst–Pack
grid (--grid, --shift) or for a finite crystal of N cells (--cells). q is in
fractional reciprocal coordinates; imaginary modes are negative numbers.`

func cmdModes(args []string, e *env) error {
	c := newModelCommand("modes", false)
	fs := c.fs
	var qs qsetFlags
	qs.register(fs, true)
	unit := fs.String("unit", "thz", "frequency unit: thz, mev or cm-1")
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
	d, _ := dims(crystal)
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
	resp, err := cl.Modes(ctx, &modegridv1.ComputeModesRequest{Model: src, Qpoints: set, Unit: u},
		client.Progress(func(done, total int) { e.prog.update("modes", done, total) }))
	e.prog.clear()
	if err != nil {
		return err
	}
	return c.out.write(e.stdout, func(w io.Writer) error { return writeModes(w, c.out.format, resp) })
}
