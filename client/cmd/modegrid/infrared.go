package main

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const infraredSummary = `Infrared response of a polar model (every site's bornCharge and the crystal's
epsilonInf in the model file): the modes at Γ with their mode effective
charges (e/√amu), oscillator strengths (e²/amu along --dir) and whether
they are infrared active or silent; the frequencies at Γ approached along
--dir (the LO modes); ε∞ and the static ε₀ along --dir; and the dielectric
function ε(ω) = ε′ + iε″ with the normal-incidence reflectivity R(ω) for
light polarised along --dir (exact along a principal axis). Frequencies
and dampings are in --unit (cm⁻¹ by default). The table shows everything;
CSV gives the spectrum (frequency_<unit>,epsilon_real,epsilon_imag,
reflectivity) or, with --modes, the modes (mode,frequency_<unit>,
frequency_along_<unit>,kind,charge_x,charge_y,charge_z,strength_along,
damping_<unit>). --plot draws ε′, ε″ and R against frequency.`

func cmdInfrared(args []string, e *env) error {
	c := newModelCommand("infrared", true)
	fs := c.fs
	dirFlag := fs.String("dir", "1,0,0", "Cartesian direction of the light's electric field, x,y,z")
	unit := fs.String("unit", "cm-1", "frequency unit of the window, dampings and output: cm-1, thz or mev")
	lo := fs.Float64("min", 0, "lower end of the frequency window, in --unit (default with --max 0: 0)")
	hi := fs.Float64("max", 0, "upper end of the window, in --unit (default: 1.25 × the highest LO frequency)")
	points := fs.Uint("points", 0, "samples in the window (default 1001)")
	damping := fs.Float64("damping", 0, "damping of every mode, in --unit (default: 1 % of the highest Γ frequency)")
	modeDamping := fs.String("mode-damping", "", "damping per Γ mode in ascending order, comma-separated, in --unit (overrides --damping)")
	modes := fs.Bool("modes", false, "CSV: write the modes instead of the spectrum")
	if err := c.parse(args, e, infraredSummary); err != nil {
		return err
	}
	u, err := parseUnit(*unit)
	if err != nil {
		return usagef("%v", err)
	}
	dir, err := parseVec(*dirFlag)
	if err != nil {
		return usagef("--dir: %v", err)
	}
	var md []float64
	if *modeDamping != "" {
		for i, f := range strings.Split(*modeDamping, ",") {
			x, err := parseFinite(f)
			if err != nil {
				return usagef("--mode-damping item %d: %v", i+1, err)
			}
			md = append(md, x)
		}
	}
	crystal, err := c.m.load()
	if err != nil {
		return err
	}
	cl, ctx, release, err := c.dial()
	if err != nil {
		return err
	}
	defer release()
	req := &modegridv1.ComputeInfraredRequest{Model: c.source(crystal), Direction: &modegridv1.Vec3{X: dir[0], Y: dir[1], Z: dir[2]},
		Unit: u, Min: *lo, Max: *hi, Points: uint32(*points), Damping: *damping, ModeDamping: md}
	done := e.prog.running("infrared response")
	resp, err := cl.Infrared(ctx, req)
	done()
	if status.Code(err) == codes.FailedPrecondition {
		return &invalidError{msg: status.Convert(err).Message()}
	}
	if err != nil {
		return err
	}
	if err := c.out.write(e.stdout, func(w io.Writer) error { return writeInfrared(w, c.out.format, resp, *modes) }); err != nil {
		return err
	}
	if c.out.plot == "" {
		return nil
	}
	return plotInfrared(c.out.plot, c.out.kind, resp, crystal.GetName())
}

// modeKind names a Γ mode's infrared character.
func modeKind(m *modegridv1.InfraredMode) string {
	switch {
	case m.GetAcoustic():
		return "acoustic"
	case m.GetActive():
		return "active"
	}
	return "silent"
}

// writeInfrared writes the response as JSON, CSV (the spectrum, or the
// modes) or a table of everything.
func writeInfrared(w io.Writer, format string, r *modegridv1.ComputeInfraredResponse, modes bool) error {
	u := r.GetUnit()
	switch {
	case format == "json":
		return writeJSON(w, r)
	case format == "csv" && modes:
		c := newCSV(w)
		c.row("mode", "frequency_"+unitName(u), "frequency_along_"+unitName(u), "kind", "charge_x", "charge_y", "charge_z", "strength_along", "damping_"+unitName(u))
		for i, m := range r.GetModes() {
			z := m.GetModeCharge()
			c.row(strconv.Itoa(i+1), num(m.GetFrequency()), num(at(r.GetLoFrequencies(), i)), modeKind(m),
				num(at(z, 0)), num(at(z, 1)), num(at(z, 2)), num(m.GetStrengthAlong()), num(m.GetDamping()))
		}
		return c.flush()
	case format == "csv":
		c := newCSV(w)
		c.row("frequency_"+unitName(u), "epsilon_real", "epsilon_imag", "reflectivity")
		for _, s := range r.GetSamples() {
			c.row(num(s.GetFrequency()), num(s.GetEpsilonReal()), num(s.GetEpsilonImag()), num(s.GetReflectivity()))
		}
		return c.flush()
	}
	return writeInfraredTable(w, r)
}

// writeInfraredTable prints the modes, the dielectric constants and the
// spectrum for reading.
func writeInfraredTable(w io.Writer, r *modegridv1.ComputeInfraredResponse) error {
	ul := unitLabel(r.GetUnit())
	d := r.GetDirection()
	fmt.Fprintf(w, "direction ê = (%s, %s, %s)\n", g4(d.GetX()), g4(d.GetY()), g4(d.GetZ()))
	fmt.Fprintf(w, "ε∞ along ê %s, static ε₀ along ê %s\n\n", g6(r.GetEpsilonInfAlong()), g6(r.GetEpsilonStaticAlong()))
	t := newTable(w)
	t.row("mode", "ν at Γ ("+ul+")", "ν along ê ("+ul+")", "kind", "Z̃x", "Z̃y", "Z̃z (e/√amu)", "S along ê (e²/amu)", "γ ("+ul+")")
	for i, m := range r.GetModes() {
		z := m.GetModeCharge()
		t.row(strconv.Itoa(i+1), f4(m.GetFrequency()), f4(at(r.GetLoFrequencies(), i)), modeKind(m),
			g4(tiny(at(z, 0))), g4(tiny(at(z, 1))), g4(tiny(at(z, 2))), g4(tiny(m.GetStrengthAlong())), f4(m.GetDamping()))
	}
	if err := t.flush(); err != nil {
		return err
	}
	fmt.Fprintf(w, "\n(active: |Z̃|² above %g of Σ|Z̃|²; \"ν along ê\" lists every mode at Γ approached along ê, the LO modes among them)\n\n", r.GetActiveThreshold())
	t = newTable(w)
	t.row("ν ("+ul+")", "ε′", "ε″", "R")
	for _, s := range r.GetSamples() {
		t.row(f4(s.GetFrequency()), g6(s.GetEpsilonReal()), g6(s.GetEpsilonImag()), strconv.FormatFloat(s.GetReflectivity(), 'f', 5, 64))
	}
	return t.flush()
}

// tiny returns 0 for |x| < 1e-10: a mode charge (e/√amu) or strength
// (e²/amu) at rounding, which a table shows as 0 (CSV and JSON keep it).
func tiny(x float64) float64 {
	if math.Abs(x) < 1e-10 {
		return 0
	}
	return x
}

// g4 and g6 print a number with 4 or 6 significant digits (−0 as 0).
func g4(x float64) string { return strconv.FormatFloat(x+0, 'g', 4, 64) }
func g6(x float64) string { return strconv.FormatFloat(x+0, 'g', 6, 64) }
