package main

// The heat subcommands: gruneisen (mode Grüneisen parameters from models at
// several volumes), qha (quasi-harmonic thermal expansion, bulk modulus and
// Cp) and conductivity (lattice thermal conductivity of bulk and finite
// samples, and its cumulative curves).

import (
	"fmt"
	"io"
	"strings"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// heatCaution closes the help of every heat command.
const heatCaution = `
Results are estimates of the model: check the model (and, for conductivity,
the scattering parameters) against measured values before relying on them.`

// loadModels reads a comma-separated list of model files.
func loadModels(list, flagName string) ([]*modegridv1.Crystal, error) {
	if strings.TrimSpace(list) == "" {
		return nil, usagef("--%s FILE,FILE,… is required", flagName)
	}
	var out []*modegridv1.Crystal
	for _, p := range strings.Split(list, ",") {
		m := modelFlag{path: strings.TrimSpace(p)}
		c, err := m.load()
		if err != nil {
			return nil, err
		}
		out = append(out, c)
	}
	return out, nil
}

// heatStatus turns the server's FAILED_PRECONDITION (an unstable model)
// into the CLI's invalid-model error, as thermal does.
func heatStatus(err error) error {
	if status.Code(err) == codes.FailedPrecondition {
		return &invalidError{msg: unstableHint(status.Convert(err).Message())}
	}
	return err
}

const gruneisenSummary = `Mode Grüneisen parameters γ = −∂ln ω/∂ln V from models of one crystal at
several volumes (--models a.json,b.json,…: the same sites in the same order;
only lattice and force constants differ), at the reference volume (the
middle one, or --reference I, an index into --models), modes followed across
volumes by eigenvector overlap. On q-points (--q, --grid, --cells) or a path
(--path, --points). With --temps (grid or cells only) the output is the
heat-capacity-weighted mean γ(T) instead.
CSV columns: q1,q2,q3,distance_invA,label,branch,frequency_thz,gamma (gamma
"undefined" for zero-frequency modes); with --temps: T_K,gamma_mean.` + heatCaution

func cmdGruneisen(args []string, e *env) error {
	c := newModelCommand("gruneisen", false)
	fs := c.fs
	models := fs.String("models", "", "model files of one crystal at different volumes, comma-separated (at least 2)")
	ref := fs.Int("reference", -1, "index into --models of the reference volume (-1: the middle volume)")
	var qs qsetFlags
	qs.register(fs, true)
	path := fs.String("path", "", `a path of corners instead of q-points, e.g. "G-X-L" or "G=0,0,0 X=0.5,0,0.5"`)
	points := fs.Int("points", 0, "samples along --path (0: 201)")
	temps := fs.String("temps", "", "temperatures in K for the mean γ(T): start:stop:step or a list")
	if err := c.parse(args, e, gruneisenSummary); err != nil {
		return err
	}
	crystals, err := loadModels(*models, "models")
	if err != nil {
		return err
	}
	req := &modegridv1.ComputeGruneisenRequest{}
	for _, cr := range crystals {
		req.Models = append(req.Models, c.source(cr))
	}
	if *ref >= 0 {
		r := uint32(*ref)
		req.Reference = &r
	}
	if *temps != "" {
		list, rng, err := parseTemps(*temps)
		if err != nil {
			return usagef("--temps: %v", err)
		}
		req.TemperaturesK, req.Range = list, rangeMsg(rng)
	}
	if *path != "" {
		corners, err := parsePath(*path)
		if err != nil {
			return usagef("--path: %v", err)
		}
		if *points < 0 {
			return usagef("--points must be ≥ 0")
		}
		req.Path, req.PathPoints = pathPoints(corners), uint32(*points)
	} else {
		d, _ := dims(crystals[0])
		if req.Qpoints, err = qs.set(d, true); err != nil {
			return err
		}
	}
	cl, ctx, release, err := c.dial()
	if err != nil {
		return err
	}
	defer release()
	done := e.prog.running(fmt.Sprintf("mode Grüneisen parameters from %d volumes", len(crystals)))
	resp, err := cl.Gruneisen(ctx, req)
	done()
	if err != nil {
		return heatStatus(err)
	}
	if resp.GetMinOverlap() < 0.5 {
		e.note("the weakest match of a mode across volumes has overlap %.2f: the volumes may be too far apart to follow the modes", resp.GetMinOverlap())
	}
	return c.out.write(e.stdout, func(w io.Writer) error { return writeGruneisen(w, c.out.format, resp) })
}

// rangeMsg converts a parsed temperature range (nil: none).
func rangeMsg(r *tempRange) *modegridv1.TemperatureRange {
	if r == nil {
		return nil
	}
	return &modegridv1.TemperatureRange{StartK: r.Start, StopK: r.Stop, StepK: r.Step}
}

const qhaSummary = `Quasi-harmonic thermal expansion, isothermal bulk modulus and heat capacity
at constant pressure from models of one 3D crystal at five or more volumes
(--models, as for gruneisen) and the static energy of each cell (--energies,
eV, in the order of --models: your own calculation at each volume). At each
temperature F(V) = E(V) + F_vib(V, T) is fitted with the --eos (vinet or
birch-murnaghan) and G = F + PV minimised (--pressure, GPa).
CSV columns: T_K,V_A3,alpha_V_per_K,alpha_L_per_K,B_T_GPa,Cv_J_per_<basis>_K,
Cp_J_per_<basis>_K,gamma,G_eV,fit_rms_eV,bracketed (<basis> molatom or
molcell, --basis atoms or cells; gamma "undefined" at 0 K; bracketed "no"
where the minimum lies outside the volumes given: extrapolated, also
warned on standard error).
--measured FILE[,FILE] overlays measured points on the figure (--plot): CSV
with header T_K,Cp_J_per_molatom_K[,sigma], T_K,Cp_J_per_molcell_K[,sigma] or
T_K,alpha_lin_per_K[,sigma].` + heatCaution

func cmdQHA(args []string, e *env) error {
	c := newModelCommand("qha", true)
	fs := c.fs
	models := fs.String("models", "", "model files of one crystal at five or more volumes, comma-separated")
	energies := fs.String("energies", "", "static energy of each model's cell in eV, comma-separated, in the order of --models")
	var qs qsetFlags
	qs.register(fs, false)
	temps := fs.String("temps", "0:1000:20", "temperatures in K: start:stop:step or a list")
	eos := fs.String("eos", "vinet", "equation of state: vinet or birch-murnaghan")
	pressure := fs.Float64("pressure", 0, "pressure in GPa")
	basisFlag := fs.String("basis", "atoms", "heat capacities per mole of atoms (atoms) or of cells (cells)")
	measured := fs.String("measured", "", "CSV files of measured Cp or linear expansion for the figure (see above)")
	allowUnstable := fs.Bool("allow-unstable", false, "leave imaginary modes out instead of refusing an unstable model")
	if err := c.parse(args, e, qhaSummary); err != nil {
		return err
	}
	in, err := qhaInputs(*models, *energies, *temps, *eos, *basisFlag, *measured)
	if err != nil {
		return err
	}
	req := &modegridv1.ComputeQuasiHarmonicRequest{StaticEnergiesEv: in.energies, TemperaturesK: in.temps, Range: rangeMsg(in.rng),
		PressureGpa: *pressure, Eos: in.eos, AllowUnstable: *allowUnstable}
	for _, cr := range in.crystals {
		req.Models = append(req.Models, c.source(cr))
	}
	d, _ := dims(in.crystals[0])
	if req.Qpoints, err = qs.set(d, true); err != nil {
		return err
	}
	cl, ctx, release, err := c.dial()
	if err != nil {
		return err
	}
	defer release()
	done := e.prog.running(fmt.Sprintf("quasi-harmonic free energy of %d volumes on the %s", len(in.crystals), describe(req.Qpoints)))
	resp, err := cl.QuasiHarmonic(ctx, req)
	done()
	if err != nil {
		return heatStatus(err)
	}
	warnUnbracketed(e, resp)
	if err := c.out.write(e.stdout, func(w io.Writer) error { return writeQHA(w, c.out.format, resp, in.perCell) }); err != nil {
		return err
	}
	if c.out.plot == "" {
		return nil
	}
	return qhaFigure{r: resp, perCell: in.perCell, measured: in.measured, title: in.crystals[0].GetName()}.write(c.out.plot, c.out.kind)
}

// qhaIn are the qha command's parsed inputs.
type qhaIn struct {
	crystals []*modegridv1.Crystal
	energies []float64
	temps    []float64
	rng      *tempRange
	eos      modegridv1.EquationOfState
	perCell  bool
	measured []qhaMeasured
}

func qhaInputs(models, energies, temps, eos, basis, measured string) (qhaIn, error) {
	var in qhaIn
	var err error
	switch strings.ToLower(eos) {
	case "vinet":
		in.eos = modegridv1.EquationOfState_EQUATION_OF_STATE_VINET
	case "birch-murnaghan", "bm":
		in.eos = modegridv1.EquationOfState_EQUATION_OF_STATE_BIRCH_MURNAGHAN
	default:
		return in, usagef("--eos must be vinet or birch-murnaghan, got %q", eos)
	}
	switch basis {
	case "atoms":
	case "cells":
		in.perCell = true
	default:
		return in, usagef("--basis must be atoms or cells, got %q", basis)
	}
	if in.temps, in.rng, err = parseTemps(temps); err != nil {
		return in, usagef("--temps: %v", err)
	}
	if strings.TrimSpace(energies) == "" {
		return in, usagef("--energies E,E,… (eV per cell, one per model) is required")
	}
	if in.energies, err = parseNumberList(energies, "energy"); err != nil {
		return in, usagef("--energies: %v", err)
	}
	for _, f := range strings.Split(measured, ",") {
		if f = strings.TrimSpace(f); f != "" {
			m, err := readQHAMeasured(f)
			if err != nil {
				return in, usagef("--measured: %v", err)
			}
			in.measured = append(in.measured, m)
		}
	}
	in.crystals, err = loadModels(models, "models")
	return in, err
}

// warnUnbracketed repeats the server's warnings of points outside the
// volumes given on standard error (the table marks them too).
func warnUnbracketed(e *env, r *modegridv1.ComputeQuasiHarmonicResponse) {
	n := 0
	for _, p := range r.GetPoints() {
		if w := p.GetWarning(); w != "" {
			if n < 3 {
				e.note("%s", w)
			}
			n++
		}
	}
	if n > 3 {
		e.note("%d more temperatures are flagged likewise (column bracketed)", n-3)
	}
}

const conductivitySummary = `Lattice thermal conductivity κ(T) (W/(m·K)) of a 3D crystal in the
relaxation-time approximation, for bulk and finite samples (--samples, one
κ(T) series each: "bulk", "grain:1um", "wire:50nm", "film:100nm[:0,0,1]"
with the film's surface normal; sizes in nm, um, mm, cm or m; --specularity
p for all), scattering rates added (Matthiessen's rule): boundaries
(Casimir), point defects and isotopes (--isotopes: natural isotopes of each
site's element; --g2 LIST per site), Umklapp in Slack's form (--gruneisen G
for the crystal, --gruneisen-branches LIST, or --gruneisen-models FILES at
other volumes; --umklapp-b, --theta, --velocity override the model's) and a
power law (--power A,n: A (ν/1 THz)ⁿ in 1/s).
CSV columns: sample,T_K,kappa_W_per_mK,kxx,kyy,kzz,kxy,kxz,kyz (the mean,
trace/3, then the tensor's components, W/(m·K)).
--cumulative T makes the output the cumulative κ at T K instead: CSV
columns sample,mean_free_path_m,kappa_by_mfp_W_per_mK,frequency_thz,
kappa_by_frequency_W_per_mK; --plot then draws the cumulative curves, else
κ(T) of every sample on one figure.` + heatCaution

func cmdConductivity(args []string, e *env) error {
	c := newModelCommand("conductivity", true)
	f := conductivityFlags{}
	f.register(c.fs)
	if err := c.parse(args, e, conductivitySummary); err != nil {
		return err
	}
	crystal, err := c.m.load()
	if err != nil {
		return err
	}
	req, err := f.request(c, crystal)
	if err != nil {
		return err
	}
	cl, ctx, release, err := c.dial()
	if err != nil {
		return err
	}
	defer release()
	done := e.prog.running("thermal conductivity on the " + describe(req.Qpoints))
	resp, err := cl.Conductivity(ctx, req)
	done()
	if err != nil {
		return heatStatus(err)
	}
	for _, s := range resp.GetSeries() {
		if n := s.GetUnscatteredModes(); n > 0 {
			e.note("%s: %d modes are scattered by nothing and were left out: κ is a lower bound", sampleName(s.GetSample()), n)
		}
	}
	cumulative := req.GetCumulativeTemperatureK() > 0
	if err := c.out.write(e.stdout, func(w io.Writer) error { return writeConductivity(w, c.out.format, resp, cumulative) }); err != nil {
		return err
	}
	if c.out.plot == "" {
		return nil
	}
	if cumulative {
		return cumulativeFigure{r: resp, title: crystal.GetName()}.write(c.out.plot, c.out.kind)
	}
	return kappaFigure{r: resp, title: crystal.GetName()}.write(c.out.plot, c.out.kind)
}
