package main

import (
	"context"
	"flag"
	"fmt"
	"io"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

const pathSummary = `Frequencies along a path of straight segments through labelled points.
Without --path, the default path of the crystal's lattice is used (sc, fcc,
bcc, hexagonal in 3D; every 2D net; 1D; a 3D lattice of lower symmetry
needs --path). --path G-X-W-L-G uses the built-in points of the crystal's lattice (G is Γ;
'|' starts a disconnected piece), --path "G=0,0,0 X=0.5,0,0.5" gives them in
fractional reciprocal coordinates. Distances are cumulative, in 1/Å (2π
included). --follow-modes orders each sample's frequencies by branch,
following every mode by eigenvector overlap through crossings (--connect is
its deprecated old name). With --plot the branches are coloured by the
sites that carry the motion, and a DOS panel, stacked by site in the same
colours, shares the frequency axis (grid: --grid, or a default; --no-dos
omits it). --measured FILE.csv overlays measured frequencies and makes the
output the residuals (measured − model) instead of the listing; its
columns: q1,q2,q3,freq_UNIT[,sigma][,branch] or
distance_invA,freq_UNIT[,sigma][,branch] (UNIT: THz, meV or cm-1).`

// pathFlags are the flags of `path` beyond the model, connection and
// output ones.
type pathFlags struct {
	qs         qsetFlags // the DOS panel's grid
	path       string
	points     uint
	spacing    float64 // 1/Å
	follow     bool
	connectOld bool // deprecated name of follow
	measured   string
	unit       string
	method     string
	width      float64 // in unit
	noDOS      bool
}

// register defines the flags on fs.
func (f *pathFlags) register(fs *flag.FlagSet) {
	f.qs.register(fs, false)
	fs.StringVar(&f.path, "path", "", `corners: "G-X-W-L-G" (built-in labels) or "G=0,0,0 X=0.5,0,0.5 ..."`)
	fs.UintVar(&f.points, "points", 0, "samples along the whole path (default: the server's, 201)")
	fs.Float64Var(&f.spacing, "spacing", 0, "sample spacing in 1/Å instead of --points")
	fs.BoolVar(&f.follow, "follow-modes", false, "order frequencies by branch, following each mode through crossings by eigenvector overlap, instead of ascending")
	fs.BoolVar(&f.connectOld, "connect", false, "deprecated: the old name of --follow-modes")
	fs.StringVar(&f.measured, "measured", "", "CSV of measured frequencies to compare with (see above)")
	fs.StringVar(&f.unit, "unit", "thz", "frequency unit: thz, mev or cm-1")
	fs.StringVar(&f.method, "method", "tetrahedron", "DOS method of the panel: tetrahedron, gaussian or histogram")
	fs.Float64Var(&f.width, "width", 0, "Gaussian width of the panel's DOS, in --unit (default: from the grid)")
	fs.BoolVar(&f.noDOS, "no-dos", false, "plot the dispersion without the DOS panel")
}

// pathInputs are the flags of `path` checked and parsed.
type pathInputs struct {
	unit    modegridv1.FrequencyUnit
	method  modegridv1.DosMethod
	rows    []measuredRow // of --measured; nil without it
	corners []pathCorner  // of --path; nil for the lattice's default path
}

// check parses and checks the flags that need no model, in the order a
// user reads them, and notes the deprecated --connect.
func (f *pathFlags) check(e *env) (pathInputs, error) {
	var in pathInputs
	var err error
	if in.unit, err = parseUnit(f.unit); err != nil {
		return in, usagef("%v", err)
	}
	if in.method, err = parseMethod(f.method); err != nil {
		return in, usagef("%v", err)
	}
	if f.spacing < 0 {
		return in, usagef("--spacing must be > 0 1/Å, got %v", f.spacing)
	}
	if f.connectOld {
		e.note("--connect is deprecated; it is now called --follow-modes")
	}
	if f.measured != "" {
		if in.rows, err = readPathMeasured(f.measured, unitPerTHz(in.unit)); err != nil {
			return in, usagef("--measured: %v", err)
		}
	}
	if f.path != "" {
		if in.corners, err = parsePath(f.path); err != nil {
			return in, usagef("--path: %v", err)
		}
	}
	return in, nil
}

// cmdPath computes the dispersion along a path and writes it (or, with
// --measured, the residuals), then with --plot draws it beside a DOS panel.
func cmdPath(args []string, e *env) error {
	c := newModelCommand("path", true)
	var f pathFlags
	f.register(c.fs)
	if err := c.parse(args, e, pathSummary); err != nil {
		return err
	}
	in, err := f.check(e)
	if err != nil {
		return err
	}
	crystal, err := c.m.load()
	if err != nil {
		return err
	}
	d, _ := dims(crystal)
	var dosSet *modegridv1.QPointSet
	if c.out.plot != "" && !f.noDOS {
		if dosSet, err = f.qs.set(d, true); err != nil {
			return err
		}
	}
	cl, ctx, release, err := c.dial()
	if err != nil {
		return err
	}
	defer release()
	src := c.source(crystal)
	if in.corners == nil {
		if in.corners, err = standardPath(ctx, cl, src); err != nil {
			return err
		}
	}
	manySites := len(crystal.GetSites()) > 1
	req := &modegridv1.ComputeDispersionRequest{
		Model: src, Path: pathPoints(in.corners), Points: uint32(f.points), SpacingInvA: f.spacing,
		Unit: in.unit, FollowModes: f.follow || f.connectOld, SiteWeights: c.out.plot != "" && manySites,
	}
	done := e.prog.running("dispersion")
	resp, err := cl.Dispersion(ctx, req)
	done()
	if err != nil {
		return err
	}
	var overlay []plotPoint
	if in.rows != nil {
		if overlay, err = c.pathResiduals(ctx, cl, e, src, f.measured, in.rows, resp); err != nil {
			return err
		}
	} else if err := c.out.write(e.stdout, func(w io.Writer) error { return writePath(w, c.out.format, resp) }); err != nil {
		return err
	}
	if c.out.plot == "" {
		return nil
	}
	var dos *modegridv1.ComputeDosResponse
	if dosSet != nil {
		done := e.prog.running("density of states for the side panel")
		dos, err = cl.DOS(ctx, &modegridv1.ComputeDosRequest{Model: src, Qpoints: dosSet, Method: in.method, Unit: in.unit, Width: f.width, PerSite: manySites})
		done()
		if err != nil {
			return err
		}
	}
	return plotDispersion(c.out.plot, c.out.kind, dispersionFigure{disp: resp, dos: dos, key: newSiteKey(siteLabels(crystal)),
		measured: overlay, title: crystal.GetName()})
}

// pathResiduals places the measured rows on the path, asks the model's
// frequencies at their q and writes the residuals as the output.
func (c *modelCommand) pathResiduals(ctx context.Context, cl *client.Client, e *env, src *modegridv1.ModelSource, file string, rows []measuredRow,
	resp *modegridv1.ComputeDispersionResponse) ([]plotPoint, error) {
	if err := locateOnPath(file, rows, resp.GetSamples()); err != nil {
		return nil, usagef("--measured: %v", err)
	}
	list := &modegridv1.QPointList{}
	for _, m := range rows {
		list.Points = append(list.Points, &modegridv1.QPoint{Q1: m.q[0], Q2: m.q[1], Q3: m.q[2]})
	}
	done := e.prog.running("modes at the measured points")
	modes, err := cl.Modes(ctx, &modegridv1.ComputeModesRequest{Model: src, Unit: resp.GetUnit(),
		Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: list}}})
	done()
	if err != nil {
		return nil, err
	}
	rs, err := pathResiduals(file, rows, modes.GetPoints())
	if err != nil {
		return nil, usagef("--measured: %v", err)
	}
	u := unitName(resp.GetUnit())
	t := residualTable{xName: "distance (1/Å)", xCSV: "distance_invA", yName: "ν (" + unitLabel(resp.GetUnit()) + ")", yCSV: "freq_" + u, path: true}
	c.out.explicit = true // with --measured the residuals are the output, also beside --plot
	return plotPoints(rows), c.out.write(e.stdout, func(w io.Writer) error { return writeResiduals(w, c.out.format, t, rs) })
}

// unitPerTHz is the value of 1 THz in an output unit.
func unitPerTHz(u modegridv1.FrequencyUnit) float64 {
	switch u {
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV:
		return freqPerTHz["meV"]
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1:
		return freqPerTHz["cm-1"]
	}
	return 1
}

// standardPath asks the server for the model's default path (by lattice
// type and dimensionality) and returns it, or a usage error when the
// lattice has none.
func standardPath(ctx context.Context, cl *client.Client, src *modegridv1.ModelSource) ([]pathCorner, error) {
	chk, err := cl.Check(ctx, &modegridv1.CheckModelRequest{Model: src})
	if err != nil {
		return nil, err
	}
	if !chk.GetValid() {
		ie := &invalidError{msg: fmt.Sprintf("the model is invalid (%d problem%s)", len(chk.GetViolations()), plural(len(chk.GetViolations())))}
		for _, v := range chk.GetViolations() {
			ie.violations = append(ie.violations, v.GetField()+": "+v.GetDescription())
		}
		return nil, ie
	}
	return defaultPath(chk)
}

// defaultPath converts the check's default path to corners; a usage error
// when the lattice has none.
func defaultPath(chk *modegridv1.CheckModelResponse) ([]pathCorner, error) {
	if len(chk.GetDefaultPath()) < 2 {
		lt := chk.GetLatticeType()
		if lt == "" {
			lt = "unrecognised"
		}
		return nil, usagef(`--path is required: the %dD %s lattice has no default path (give coordinates, e.g. --path "G=0,0,0 X=0.5,0,0")`, chk.GetDimensions(), lt)
	}
	var out []pathCorner
	for _, p := range chk.GetDefaultPath() {
		out = append(out, pathCorner{Label: p.GetLabel(), Break: p.GetBreakBefore()})
	}
	return out, nil
}

// pathPoints converts parsed corners to the API's path points.
func pathPoints(cs []pathCorner) []*modegridv1.PathPoint {
	out := make([]*modegridv1.PathPoint, len(cs))
	for i, c := range cs {
		p := &modegridv1.PathPoint{Label: c.Label, BreakBefore: c.Break}
		if c.HasQ {
			p.Q = &modegridv1.QPoint{Q1: c.Q[0], Q2: c.Q[1], Q3: c.Q[2]}
		}
		out[i] = p
	}
	return out
}
