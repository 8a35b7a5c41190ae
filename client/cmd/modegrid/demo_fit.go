package main

import (
	"context"
	"fmt"
	"io"
	"math/rand/v2"
	"path/filepath"

	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/client"
	"github.com/materials-lab/modegrid/proto/examples"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// The demo's fit: the rock-salt-like example's four shell constants fitted
// to invented "measured" frequencies. The data are the example's own
// frequencies along its default path with the constants changed by the
// factors below (the "invented truth") and seeded Gaussian noise of
// σ = 0.05 THz + 1 % added: not real data, and said so in the file.

// demoFitExample is the example the demo fits.
const demoFitExample = "rocksalt-like"

// demoFitPaths are the fitted parameters and demoTruth the factors that
// make the invented truth from the example's values.
var (
	demoFitPaths = []string{"shells[0].k_long", "shells[0].k_trans", "shells[1].k_long", "shells[2].k_long"}
	demoTruth    = []float64{1.06, 0.9, 1.1, 0.95}
)

// demoFitPoints is the number of invented frequencies (40: the typical
// fit of DEVELOPERS.md).
const demoFitPoints = 40

// demoFit invents the data, fits, prints the parameters and writes the
// data, the parameter table, the fitted model and the figure; it returns
// the number of files written.
func demoFit(ctx context.Context, cl *client.Client, e *env, dir, kind string) (int, error) {
	start, err := examples.Load(demoFitExample)
	if err != nil {
		return 0, err
	}
	truth := proto.Clone(start).(*modegridv1.Crystal)
	want := make([]float64, len(demoFitPaths))
	for i, f := range demoTruth {
		sh := truth.GetShells()[[]int{0, 0, 1, 2}[i]]
		if i == 1 {
			sh.KTrans *= f
			want[i] = sh.KTrans
		} else {
			sh.KLong *= f
			want[i] = sh.KLong
		}
	}
	done := e.prog.running(demoFitExample + ": fit to invented data")
	data, corners, err := inventData(ctx, cl, truth)
	if err != nil {
		done()
		return 0, err
	}
	req := &modegridv1.FitRequest{Model: client.Inline(start), Frequencies: data}
	for _, p := range demoFitPaths {
		req.Free = append(req.Free, &modegridv1.FitParameter{Path: p})
	}
	resp, err := cl.Fit(ctx, req, nil)
	if err != nil {
		done()
		return 0, err
	}
	res := resp.GetResult()
	disp, err := cl.Dispersion(ctx, &modegridv1.ComputeDispersionRequest{Path: pathPoints(corners),
		Model: &modegridv1.ModelSource{Source: &modegridv1.ModelSource_ModelHash{ModelHash: res.GetFittedModelHash()}}})
	done()
	if err != nil {
		return 0, err
	}
	base := filepath.Join(dir, demoFitExample)
	files := 0
	save := func(name string, fn func(io.Writer) error) error {
		files++
		return writeFile(base+name, fn)
	}
	sources := map[string]datumSource{}
	for i := range data {
		sources[fmt.Sprintf("frequencies[%d]", i)] = datumSource{file: filepath.Base(base + "-fit-data.csv"), line: i + 5}
	}
	view := fitView{name: demoFitExample, res: res, req: req, sources: sources, unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_THZ}
	steps := []error{
		save("-fit-data.csv", func(w io.Writer) error { return writeInventedData(w, data) }),
		save("-fit.csv", func(w io.Writer) error { return writeFitCSV(w, view) }),
		save("-fitted.json", func(w io.Writer) error { return writeModelTo(w, res.GetFitted()) }),
		save("-fit."+kind, func(w io.Writer) error {
			f, err := fitFigure{view: view, disp: disp}.build()
			if err != nil {
				return err
			}
			return f.writeTo(w, kind)
		}),
	}
	for _, err := range steps {
		if err != nil {
			return files, err
		}
	}
	return files, writeDemoFit(e.stdout, res, want)
}

// inventData returns demoFitPoints frequencies of model at samples of its
// default path (away from the corners), with seeded Gaussian noise, and
// the path's corners (the figure's path).
func inventData(ctx context.Context, cl *client.Client, model *modegridv1.Crystal) ([]*modegridv1.FrequencyDatum, []pathCorner, error) {
	src := client.Inline(model)
	corners, err := standardPath(ctx, cl, src)
	if err != nil {
		return nil, nil, err
	}
	disp, err := cl.Dispersion(ctx, &modegridv1.ComputeDispersionRequest{Model: src, Path: pathPoints(corners), Points: 81})
	if err != nil {
		return nil, nil, err
	}
	rng := rand.New(rand.NewPCG(2024, 11)) // fixed: the demo's data are the same every run
	var out []*modegridv1.FrequencyDatum
	for i, s := range disp.GetSamples() {
		if i%8 != 4 {
			continue
		}
		for _, f := range s.GetFrequencies() {
			if f < 0.5 || len(out) == demoFitPoints {
				continue // the acoustic modes near Γ are not measured
			}
			sigma := 0.05 + 0.01*f
			out = append(out, &modegridv1.FrequencyDatum{Q: s.GetQ(), FrequencyThz: f + sigma*rng.NormFloat64(), SigmaThz: sigma})
		}
	}
	return out, corners, nil
}

// writeInventedData writes the invented data as a fit data file.
func writeInventedData(w io.Writer, data []*modegridv1.FrequencyDatum) error {
	fmt.Fprintf(w, "# Invented \"measurements\", not real data: frequencies of the %s example with\n", demoFitExample)
	fmt.Fprintf(w, "# its shell constants multiplied by %v, plus seeded Gaussian noise of sigma.\n", demoTruth)
	fmt.Fprintf(w, "# Made by modegrid demo; fit with modegrid fit --data this-file.\n")
	c := newCSV(w)
	c.row("q1", "q2", "q3", "frequency_thz", "sigma_thz")
	for _, d := range data {
		q := d.GetQ()
		c.row(num(q.GetQ1()), num(q.GetQ2()), num(q.GetQ3()), num(d.GetFrequencyThz()), num(d.GetSigmaThz()))
	}
	return c.flush()
}

// writeDemoFit prints the fitted parameters beside the invented truth.
func writeDemoFit(w io.Writer, res *modegridv1.FitResult, truth []float64) error {
	fmt.Fprintf(w, "\nfit of the %s shell constants (N/m) to %d invented frequencies (not real data):\n", demoFitExample, res.GetData())
	t := newTable(w)
	t.row("parameter", "start", "invented truth", "fitted", "±", "± unscaled", "(fitted − truth)/±")
	for i, p := range res.GetParameters() {
		t.row(p.GetPath(), g5(p.GetStart()), g5(truth[i]), g5(p.GetValue()), g5(p.GetStdError()), g5(p.GetStdErrorUnscaled()),
			f4((p.GetValue()-truth[i])/p.GetStdError()))
	}
	if err := t.flush(); err != nil {
		return err
	}
	_, err := fmt.Fprintf(w, "χ²/dof = %s (%d degrees of freedom), %d steps, %d evaluations\n",
		g5(res.GetReducedChiSquare()), res.GetDegreesOfFreedom(), res.GetIterations(), res.GetEvaluations())
	return err
}
