package main

import (
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const fitSummary = `Fits free parameters of a model to measured data by weighted least
squares (Levenberg–Marquardt with analytic derivatives) and prints the
parameters with their standard errors, the correlations, χ²/dof and a
residual per datum. --free names the parameters by their path in the model
file (springs[0].k_long, shells[1].k_trans, blocks[2].phi[4]; repeat it or
separate with commas); --bound PATH=lo:hi bounds one (either end may be
empty), --tie PATH=OTHER or PATH=OTHER*ratio makes one follow a free one.
--data FILE.csv (repeatable) gives the data; each file's kind follows from
its header:
  q1,q2,q3,frequency_thz,sigma_thz[,branch][,polarization]   dispersion
  frequency_thz,sigma_thz[,branch]                           frequencies at Γ
  direction_x,direction_y,direction_z,velocity_km_s,sigma_km_s[,branch][,polarization]
  ij,elastic_constant_gpa,sigma_gpa                          elastic constants (Voigt 11…66)
  temperature_k,heat_capacity_j_per_mol_atoms_k,sigma_heat_capacity_j_per_mol_atoms_k
frequency_mev/sigma_mev and frequency_cm-1/sigma_cm-1 are read too; heat
capacities per mole of cells or per kilogram as the thermal output names
them (…_j_per_mol_cells_k, …_j_per_kg_k), summed over --grid (default as
thermal's). Without a branch a point takes the nearest model branch (data
at one q distinct ones); a polarization (longitudinal, transverse) limits
it to branches of that character. Errors: "±" is the standard error from
(JᵀWJ)⁻¹ scaled by χ²/dof (the σ as relative weights); "± unscaled"
takes the σ as absolute. --fitted FILE writes the fitted model (same
formats as --model); --residuals FILE.csv the residuals; --plot the fitted
dispersion along --path (default: the lattice's) with the data on it and
their error bars, above the normalised residuals of every datum.`

// listFlag is a repeatable string flag.
type listFlag []string

func (l *listFlag) String() string     { return strings.Join(*l, " ") }
func (l *listFlag) Set(s string) error { *l = append(*l, s); return nil }

// fitFlags are the flags of `fit` beyond the model, connection and output
// ones.
type fitFlags struct {
	data, free, bounds, ties listFlag
	fitted, residuals        string
	maxEval                  uint
	qs                       qsetFlags // the heat-capacity grid
	path, unit               string
	unitSet                  bool // --unit was given
}

func (f *fitFlags) register(c *modelCommand) {
	fs := c.fs
	fs.Var(&f.data, "data", "CSV file of measured data (repeatable; kind from the header, see above)")
	fs.Var(&f.free, "free", "free parameter paths, comma-separated (repeatable)")
	fs.Var(&f.bounds, "bound", "PATH=lo:hi bounds of a free parameter, force unit of the model (repeatable; an end may be empty)")
	fs.Var(&f.ties, "tie", "PATH=OTHER or PATH=OTHER*ratio: PATH follows the free parameter OTHER (repeatable)")
	fs.StringVar(&f.fitted, "fitted", "", "write the fitted model to FILE (.json, .pb or .binpb, as --model reads)")
	fs.StringVar(&f.residuals, "residuals", "", "write the residuals to FILE.csv")
	fs.UintVar(&f.maxEval, "max-evaluations", 0, "largest number of model evaluations (default: the server's, 100)")
	f.qs.register(fs, false)
	fs.StringVar(&f.path, "path", "", `path of the --plot dispersion: "G-X-W-L-G" or "G=0,0,0 X=0.5,0,0.5 ..." (default: the lattice's)`)
	fs.StringVar(&f.unit, "unit", "thz", "frequency unit of the table and the figure: thz, mev or cm-1 (default: the data files' when they share one)")
}

// fitInputs are the checked flags and the data read.
type fitInputs struct {
	unit    modegridv1.FrequencyUnit
	corners []pathCorner
	req     *modegridv1.FitRequest
	data    *fitData
}

// check parses the flags that need no model and reads the data files.
func (f *fitFlags) check(dim int) (fitInputs, error) {
	var in fitInputs
	var err error
	if in.unit, err = parseUnit(f.unit); err != nil {
		return in, usagef("%v", err)
	}
	if f.path != "" {
		if in.corners, err = parsePath(f.path); err != nil {
			return in, usagef("--path: %v", err)
		}
	}
	if len(f.data) == 0 {
		return in, usagef("--data FILE.csv is required (repeat it for several files)")
	}
	if f.fitted != "" {
		if ext := strings.ToLower(filepath.Ext(f.fitted)); ext == ".npz" {
			return in, usagef("--fitted: a fitted model is written as .json, .pb or .binpb, not %s", ext)
		}
	}
	in.req = &modegridv1.FitRequest{MaxEvaluations: uint32(min(f.maxEval, 1<<31))}
	if err := f.params(in.req); err != nil {
		return in, err
	}
	set, err := f.qs.set(dim, true)
	if err != nil {
		return in, err
	}
	if set.GetGrid() == nil {
		return in, usagef("the heat-capacity sum needs a Monkhorst–Pack --grid, not --cells")
	}
	in.data = &fitData{req: in.req, sources: map[string]datumSource{}, grid: set.GetGrid(), units: map[string]bool{}}
	for _, file := range f.data {
		if err := in.data.read(file); err != nil {
			return in, usagef("--data: %v", err)
		}
	}
	if !f.unitSet && len(in.data.units) == 1 {
		for u := range in.data.units {
			in.unit = units[u] // the unit of the data files, when they share one
		}
	}
	return in, nil
}

// params reads --free, --bound and --tie into req.
func (f *fitFlags) params(req *modegridv1.FitRequest) error {
	index := map[string]*modegridv1.FitParameter{}
	for _, list := range f.free {
		for _, p := range strings.Split(list, ",") {
			if p = strings.TrimSpace(p); p == "" {
				continue
			}
			fp := &modegridv1.FitParameter{Path: p}
			req.Free, index[p] = append(req.Free, fp), fp
		}
	}
	if len(req.Free) == 0 {
		return usagef("--free PATH is required: the parameters to fit, e.g. --free springs[0].k_long,shells[0].k_trans")
	}
	for _, b := range f.bounds {
		path, rng, ok := strings.Cut(b, "=")
		lo, hi, ok2 := strings.Cut(rng, ":")
		fp := index[strings.TrimSpace(path)]
		if !ok || !ok2 {
			return usagef("--bound %q: want PATH=lo:hi (an end may be empty)", b)
		}
		if fp == nil {
			return usagef("--bound %q: %s is not a --free parameter", b, strings.TrimSpace(path))
		}
		var err error
		if fp.Lower, err = optionalNumber(lo); err != nil {
			return usagef("--bound %q: lower bound: %v", b, err)
		}
		if fp.Upper, err = optionalNumber(hi); err != nil {
			return usagef("--bound %q: upper bound: %v", b, err)
		}
	}
	for _, t := range f.ties {
		path, rest, ok := strings.Cut(t, "=")
		to, ratio, hasRatio := strings.Cut(rest, "*")
		tie := &modegridv1.FitTie{Path: strings.TrimSpace(path), To: strings.TrimSpace(to)}
		if !ok || tie.Path == "" || tie.To == "" {
			return usagef("--tie %q: want PATH=OTHER or PATH=OTHER*ratio", t)
		}
		if hasRatio {
			r, err := strconv.ParseFloat(strings.TrimSpace(ratio), 64)
			if err != nil || r == 0 {
				return usagef("--tie %q: the ratio must be a non-zero number, got %q", t, ratio)
			}
			tie.Ratio = r
		}
		req.Ties = append(req.Ties, tie)
	}
	return nil
}

// optionalNumber parses a bound: empty for none.
func optionalNumber(s string) (*float64, error) {
	if s = strings.TrimSpace(s); s == "" {
		return nil, nil
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return nil, fmt.Errorf("%q is not a number", s)
	}
	return &v, nil
}

// cmdFit reads the model and the data, fits, and writes the result.
func cmdFit(args []string, e *env) error {
	c := newModelCommand("fit", true)
	var f fitFlags
	f.register(c)
	if err := c.parse(args, e, fitSummary); err != nil {
		return err
	}
	c.fs.Visit(func(fl *flag.Flag) { f.unitSet = f.unitSet || fl.Name == "unit" })
	crystal, err := c.m.load()
	if err != nil {
		return err
	}
	d, _ := dims(crystal)
	in, err := f.check(d)
	if err != nil {
		return err
	}
	cl, ctx, release, err := c.dial()
	if err != nil {
		return err
	}
	defer release()
	in.req.Model = c.source(crystal)
	done := e.prog.running("fit")
	resp, err := cl.Fit(ctx, in.req, nil)
	done()
	if err != nil {
		return err
	}
	res := resp.GetResult()
	if !res.GetConverged() {
		e.note("the fit did not converge: %s", res.GetStopReason())
	}
	view := fitView{name: crystal.GetName(), res: res, req: in.req, sources: in.data.sources, unit: in.unit}
	if err := c.out.write(e.stdout, func(w io.Writer) error { return writeFit(w, c.out.format, view) }); err != nil {
		return err
	}
	if f.residuals != "" {
		if err := writeFile(f.residuals, func(w io.Writer) error { return writeFitResiduals(w, view) }); err != nil {
			return err
		}
	}
	if f.fitted != "" {
		if err := writeModelFile(f.fitted, res.GetFitted()); err != nil {
			return err
		}
	}
	if c.out.plot == "" {
		return nil
	}
	return c.plotFit(ctx, cl, e, in, view)
}

// plotFit computes the fitted model's dispersion along the path and draws
// it with the data and the residuals.
func (c *modelCommand) plotFit(ctx context.Context, cl *client.Client, e *env, in fitInputs, view fitView) error {
	src := &modegridv1.ModelSource{Source: &modegridv1.ModelSource_ModelHash{ModelHash: view.res.GetFittedModelHash()},
		EnforceSumRule: in.req.GetModel().GetEnforceSumRule(), SymmetryToleranceA: in.req.GetModel().GetSymmetryToleranceA()}
	corners := in.corners
	if corners == nil {
		var err error
		if corners, err = standardPath(ctx, cl, src); err != nil {
			return err
		}
	}
	done := e.prog.running("fitted dispersion")
	disp, err := cl.Dispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: src, Path: pathPoints(corners), Unit: in.unit})
	done()
	if err != nil {
		return err
	}
	fig := fitFigure{view: view, disp: disp}
	if off := fig.offPath(); off > 0 {
		e.note("%d of %d dispersion points are not on the plotted path and are not drawn (--path chooses it)", off, len(in.req.GetFrequencies()))
	}
	return fig.write(c.out.plot, c.out.kind)
}

// writeFile creates file and writes it with fn.
func writeFile(file string, fn func(io.Writer) error) error {
	f, err := os.Create(file)
	if err != nil {
		return fmt.Errorf("cannot write %s: %w", file, err)
	}
	if err := fn(f); err != nil {
		f.Close()
		return err
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("cannot write %s: %w", file, err)
	}
	return nil
}

// writeModelFile writes a model in the format its extension names, as
// --model reads it: protobuf binary for .pb and .binpb, protobuf JSON
// (indented) otherwise.
func writeModelFile(file string, c *modegridv1.Crystal) error {
	var b []byte
	var err error
	switch strings.ToLower(filepath.Ext(file)) {
	case ".pb", ".binpb":
		b, err = proto.MarshalOptions{Deterministic: true}.Marshal(c)
	default:
		b, err = modelJSON(c)
	}
	if err != nil {
		return fmt.Errorf("encode the fitted model: %w", err)
	}
	return writeFile(file, func(w io.Writer) error { _, err := w.Write(b); return err })
}

// modelJSON is c as indented protobuf JSON, re-indented by encoding/json
// (byte-stable, as writeJSON).
func modelJSON(c *modegridv1.Crystal) ([]byte, error) {
	compact, err := protojson.Marshal(c)
	if err != nil {
		return nil, fmt.Errorf("encode the fitted model: %w", err)
	}
	var out bytes.Buffer
	if err := json.Indent(&out, compact, "", "  "); err != nil {
		return nil, fmt.Errorf("encode the fitted model: %w", err)
	}
	out.WriteByte('\n')
	return out.Bytes(), nil
}

// writeModelTo writes a model as indented protobuf JSON (a .json model file).
func writeModelTo(w io.Writer, c *modegridv1.Crystal) error {
	b, err := modelJSON(c)
	if err != nil {
		return err
	}
	_, err = w.Write(b)
	return err
}
