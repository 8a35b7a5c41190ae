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
	fs := newFlagSet("modes")
	var m modelFlag
	var conn connFlags
	var out outFlags
	var qs qsetFlags
	m.register(fs)
	conn.register(fs)
	out.register(fs, false)
	qs.register(fs, true)
	unit := fs.String("unit", "thz", "frequency unit: thz, mev or cm-1")
	sumRule := fs.Bool("sum-rule", false, "impose the acoustic sum rule on explicit blocks")
	if err := parse(fs, args, e.stderr, modesSummary); err != nil {
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
	crystal, err := m.load()
	if err != nil {
		return err
	}
	d, _ := dims(crystal)
	set, err := qs.set(d, false)
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
	resp, err := cl.Modes(ctx, &modegridv1.ComputeModesRequest{Model: src, Qpoints: set, Unit: u},
		client.Progress(func(done, total int) { e.prog.update("modes", done, total) }))
	e.prog.clear()
	if err != nil {
		return err
	}
	return out.write(e.stdout, func(w io.Writer) error { return writeModes(w, out.format, resp) })
}
