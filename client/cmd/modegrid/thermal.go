package main

import (
	"context"
	"fmt"
	"io"
	"strings"

	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/client"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const thermalSummary = `Harmonic thermal properties: heat capacity Cv, entropy S, free energy F
and internal energy U (zero-point energy included), per mole of atoms (the
default: Cv tends to 3R in 3D), per mole of cells or per kilogram (--basis),
and the Debye temperature θD(T) that reproduces Cv, at --temps
(start:stop:step in K, or a list). --msd adds mean-square displacements per
site. An unstable model (imaginary modes) exits 3 unless --allow-unstable.
--measured FILE.csv compares measured heat capacities with the model (on
the figure, with error bars) and makes the output the residuals
(measured − model, and over σ, on the --basis) instead of the listing;
its header is T_K,Cv_J_per_molatom_K[,sigma] (per mole of atoms),
T_K,Cv_J_per_molcell_K[,sigma] (per mole of unit cells) or
T_K,Cv_J_per_kg_K[,sigma] (per kilogram), Cv at constant volume.`

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
	measured := fs.String("measured", "", "CSV of measured heat capacities to compare with (see above)")
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
	var rows []measuredRow
	var rowsBasis thermalBasis
	if *measured != "" {
		if rows, rowsBasis, err = readThermalMeasured(*measured); err != nil {
			return usagef("--measured: %v", err)
		}
	}
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
	var points []plotPoint
	if rows != nil {
		if points, err = c.thermalResiduals(ctx, cl, e, req, rows, rowsBasis, basis); err != nil {
			return err
		}
	} else if err := c.out.write(e.stdout, func(w io.Writer) error { return writeThermal(w, c.out.format, resp, basis) }); err != nil {
		return err
	}
	if c.out.plot == "" {
		return nil
	}
	return plotThermal(c.out.plot, c.out.kind, thermalFigure{th: resp, basis: basis, sites: len(crystal.GetSites()), pol: p,
		measured: points, title: crystal.GetName()})
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

// thermalResiduals asks the model's Cv at the measured temperatures (the
// request of the listing with those temperatures), converts the measured
// values from the file's basis to the output's, and writes the residuals
// as the output. It returns the converted points for the figure.
func (c *modelCommand) thermalResiduals(ctx context.Context, cl *client.Client, e *env, req *modegridv1.ComputeThermalRequest,
	rows []measuredRow, from, basis thermalBasis) ([]plotPoint, error) {
	at := proto.Clone(req).(*modegridv1.ComputeThermalRequest)
	at.Range, at.TemperaturesK, at.Msd = nil, nil, false
	for _, m := range rows {
		at.TemperaturesK = append(at.TemperaturesK, m.x)
	}
	done := e.prog.running("heat capacity at the measured temperatures")
	resp, err := cl.Thermal(ctx, at)
	done()
	if err != nil {
		return nil, err
	}
	rows = convertRows(rows, from, basis, int(resp.GetAtomsPerCell()), resp.GetCellMassAmu())
	cv := map[float64]float64{}
	for _, p := range resp.GetPoints() {
		cv[p.GetTemperatureK()], _, _, _ = basis.values(p)
	}
	rs := make([]residual, len(rows))
	for i, m := range rows {
		v, ok := cv[m.x]
		if !ok {
			return nil, fmt.Errorf("thermal: the server gave no point at the measured %v K", m.x)
		}
		rs[i] = newResidual(m, v)
	}
	t := residualTable{xName: "T (K)", xCSV: "T_K", yName: "Cv (" + basis.entropyUnit() + ")", yCSV: basis.measuredColumn()}
	c.out.explicit = true // with --measured the residuals are the output, also beside --plot
	return plotPoints(rows), c.out.write(e.stdout, func(w io.Writer) error { return writeResiduals(w, c.out.format, t, rs) })
}
