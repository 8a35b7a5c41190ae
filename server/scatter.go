package server

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"strings"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/scatter"
	"github.com/materials-lab/modegrid/physics/thermo"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

var scatterCodec = protoCodec(func() *modegridv1.ComputeScatteringResponse { return &modegridv1.ComputeScatteringResponse{} })

// ComputeScattering returns one-phonon scattering intensities: S(Q, E) of
// a single crystal, the powder map or the neutron-weighted DOS. Cached by
// (model hash, canonical parameters). Imaginary modes are
// FAILED_PRECONDITION unless allow_unstable.
func (s *Service) ComputeScattering(ctx context.Context, req *modegridv1.ComputeScatteringRequest) (*modegridv1.ComputeScatteringResponse, error) {
	resp, err := s.computeScattering(ctx, req)
	switch {
	case errors.Is(err, thermo.ErrUnstable):
		return nil, status.Errorf(codes.FailedPrecondition, "%v (set allow_unstable to compute anyway, leaving imaginary modes out)", err)
	case errors.Is(err, scatter.ErrOverflow):
		return nil, status.Errorf(codes.FailedPrecondition, "%v", err)
	}
	return resp, s.toStatus(ctx, "ComputeScattering", err)
}

// scatterJob is a converted request.
type scatterJob struct {
	opt     scatter.Options
	sources []string
	qs      []scatter.QSample // single crystal
	powder  *scatter.PowderOptions
	dos     *mesh.GridSpec
	lines   bool
}

func (s *Service) computeScattering(ctx context.Context, req *modegridv1.ComputeScatteringRequest) (*modegridv1.ComputeScatteringResponse, error) {
	var vs violations
	if req.GetTarget() == nil {
		vs.Add("q_list", "say what to compute: one of q_list, path, slice, powder or weighted_dos")
	}
	if s.precheckScatter(&vs, req) {
		return nil, vs.Err() // refused from the request alone, before compiling
	}
	e, err := s.resolve(ctx, req.GetModel(), &vs)
	if err != nil {
		return nil, err
	}
	if e == nil || vs.Len() > 0 {
		return nil, vs.Err()
	}
	job := s.scatterJob(e.m, req, &vs)
	if err := vs.Err(); err != nil {
		return nil, err
	}
	est, err := s.scatterEstimate(ctx, e, job, req)
	if err != nil {
		return nil, err
	}
	canon := scatterParams(req)
	rows, what := scatterRows(job)
	s.checkReply(&vs, targetName(req), scatterReplyBytes(e.m, job, canon),
		fmt.Sprintf("%d %s × %d energies (energy)", rows, what, axisSamples(job.opt.Axis)))
	s.budget.check(&vs, est)
	if err := vs.Err(); err != nil {
		return nil, err
	}
	return cachedResult(ctx, s, kindScatter, e.hash, canon, scatterCodec, func(ctx context.Context) (*modegridv1.ComputeScatteringResponse, error) {
		var out *modegridv1.ComputeScatteringResponse
		err := s.admitted(ctx, est, func(ctx context.Context) error {
			return s.run(ctx, kindScatter, func(ctx context.Context) error {
				var err error
				out, err = runScatter(ctx, e, job)
				return sumRuleCause(e, scatterFields(err, targetName(req)))
			})
		})
		if err != nil {
			return nil, err
		}
		out.ModelHash, out.Parameters = e.hash, canon
		return out, nil
	})
}

// scatterParams is the canonical parameter string: the kind of target
// and the digest of the request without its model (deterministic protobuf
// encoding), so equal requests share a cache entry.
func scatterParams(req *modegridv1.ComputeScatteringRequest) string {
	c := proto.Clone(req).(*modegridv1.ComputeScatteringRequest)
	c.Model = nil
	b, _ := proto.MarshalOptions{Deterministic: true}.Marshal(c)
	sum := sha256.Sum256(b)
	var p params
	p.add("target", targetName(req))
	p.add("probe", scatter.Probe(max(0, int(req.GetProbe())-1)).String())
	p.add("temperature_k", fmtFloat(req.GetTemperatureK()))
	p.add("request", hex.EncodeToString(sum[:16]))
	return p.String()
}

func targetName(req *modegridv1.ComputeScatteringRequest) string {
	switch req.GetTarget().(type) {
	case *modegridv1.ComputeScatteringRequest_QList:
		return "q_list"
	case *modegridv1.ComputeScatteringRequest_Path:
		return "path"
	case *modegridv1.ComputeScatteringRequest_Slice:
		return "slice"
	case *modegridv1.ComputeScatteringRequest_Powder:
		return "powder"
	case *modegridv1.ComputeScatteringRequest_WeightedDos:
		return "weighted_dos"
	}
	return "none"
}

// scatterJob converts the request for model m, adding violations.
func (s *Service) scatterJob(m *physics.Model, req *modegridv1.ComputeScatteringRequest, vs *violations) *scatterJob {
	job := &scatterJob{lines: req.GetLines()}
	o := &job.opt
	switch req.GetProbe() {
	case modegridv1.Probe_PROBE_UNSPECIFIED, modegridv1.Probe_PROBE_NEUTRON:
		o.Probe = scatter.Neutron
	case modegridv1.Probe_PROBE_XRAY:
		o.Probe = scatter.XRay
	default:
		vs.Add("probe", "unknown probe %d", req.GetProbe())
	}
	o.TempK, o.AllowUnstable, o.Cache = req.GetTemperatureK(), req.GetAllowUnstable(), s.reductions
	o.Sites, job.sources = scatter.Resolve(m, o.Probe, givenScatterers(req, vs), vs)
	ax := req.GetEnergy()
	o.Axis = scatter.Axis{Min: canonFloat(ax.GetMin()), Max: canonFloat(ax.GetMax()), Step: canonFloat(ax.GetStep()), Unit: physics.MeV}
	switch ax.GetUnit() {
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_UNSPECIFIED, modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV:
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_THZ:
		o.Axis.Unit = physics.THz
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1:
		o.Axis.Unit = physics.CM1
	default:
		vs.Add("energy.unit", "must be meV, THz or cm⁻¹, got %v", ax.GetUnit())
	}
	o.Resolution = scatter.Resolution{FWHM: req.GetResolution().GetFwhm(), QFWHM: req.GetResolution().GetQFwhmInvA()}
	dw := req.GetDebyeWaller()
	o.DebyeWaller.Off = dw.GetOff()
	if len(dw.GetMesh()) > m.Dim() {
		vs.Add("debye_waller.mesh", "at most %d numbers for a %d-dimensional crystal, got %d", m.Dim(), m.Dim(), len(dw.GetMesh()))
	}
	for k, n := range dw.GetMesh() {
		if k < 3 {
			o.DebyeWaller.Mesh[k] = int(min(n, 1<<20))
		}
	}
	if !dw.GetOff() && (m.Dim() == 1 || (m.Dim() == 2 && req.GetTemperatureK() > 0)) {
		vs.Add("debye_waller.off", "the mean-square displacement of a %d-dimensional crystal diverges at %v K (Peierls; Mermin–Wagner): set off for the bare one-phonon intensities", m.Dim(), req.GetTemperatureK())
	}
	s.scatterTarget(m, req, job, vs)
	return job
}

// givenScatterers converts the request's scatterers.
func givenScatterers(req *modegridv1.ComputeScatteringRequest, vs *violations) []scatter.Given {
	var out []scatter.Given
	for i, sc := range req.GetScatterers() {
		g := scatter.Given{Site: -1, CoherentFm: sc.CoherentFm, IncoherentBarn: sc.IncoherentBarn}
		switch t := sc.GetTarget().(type) {
		case *modegridv1.Scatterer_Site:
			g.Site = int(t.Site)
		case *modegridv1.Scatterer_Label:
			g.Label = t.Label
		default:
			vs.Add(fmt.Sprintf("scatterers[%d].label", i), "name a label or a site")
		}
		if ff := sc.GetFormFactor(); ff != nil {
			if len(ff.GetA()) > 4 || len(ff.GetA()) != len(ff.GetBA2()) {
				vs.Add(fmt.Sprintf("scatterers[%d].form_factor", i), "give at most 4 coefficients a and as many b_a2, got %d and %d", len(ff.GetA()), len(ff.GetBA2()))
			} else {
				f := scatter.FormFactor{C: ff.GetC()}
				copy(f.A[:], ff.GetA())
				copy(f.B[:], ff.GetBA2())
				g.FormFactor = &f
			}
		}
		out = append(out, g)
	}
	return out
}

// scatterTarget converts what to compute.
func (s *Service) scatterTarget(m *physics.Model, req *modegridv1.ComputeScatteringRequest, job *scatterJob, vs *violations) {
	conv := scatter.QConv{A: req.GetConventionalA()}
	switch req.GetFrame() {
	case modegridv1.QFrame_Q_FRAME_UNSPECIFIED, modegridv1.QFrame_Q_FRAME_FRACTIONAL:
	case modegridv1.QFrame_Q_FRAME_CARTESIAN:
		conv.Frame = scatter.Cartesian
	case modegridv1.QFrame_Q_FRAME_CONVENTIONAL:
		conv.Frame = scatter.Conventional
	default:
		vs.Add("frame", "unknown frame %d", req.GetFrame())
		return
	}
	vec := func(q *modegridv1.QVector, field string) [3]float64 {
		return conv.ToFrac(m, [3]float64{q.GetQ1(), q.GetQ2(), q.GetQ3()}, field, vs)
	}
	maxQ := min(scatter.MaxQSamples, s.cfg.MaxQPoints)
	switch t := req.GetTarget().(type) {
	case *modegridv1.ComputeScatteringRequest_QList:
		pts := t.QList.GetPoints()
		if len(pts) == 0 || len(pts) > maxQ {
			vs.Add("q_list.points", "1 to %d points are needed, got %d", maxQ, len(pts))
			return
		}
		for i, q := range pts {
			job.qs = append(job.qs, scatter.QSample{Q: vec(q, fmt.Sprintf("q_list.points[%d]", i))})
		}
	case *modegridv1.ComputeScatteringRequest_Path:
		cs := t.Path.GetCorners()
		n := int(t.Path.GetPoints())
		if n == 0 {
			n = physics.DefaultPathPoints
		}
		if len(cs) < 2 || len(cs) > 1000 || n > maxQ {
			vs.Add("path", "2 to 1000 corners and at most %d points are needed, got %d corners and %d points", maxQ, len(cs), n)
			return
		}
		var corners []scatter.PathCorner
		for i, c := range cs {
			corners = append(corners, scatter.PathCorner{Q: vec(c.GetQ(), fmt.Sprintf("path.corners[%d].q", i)), Label: c.GetLabel(), BreakBefore: c.GetBreakBefore() && i > 0})
		}
		job.qs = scatter.SamplePath(m, corners, n)
	case *modegridv1.ComputeScatteringRequest_Slice:
		job.qs = sliceSamples(m, t.Slice, maxQ, vec, vs)
	case *modegridv1.ComputeScatteringRequest_Powder:
		p := t.Powder
		job.powder = &scatter.PowderOptions{QMinInvA: p.GetQMinInvA(), QMaxInvA: p.GetQMaxInvA(), NQ: int(min(p.GetQPoints(), 1<<30)), Tolerance: p.GetTolerance(), MaxDirections: int(min(p.GetMaxDirections(), 1<<30)), CoherentOnly: p.GetCoherentOnly()}
	case *modegridv1.ComputeScatteringRequest_WeightedDos:
		job.dos = s.weightedDOSGrid(m, t.WeightedDos.GetGrid(), vs)
	}
}

// sliceSamples converts a slice of Q to its points (nil after a
// violation); vec converts one vector of the request's frame.
func sliceSamples(m *physics.Model, sl *modegridv1.QSlice, maxQ int, vec func(*modegridv1.QVector, string) [3]float64, vs *violations) []scatter.QSample {
	nu, nv := int(sl.GetUPoints()), int(sl.GetVPoints())
	if nu < 1 || nv < 1 || nu*nv > maxQ {
		vs.Add("slice", "u_points and v_points must be ≥ 1 with at most %d points in all, got %d × %d", maxQ, nu, nv)
		return nil
	}
	spec := scatter.Slice{Origin: vec(sl.GetOrigin(), "slice.origin"), U: vec(sl.GetUVector(), "slice.u_vector"), V: vec(sl.GetVVector(), "slice.v_vector"),
		U0: sl.GetUMin(), U1: sl.GetUMax(), V0: sl.GetVMin(), V1: sl.GetVMax(), NU: nu, NV: nv}
	qs := spec.Samples()
	for i, q := range qs {
		if vs.Len() > 0 {
			break
		}
		if physics.ValidateQPoints(m.Dim(), []mesh.QPoint{{Q: q.Q}}, "q") != nil {
			vs.Add("slice", "point %d of the slice, Q = %v (fractional), is outside ±%g", i, q.Q, physics.MaxQ)
		}
	}
	return qs
}

// weightedDOSGrid converts the grid of a weighted DOS (nil after a
// violation).
func (s *Service) weightedDOSGrid(m *physics.Model, grid *modegridv1.MonkhorstPackGrid, vs *violations) *mesh.GridSpec {
	var spec mesh.GridSpec
	for k, n := range grid.GetMesh() {
		if k < 3 {
			spec.Mesh[k] = int(min(n, 1<<22))
		}
	}
	spec.Shifted = grid.GetShifted()
	g, err := physics.NormalizeGrid(spec, m.Dim())
	if err != nil {
		vs.AddErr("weighted_dos.grid", "weighted_dos.grid", err)
		return nil
	}
	if g.Count() > s.cfg.MaxQPoints {
		vs.Add("weighted_dos.grid.mesh", "%d q-points, over this server's cap max-qpoints=%d", g.Count(), s.cfg.MaxQPoints)
	}
	return &g
}

// scatterEstimate is the cost of the job.
func (s *Service) scatterEstimate(ctx context.Context, e *modelEntry, job *scatterJob, req *modegridv1.ComputeScatteringRequest) (estimate, error) {
	size := e.m.GridSizeOf(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}, 1)
	dw := scatter.DWSizes(e.m, job.opt.DebyeWaller, job.opt.TempK)
	samples := axisSamples(job.opt.Axis)
	switch {
	case job.powder != nil:
		po := *job.powder
		maxDirs := po.MaxDirections
		if maxDirs == 0 {
			maxDirs = scatter.DefaultMaxDirections
		}
		order, err := scatter.PowderGroupOrder(ctx, e.m, job.opt.Sites)
		if err != nil {
			return estimate{}, err
		}
		ax := job.opt.Axis
		c := scatter.PowderCost(size, dw, scatter.PowderSize{Rows: po.NQ, E: samples, MaxDirections: maxDirs, GroupOrder: order,
			DefaultAxis: ax.Min == 0 && ax.Max == 0, QResolution: job.opt.Resolution.QFWHM > 0})
		c.Bytes += 2 * 8 * int64(po.NQ) * int64(samples)
		if g, ok := scatter.IncoherentSize(e.m, job.opt.DebyeWaller, job.opt.Probe, po.CoherentOnly); ok {
			c = c.Plus(scatter.IncoherentCost(g, po.NQ, samples, scatter.IncoherentBins(ax, job.opt.Resolution)))
		}
		return estimate{cost: c, field: "powder", change: "fewer |Q| samples (q_points), fewer directions (max_directions) or a coarser Debye–Waller grid"}, nil
	case job.dos != nil:
		c := scatter.WeightedDOSCost(s.gridSize(e, *job.dos), true, samples)
		return estimate{cost: c, field: "weighted_dos.grid", change: "a smaller grid"}, nil
	}
	c := scatter.SingleCost(size, dw, len(job.qs), samples)
	c.Bytes += 2 * 8 * int64(len(job.qs)) * int64(samples)
	return estimate{cost: c, field: targetName(req), change: "fewer Q points or energies, or a coarser Debye–Waller grid"}, nil
}

// scatterRows is the number of rows of intensities the job answers with
// (Q points, powder |Q| rows, or the one weighted DOS) and their name.
func scatterRows(job *scatterJob) (int, string) {
	switch {
	case job.powder != nil:
		return job.powder.NQ, "|Q| rows"
	case job.dos != nil:
		return 1, "spectrum"
	}
	return len(job.qs), "Q points"
}

// scatterReplyBytes is the size of the response to job on model m with
// canonical parameters params, bytes, as protobuf encodes it: 8 bytes a
// double of the packed arrays (energies, the FWHM polynomial, S of every
// row, the lines of every Q point when asked, each site's ⟨u uᵀ⟩) plus
// their tags and lengths, and an allowance for the small fields of each
// message (Q vectors, distances, counts, the sites' sources). It is
// checked against the message cap before any work (checkReply); the
// answer is measured again after it (cachedResult), the safety net this
// estimate keeps from being needed (TestScatterReplyBytes: within
// 1–1.25× of every target's response and 2 kB).
func scatterReplyBytes(m *physics.Model, job *scatterJob, params string) float64 {
	packed := func(n int) float64 { return 8*float64(n) + 12 } // tag, length, values
	e := axisSamples(job.opt.Axis)
	b := 256 + float64(len(params)) + packed(e) + packed(len(job.opt.Resolution.FWHM))
	switch {
	case job.powder != nil:
		b += float64(job.powder.NQ) * (packed(e) + 40)
	case job.dos != nil:
		b += 2 * packed(e)
	default:
		per := packed(e) + 96 // two Q vectors, distance, u, v, tags
		if job.lines {
			per += 3 * packed(m.ModeCount())
		}
		for _, q := range job.qs {
			b += per + float64(len(q.Label))
		}
	}
	for _, l := range m.Labels() {
		b += packed(9) + 96 + float64(len(l)) // ⟨u uᵀ⟩, b, σ, source, tags
	}
	return b
}

// precheckScatter is ComputeScattering's pre-compile check (precompile.go):
// the compile's bound, then scatterLowerBound.
func (s *Service) precheckScatter(vs *violations, req *modegridv1.ComputeScatteringRequest) bool {
	return s.precheck(vs, req.GetModel(), func(r rawModel, vs *violations) {
		if est, ok := scatterLowerBound(r, req, s.cfg.MaxQPoints); ok {
			s.lowerBound(vs, est)
		}
	})
}

// scatterLowerBound is a lower bound of the request's cost from its message
// alone: the model's size as rawModel reads it, every grid reduced by the
// largest point group (rawModel.grid), the powder directions by the
// largest group order, a path's samples at least n − corners; the same
// estimators as scatterEstimate. False when a count is missing or past its
// cap (the normal path reports it).
func scatterLowerBound(r rawModel, req *modegridv1.ComputeScatteringRequest, maxQ int) (estimate, bool) {
	d := r.size.Dim
	dw := scatter.DWOptions{Off: req.GetDebyeWaller().GetOff()}
	for k, n := range req.GetDebyeWaller().GetMesh() {
		if k < 3 {
			dw.Mesh[k] = int(min(n, 1024))
		}
	}
	var dws []physics.GridSize
	for _, g := range scatter.DWGrids(dw, d, req.GetTemperatureK()) {
		dws = append(dws, r.grid(g))
	}
	ax := req.GetEnergy()
	axis := scatter.Axis{Min: ax.GetMin(), Max: ax.GetMax(), Step: ax.GetStep()}
	res := scatter.Resolution{FWHM: req.GetResolution().GetFwhm(), QFWHM: req.GetResolution().GetQFwhmInvA()}
	samples := axisSamples(axis)
	one := r.grid(mesh.GridSpec{Mesh: [3]int{1, 1, 1}})
	n := 0
	switch t := req.GetTarget().(type) {
	case *modegridv1.ComputeScatteringRequest_Powder:
		return powderLowerBound(r, req, t.Powder, dw, dws, axis, res)
	case *modegridv1.ComputeScatteringRequest_WeightedDos:
		var spec mesh.GridSpec
		for k, m := range t.WeightedDos.GetGrid().GetMesh() {
			if k < 3 {
				spec.Mesh[k] = int(min(m, 1<<22))
			}
		}
		g, err := physics.NormalizeGrid(spec, d)
		if err != nil || g.Count() > maxQ {
			return estimate{}, false
		}
		return estimate{cost: scatter.WeightedDOSCost(r.grid(g), true, samples), field: "weighted_dos.grid", change: "a smaller grid"}, true
	case *modegridv1.ComputeScatteringRequest_Path:
		n = int(t.Path.GetPoints())
		if n == 0 {
			n = physics.DefaultPathPoints
		}
		n = max(len(t.Path.GetCorners()), n-len(t.Path.GetCorners()))
	case *modegridv1.ComputeScatteringRequest_QList:
		n = len(t.QList.GetPoints())
	case *modegridv1.ComputeScatteringRequest_Slice:
		n = int(min(t.Slice.GetUPoints(), 1<<20)) * int(min(t.Slice.GetVPoints(), 1<<20))
	}
	if n < 1 || n > min(scatter.MaxQSamples, maxQ) {
		return estimate{}, false
	}
	c := scatter.SingleCost(one, dws, n, samples)
	c.Bytes += 2 * 8 * int64(n) * int64(samples)
	return estimate{cost: c, field: targetName(req), change: "fewer Q points or energies, or a coarser Debye–Waller grid"}, true
}

// powderLowerBound is scatterLowerBound of a powder map, with every row
// run to its direction cap spread over the largest group.
func powderLowerBound(r rawModel, req *modegridv1.ComputeScatteringRequest, p *modegridv1.PowderSpec, dw scatter.DWOptions, dws []physics.GridSize,
	axis scatter.Axis, res scatter.Resolution) (estimate, bool) {
	rows, dirs, samples := int(p.GetQPoints()), int(p.GetMaxDirections()), axisSamples(axis)
	if dirs == 0 {
		dirs = scatter.DefaultMaxDirections
	}
	if rows < 1 || rows > scatter.MaxPowderQ || dirs > scatter.MaxPowderDirections {
		return estimate{}, false
	}
	c := scatter.PowderCost(r.grid(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}), dws, scatter.PowderSize{Rows: rows, E: samples, MaxDirections: dirs,
		GroupOrder: scatter.MaxGroupOrder, DefaultAxis: axis.Min == 0 && axis.Max == 0, QResolution: res.QFWHM > 0})
	c.Bytes += 2 * 8 * int64(rows) * int64(samples)
	probe := scatter.Neutron
	if req.GetProbe() == modegridv1.Probe_PROBE_XRAY {
		probe = scatter.XRay
	}
	if g, ok := scatter.IncoherentGrid(dw, r.size.Dim, probe, p.GetCoherentOnly()); ok {
		c = c.Plus(scatter.IncoherentCost(r.grid(g), rows, samples, scatter.IncoherentBins(axis, res)))
	}
	return estimate{cost: c, field: "powder", change: "fewer |Q| samples (q_points), fewer directions (max_directions) or a coarser Debye–Waller grid"}, true
}

// axisSamples is the number of energies the axis will have (the default's
// for a window chosen from the modes).
func axisSamples(a scatter.Axis) int {
	switch {
	case a.Step > 0 && a.Max > a.Min:
		return int(min((a.Max-a.Min)/a.Step+1, scatter.MaxAxisSamples))
	case a.Step > 0:
		return 1
	}
	return scatter.DefaultAxisSamples
}

// runScatter computes the job and converts the result.
func runScatter(ctx context.Context, e *modelEntry, job *scatterJob) (*modegridv1.ComputeScatteringResponse, error) {
	out := &modegridv1.ComputeScatteringResponse{IntensityUnit: intensityUnit(job.opt)}
	var dw *scatter.DWResult
	switch {
	case job.powder != nil:
		r, err := scatter.ComputePowder(ctx, e.m, *job.powder, job.opt)
		if err != nil {
			return nil, err
		}
		out.Unit, out.Energies, out.Fwhm, dw = unitToProto(r.Unit), r.Energies, r.FWHM, r.DW
		out.ImaginaryModes, out.PowderUnconvergedRows, out.PowderGroupOrder = uint32(r.Imaginary), uint32(r.Unconverged), uint32(r.GroupOrder)
		out.PowderIncoherent = r.Incoherent
		if r.Incoherent {
			for k := 0; k < e.m.Dim(); k++ {
				out.PowderIncoherentMesh = append(out.PowderIncoherentMesh, uint32(r.IncoherentMesh[k]))
			}
		}
		for i, q := range r.QInvA {
			out.Powder = append(out.Powder, &modegridv1.PowderRow{QInvA: q, S: r.S[i], Directions: uint32(r.Directions[i]), Change: r.Change[i]})
		}
	case job.dos != nil:
		r, err := scatter.ComputeWeightedDOS(ctx, e.m, *job.dos, job.opt)
		if err != nil {
			return nil, err
		}
		out.Unit, out.Energies, out.Fwhm = unitToProto(r.Unit), r.Energies, r.FWHM
		out.WeightedDos, out.WeightedDosNormalized, out.ImaginaryModes = r.Weighted, r.Normalized, uint32(r.Imaginary)
		out.IntensityUnit = "barn/(amu·" + unitLabel(r.Unit) + ") per cell"
	default:
		r, err := scatter.ComputeSingle(ctx, e.m, job.qs, job.opt)
		if err != nil {
			return nil, err
		}
		out.Unit, out.Energies, out.Fwhm, dw = unitToProto(r.Unit), r.Energies, r.FWHM, r.DW
		out.ImaginaryModes = uint32(r.Imaginary)
		per := 1 / physics.MeV.PerTHz() * r.Unit.PerTHz() // axis units per meV
		for _, p := range r.Points {
			sp := &modegridv1.ScatteringPoint{
				QFrac:        &modegridv1.QVector{Q1: p.Q[0], Q2: p.Q[1], Q3: p.Q[2]},
				QCartInvA:    &modegridv1.QVector{Q1: p.QCartInvA[0], Q2: p.QCartInvA[1], Q3: p.QCartInvA[2]},
				DistanceInvA: p.DistanceInvA, Label: p.Label, U: p.U, V: p.V, S: p.S,
			}
			if job.lines {
				for _, en := range p.Lines.EnergyMeV {
					sp.ModeEnergies = append(sp.ModeEnergies, en*per)
				}
				sp.Creation, sp.Annihilation = p.Lines.Creation, p.Lines.Annihilation
			}
			out.Points = append(out.Points, sp)
		}
	}
	labels := e.m.Labels()
	for j, st := range job.opt.Sites {
		site := &modegridv1.SiteScattering{Site: uint32(j), Label: labels[j], CoherentFm: st.CoherentFm, IncoherentBarn: st.IncoherentBarn, Source: job.sources[j]}
		if dw != nil {
			site.UA2 = append([]float64(nil), dw.U[j][:]...)
		}
		out.Sites = append(out.Sites, site)
	}
	if dw != nil && !job.opt.DebyeWaller.Off {
		for k := 0; k < e.m.Dim(); k++ {
			out.DebyeWallerMesh = append(out.DebyeWallerMesh, uint32(dw.Mesh[k]))
		}
		out.DebyeWallerExtrapolated = dw.Extrapolated
	}
	return out, nil
}

// intensityUnit names the unit of S.
func intensityUnit(o scatter.Options) string {
	if o.Probe == scatter.XRay {
		return "electrons²/" + unitLabel(o.Axis.Unit) + " per cell"
	}
	return "barn/(sr·" + unitLabel(o.Axis.Unit) + ") per cell"
}

func unitLabel(u physics.Unit) string {
	switch u {
	case physics.THz:
		return "THz"
	case physics.CM1:
		return "cm⁻¹"
	}
	return "meV"
}

// scatterFields renames the field paths of the engine's validation errors
// to the request's: a site's scatterer is under scatterers, a Q point under
// the target.
func scatterFields(err error, target string) error {
	var ve *physics.ValidationError
	if !errors.As(err, &ve) {
		return err
	}
	var vs violations
	for _, v := range ve.Violations {
		f := v.Field
		switch {
		case strings.HasPrefix(f, "sites"):
			f = "scatterers"
		case strings.HasPrefix(f, "q"):
			f = target
		}
		vs.Add(f, "%s", v.Description)
	}
	return vs.Err()
}
