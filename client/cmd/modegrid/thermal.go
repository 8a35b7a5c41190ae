package main

import (
	"fmt"
	"io"
	"strings"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const thermalSummary = `Harmonic thermal properties: heat capacity Cv, entropy S, free energy F
and internal energy U (zero-point energy included), per mole of atoms (the
default: Cv tends to 3R in 3D), per mole of cells or per kilogram (--basis),
and the Debye temperature θD(T) that reproduces Cv, at --temps
(start:stop:step in K, or a list). --msd adds mean-square displacements per
site. An unstable model (imaginary modes) exits 3 unless --allow-unstable.`

func cmdThermal(args []string, e *env) error {
	c := newModelCommand("thermal", true)
	fs := c.fs
	var qs qsetFlags
	qs.register(fs, false)
	temps := fs.String("temps", "0:1000:10", "temperatures in K: start:stop:step or a list like 100,200,300")
	msd := fs.Bool("msd", false, "also give mean-square displacements (Uiso, B) per site")
	allowUnstable := fs.Bool("allow-unstable", false, "leave imaginary modes out instead of refusing an unstable model")
	dosRoute := fs.Bool("dos-route", false, "integrate over the tetrahedron DOS instead of summing the grid's modes")
	basisFlag := fs.String("basis", "atoms", "amount the values are per: atoms (mole of atoms), cells (mole of cells, formula units) or kg")
	if err := c.parse(args, e, thermalSummary); err != nil {
		return err
	}
	basis, err := parseBasis(*basisFlag)
	if err != nil {
		return usagef("%v", err)
	}
	list, rng, err := parseTemps(*temps)
	if err != nil {
		return usagef("--temps: %v", err)
	}
	crystal, err := c.m.load()
	if err != nil {
		return err
	}
	d, p := dims(crystal)
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
	req := &modegridv1.ComputeThermalRequest{Model: src, Qpoints: set, TemperaturesK: list, AllowUnstable: *allowUnstable, Msd: *msd}
	if rng != nil {
		req.Range = &modegridv1.TemperatureRange{StartK: rng.Start, StopK: rng.Stop, StepK: rng.Step}
	}
	if *dosRoute {
		req.Route = modegridv1.ThermalRoute_THERMAL_ROUTE_DOS_INTEGRAL
	}
	done := e.prog.running("thermal properties on the " + describe(set))
	resp, err := cl.Thermal(ctx, req)
	done()
	if status.Code(err) == codes.FailedPrecondition {
		return &invalidError{msg: unstableHint(status.Convert(err).Message())}
	}
	if err != nil {
		return err
	}
	if n := resp.GetImaginaryModesExcluded(); n > 0 {
		e.note("%d imaginary modes on the %s were left out of the sums", n, describe(set))
	}
	if err := c.out.write(e.stdout, func(w io.Writer) error { return writeThermal(w, c.out.format, resp, basis) }); err != nil {
		return err
	}
	if c.out.plot == "" {
		return nil
	}
	return plotThermal(c.out.plot, c.out.kind, resp, basis, len(crystal.GetSites()), p, crystal.GetName())
}

// unstableHint rewrites the server's FAILED_PRECONDITION message for a
// terminal: its hint names request fields, the CLI names the flags
// (enforce_sum_rule is --sum-rule, allow_unstable is --allow-unstable).
func unstableHint(msg string) string {
	if strings.Contains(msg, "set enforce_sum_rule to impose it") {
		return strings.Replace(msg, "set enforce_sum_rule to impose it", "run with --sum-rule to impose it", 1)
	}
	if i := strings.Index(msg, " (set allow_unstable"); i >= 0 {
		msg = msg[:i]
	}
	return fmt.Sprintf("%s (--allow-unstable leaves the imaginary modes out instead)", strings.TrimSuffix(msg, "."))
}
