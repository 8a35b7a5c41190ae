package main

import (
	"flag"
	"fmt"
	"io"
	"strings"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// scatterFlags are the flags every scattering command shares: what the
// sites scatter with, the probe, the temperature, the energy axis, the
// resolution and the Debye–Waller factors.
type scatterFlags struct {
	sc                scattererFlags
	probe             string
	tempK             float64
	unit              string
	emin, emax, estep float64
	fwhm              string
	dwGrid            string
	noDW              bool
	allowUnstable     bool
}

// defaultScatterTempK is the sample temperature without --temp.
const defaultScatterTempK = 300

func (f *scatterFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&f.sc.b, "b", "", `coherent scattering lengths by label, fm: "P=3.1;Q=5.8" (default: the built-in table by element symbol)`)
	fs.StringVar(&f.sc.sigmaInc, "sigma-inc", "", `incoherent cross-sections by label, barn: "Q=2" (with --b of the same label)`)
	fs.StringVar(&f.sc.xrayF, "xray-f", "", `X-ray form factors by label: "P=26" (a constant, electrons) or "Q=a1,b1,…,a4,b4,c" (b in Å²)`)
	fs.StringVar(&f.probe, "probe", "neutron", "neutron or xray")
	fs.Float64Var(&f.tempK, "temp", defaultScatterTempK, "sample temperature, K")
	fs.StringVar(&f.unit, "unit", "mev", "energy unit: mev, thz or cm-1")
	fs.Float64Var(&f.emin, "emin", 0, "lowest energy transfer, in --unit (with --emax; both 0: 0 to 1.15 × the highest mode)")
	fs.Float64Var(&f.emax, "emax", 0, "highest energy transfer, in --unit")
	fs.Float64Var(&f.estep, "estep", 0, "energy step, in --unit (default: 200 steps)")
	fs.StringVar(&f.fwhm, "fwhm", "", `energy resolution, Gaussian FWHM in --unit: "c0" or a polynomial in E "c0,c1,c2,c3" (default: 2 × step)`)
	fs.StringVar(&f.dwGrid, "dw-grid", "", "grid of the Debye–Waller factors, N or N1xN2xN3 (default 24 per direction in 3D)")
	fs.BoolVar(&f.noDW, "no-debye-waller", false, "leave out the Debye–Waller factors (required for 1D crystals and 2D ones above 0 K)")
	fs.BoolVar(&f.allowUnstable, "allow-unstable", false, "leave imaginary modes out instead of failing")
}

// request builds the shared part of a request for a d-dimensional model.
func (f *scatterFlags) request(src *modegridv1.ModelSource, d int) (*modegridv1.ComputeScatteringRequest, error) {
	u, err := parseUnit(f.unit)
	if err != nil {
		return nil, usagef("%v", err)
	}
	req := &modegridv1.ComputeScatteringRequest{Model: src, TemperatureK: f.tempK, AllowUnstable: f.allowUnstable,
		Energy: &modegridv1.EnergyAxis{Min: f.emin, Max: f.emax, Step: f.estep, Unit: u}}
	switch strings.ToLower(strings.TrimSpace(f.probe)) {
	case "neutron":
		req.Probe = modegridv1.Probe_PROBE_NEUTRON
	case "xray", "x-ray":
		req.Probe = modegridv1.Probe_PROBE_XRAY
	default:
		return nil, usagef("--probe must be neutron or xray, got %q", f.probe)
	}
	if f.tempK < 0 {
		return nil, usagef("--temp must be ≥ 0 K, got %v", f.tempK)
	}
	if req.Scatterers, err = parseScatterers(f.sc); err != nil {
		return nil, usagef("%v", err)
	}
	if f.fwhm != "" {
		poly, err := parsePoly(f.fwhm)
		if err != nil {
			return nil, usagef("--fwhm: %v", err)
		}
		req.Resolution = &modegridv1.Resolution{Fwhm: poly}
	}
	req.DebyeWaller = &modegridv1.DebyeWaller{Off: f.noDW}
	if f.dwGrid != "" {
		mesh, err := parseMesh(f.dwGrid)
		if err != nil {
			return nil, usagef("--dw-grid %v", err)
		}
		req.DebyeWaller.Mesh = expandMesh(mesh, d)
	}
	return req, nil
}

// heatFlags choose the colour scale of a map.
type heatFlags struct {
	smax float64
	log  bool
}

func (h *heatFlags) register(fs *flag.FlagSet) {
	fs.Float64Var(&h.smax, "smax", 0, "with --plot: top of the colour scale, in the unit of S (default: the 99th percentile of the map)")
	fs.BoolVar(&h.log, "log", false, "with --plot: a logarithmic colour scale (four decades below the top)")
}

// run fills in the scattering request, calls it and returns the response.
func (c *modelCommand) scatter(e *env, req *modegridv1.ComputeScatteringRequest, what string) (*modegridv1.ComputeScatteringResponse, error) {
	cl, ctx, release, err := c.dial()
	if err != nil {
		return nil, err
	}
	defer release()
	done := e.prog.running(what)
	resp, err := cl.Scattering(ctx, req)
	done()
	if err != nil {
		return nil, err
	}
	if n := resp.GetImaginaryModes(); n > 0 {
		e.note("%d imaginary modes were left out (--allow-unstable)", n)
	}
	return resp, nil
}

const scatterSummary = `One-phonon scattering function S(Q, E) of a single crystal, as a neutron
(default) or X-ray spectrometer sees it: along a path of Q (--path, any
Brillouin zone: "200=2,0,0 300=3,0,0 311=3,1,1"), at a list of Q (--q
"h,k,l;h,k,l") or on a plane (--slice "origin;u;v" with --u and --v
first:last:count). Q is given in --frame frac (the model's reciprocal
lattice, default), cart (1/Å) or conv ((h,k,l) in units of 2π/a, a = --a
Å). E > 0: the sample gains a phonon. Coherent lengths come from --b (fm)
or, by element symbol, from the built-in table (Sears 1992); X-rays need
--xray-f. The output is S on the (Q, E) map (CSV: one row per Q and E),
or with --lines, and always as a table, each mode's energy and line
weights at each Q. --plot (paths) draws the map with the model's branches
over it and a colour scale.`

// singleFlags are the flags of `scatter` beyond the shared ones.
type singleFlags struct {
	path, q, slice, u, v string
	frame                string
	a                    float64
	points               uint
	lines                bool
	heat                 heatFlags
}

func (f *singleFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&f.path, "path", "", `corners "LABEL=q1,q2,q3 …" of a path of Q in --frame ('|' breaks it)`)
	fs.StringVar(&f.q, "q", "", `Q points "q1,q2,q3;q1,q2,q3" in --frame`)
	fs.StringVar(&f.slice, "slice", "", `a plane of Q "origin;u;v" (three vectors in --frame), with --u and --v`)
	fs.StringVar(&f.u, "u", "", "slice: values of u, first:last:count")
	fs.StringVar(&f.v, "v", "", "slice: values of v, first:last:count")
	fs.StringVar(&f.frame, "frame", "frac", "frame of Q: frac, cart (1/Å) or conv (2π/a, with --a)")
	fs.Float64Var(&f.a, "a", 0, "conventional cubic lattice constant, Å (--frame conv)")
	fs.UintVar(&f.points, "points", 0, "samples along the path (default: the server's, 201)")
	fs.BoolVar(&f.lines, "lines", false, "list each mode's energy and line weights at each Q instead of the map")
	f.heat.register(fs)
}

// target sets the request's frame and target from the flags.
func (f *singleFlags) target(req *modegridv1.ComputeScatteringRequest, plot bool) (string, error) {
	frame, err := parseFrame(f.frame)
	if err != nil {
		return "", usagef("%v", err)
	}
	req.Frame, req.ConventionalA = frame, f.a
	n := 0
	for _, s := range []string{f.path, f.q, f.slice} {
		if s != "" {
			n++
		}
	}
	switch {
	case n != 1:
		return "", usagef("give one of --path, --q and --slice")
	case plot && f.path == "":
		return "", usagef("--plot draws a path of Q: give --path")
	case f.path != "":
		return "path", f.pathTarget(req)
	case f.q != "":
		pts, err := parseQList(f.q)
		if err != nil {
			return "", usagef("--q: %v", err)
		}
		list := &modegridv1.QList{}
		for _, p := range pts {
			list.Points = append(list.Points, &modegridv1.QVector{Q1: p[0], Q2: p[1], Q3: p[2]})
		}
		req.Target = &modegridv1.ComputeScatteringRequest_QList{QList: list}
		return "list", nil
	}
	return "slice", f.sliceTarget(req)
}

func (f *singleFlags) pathTarget(req *modegridv1.ComputeScatteringRequest) error {
	corners, err := parsePath(f.path)
	if err != nil {
		return usagef("--path: %v", err)
	}
	p := &modegridv1.QPath{Points: uint32(f.points)}
	for i, c := range corners {
		if !c.HasQ {
			return usagef("--path: corner %d (%s) needs its Q: LABEL=q1,q2,q3 (built-in labels name first-zone points only)", i+1, displayLabel(c.Label))
		}
		p.Corners = append(p.Corners, &modegridv1.QPathCorner{Label: c.Label, BreakBefore: c.Break, Q: &modegridv1.QVector{Q1: c.Q[0], Q2: c.Q[1], Q3: c.Q[2]}})
	}
	req.Target = &modegridv1.ComputeScatteringRequest_Path{Path: p}
	return nil
}

func (f *singleFlags) sliceTarget(req *modegridv1.ComputeScatteringRequest) error {
	vecs, err := parseQList(f.slice)
	if err != nil || len(vecs) != 3 {
		return usagef("--slice: want three vectors origin;u;v, got %q", f.slice)
	}
	if f.u == "" || f.v == "" {
		return usagef("--slice needs --u and --v (first:last:count)")
	}
	u0, u1, nu, err := parseRange(f.u)
	if err != nil {
		return usagef("--u: %v", err)
	}
	v0, v1, nv, err := parseRange(f.v)
	if err != nil {
		return usagef("--v: %v", err)
	}
	vec := func(v [3]float64) *modegridv1.QVector { return &modegridv1.QVector{Q1: v[0], Q2: v[1], Q3: v[2]} }
	req.Target = &modegridv1.ComputeScatteringRequest_Slice{Slice: &modegridv1.QSlice{Origin: vec(vecs[0]), UVector: vec(vecs[1]), VVector: vec(vecs[2]),
		UMin: u0, UMax: u1, UPoints: nu, VMin: v0, VMax: v1, VPoints: nv}}
	return nil
}

func cmdScatter(args []string, e *env) error {
	c := newModelCommand("scatter", true)
	var sf scatterFlags
	var f singleFlags
	sf.register(c.fs)
	f.register(c.fs)
	if err := c.parse(args, e, scatterSummary); err != nil {
		return err
	}
	crystal, err := c.m.load()
	if err != nil {
		return err
	}
	d, _ := dims(crystal)
	req, err := sf.request(c.source(crystal), d)
	if err != nil {
		return err
	}
	kind, err := f.target(req, c.out.plot != "")
	if err != nil {
		return err
	}
	lines := f.lines || c.out.format == "table"
	req.Lines = lines || c.out.plot != ""
	resp, err := c.scatter(e, req, "scattering at "+kind+" of Q")
	if err != nil {
		return err
	}
	out := scatterOutput{resp: resp, kind: kind, probe: req.GetProbe(), frame: req.GetFrame(), a: req.GetConventionalA()}
	if err := c.out.write(e.stdout, func(w io.Writer) error {
		if lines && c.out.format != "json" {
			return out.writeLines(w, c.out.format)
		}
		return out.writeMap(w, c.out.format)
	}); err != nil {
		return err
	}
	if c.out.plot == "" {
		return nil
	}
	return plotScatterPath(c.out.plot, c.out.kind, scatterMapFigure{resp: resp, probe: req.GetProbe(), heat: f.heat, title: scatterTitle(crystal, req)})
}

const powderSummary = `Powder-averaged one-phonon scattering S(|Q|, E) on a grid of |Q|
(--qmin, --qmax, --qpoints; 1/Å) and energy transfer E, as a spectrometer
sees a powder: the coherent term averaged over the directions of Q (a
spherical quadrature doubled until each row changes by less than
--tolerance), plus for neutrons the incoherent one-phonon term of every
site with an incoherent cross-section (--coherent-only leaves it out).
CSV: one row per |Q| and E; the table lists each |Q| row's quadrature and
integral. --plot draws the map with a colour scale.`

func cmdPowder(args []string, e *env) error {
	c := newModelCommand("powder", true)
	var sf scatterFlags
	sf.register(c.fs)
	var heat heatFlags
	heat.register(c.fs)
	qmin := c.fs.Float64("qmin", 0.2, "smallest |Q|, 1/Å")
	qmax := c.fs.Float64("qmax", 8, "largest |Q|, 1/Å")
	qpoints := c.fs.Uint("qpoints", 40, "|Q| samples")
	tol := c.fs.Float64("tolerance", 0, "relative L1 change of a row between N and 2N directions taken as converged (default 0.02)")
	maxDirs := c.fs.Uint("max-directions", 0, "directions per |Q| sphere at most (default 2^20)")
	qFWHM := c.fs.Float64("q-fwhm", 0, "resolution in |Q|: Gaussian FWHM, 1/Å (default none)")
	coherentOnly := c.fs.Bool("coherent-only", false, "leave out the incoherent one-phonon term (neutrons)")
	if err := c.parse(args, e, powderSummary); err != nil {
		return err
	}
	crystal, err := c.m.load()
	if err != nil {
		return err
	}
	d, _ := dims(crystal)
	req, err := sf.request(c.source(crystal), d)
	if err != nil {
		return err
	}
	if *qpoints > 1<<20 || *maxDirs > 1<<30 {
		return usagef("--qpoints at most %d, --max-directions at most %d", 1<<20, 1<<30)
	}
	req.Target = &modegridv1.ComputeScatteringRequest_Powder{Powder: &modegridv1.PowderSpec{QMinInvA: *qmin, QMaxInvA: *qmax, QPoints: uint32(*qpoints),
		Tolerance: *tol, MaxDirections: uint32(*maxDirs), CoherentOnly: *coherentOnly}}
	if *qFWHM != 0 {
		if req.Resolution == nil {
			req.Resolution = &modegridv1.Resolution{}
		}
		req.Resolution.QFwhmInvA = *qFWHM
	}
	resp, err := c.scatter(e, req, fmt.Sprintf("powder map of %d |Q| rows", *qpoints))
	if err != nil {
		return err
	}
	if n := resp.GetPowderUnconvergedRows(); n > 0 {
		e.note("%d |Q| rows reached the direction cap above the tolerance (their change is in the table; --max-directions raises the cap)", n)
	}
	if err := c.out.write(e.stdout, func(w io.Writer) error { return writePowder(w, c.out.format, resp, req.GetProbe()) }); err != nil {
		return err
	}
	if c.out.plot == "" {
		return nil
	}
	return plotPowderMap(c.out.plot, c.out.kind, scatterMapFigure{resp: resp, probe: req.GetProbe(), heat: heat, title: scatterTitle(crystal, req)})
}

const weightedDOSSummary = `Neutron-weighted density of states: each site's projected DOS weighted
by its total bound cross-section over its mass, σ/m (the incoherent
approximation), on a Monkhorst–Pack grid (--grid, default by dimension),
broadened by the energy resolution; also normalised to the DOS's own
number of states. --plot draws both.`

func cmdWeightedDOS(args []string, e *env) error {
	c := newModelCommand("weighted-dos", true)
	var sf scatterFlags
	sf.register(c.fs)
	var qs qsetFlags
	c.fs.StringVar(&qs.grid, "grid", "", "Monkhorst–Pack grid N1xN2xN3, or one N for every direction")
	if err := c.parse(args, e, weightedDOSSummary); err != nil {
		return err
	}
	crystal, err := c.m.load()
	if err != nil {
		return err
	}
	d, _ := dims(crystal)
	req, err := sf.request(c.source(crystal), d)
	if err != nil {
		return err
	}
	set, err := qs.set(d, true)
	if err != nil {
		return err
	}
	req.Target = &modegridv1.ComputeScatteringRequest_WeightedDos{WeightedDos: &modegridv1.WeightedDosSpec{Grid: set.GetGrid()}}
	resp, err := c.scatter(e, req, "neutron-weighted DOS on the "+describe(set))
	if err != nil {
		return err
	}
	if err := c.out.write(e.stdout, func(w io.Writer) error { return writeWeightedDOS(w, c.out.format, resp) }); err != nil {
		return err
	}
	if c.out.plot == "" {
		return nil
	}
	return plotWeightedDOS(c.out.plot, c.out.kind, resp, crystal.GetName()+": neutron-weighted DOS")
}

// scatterTitle names the crystal, the probe and the temperature.
func scatterTitle(c *modegridv1.Crystal, req *modegridv1.ComputeScatteringRequest) string {
	probe := "neutrons"
	if req.GetProbe() == modegridv1.Probe_PROBE_XRAY {
		probe = "X-rays"
	}
	t := fmt.Sprintf("%s, T = %g K", probe, req.GetTemperatureK())
	if n := c.GetName(); n != "" {
		t = n + ": " + t
	}
	return t
}
