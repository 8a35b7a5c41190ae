package server

import (
	"context"
	"fmt"
	"math"
	"strings"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

var dispersionCodec = protoCodec(func() *modegridv1.ComputeDispersionResponse { return &modegridv1.ComputeDispersionResponse{} })

// ComputeDispersion returns the frequencies along a path of straight
// segments. Cached by (model hash, canonical parameters), where built-in
// labels are resolved to their coordinates.
func (s *Service) ComputeDispersion(ctx context.Context, req *modegridv1.ComputeDispersionRequest) (*modegridv1.ComputeDispersionResponse, error) {
	resp, err := s.computeDispersion(ctx, req)
	return resp, s.toStatus(ctx, "ComputeDispersion", err)
}

// computeDispersion converts the request, checks it (the server's caps and
// budget; the engine checks the path itself), and computes through the
// cache.
func (s *Service) computeDispersion(ctx context.Context, req *modegridv1.ComputeDispersionRequest) (*modegridv1.ComputeDispersionResponse, error) {
	var vs violations
	unit, opt := s.pathOptions(req, &vs)
	path := req.GetPath()
	switch {
	case len(path) < 2:
		vs.Add("path", "at least two corners are required, got %d", len(path))
	case len(path) > s.cfg.MaxPathCorners:
		vs.Add("path", "%d corners exceed this server's cap max-path-corners=%d", len(path), s.cfg.MaxPathCorners)
	}
	if s.precheck(&vs, req.GetModel(), nil) {
		return nil, vs.Err() // the compile alone is over the bound
	}
	e, err := s.resolve(ctx, req.GetModel(), &vs)
	if err != nil {
		return nil, err
	}
	var corners []physics.PathCorner
	var est estimate
	if e != nil {
		corners, est = s.checkDispersion(e, path, opt, &vs)
	}
	if err := vs.Err(); err != nil {
		return nil, err
	}
	canon := dispersionParams(corners, opt, unit)
	return cachedResult(ctx, s, kindDispersion, e.hash, canon, dispersionCodec, func(ctx context.Context) (*modegridv1.ComputeDispersionResponse, error) {
		var samples []physics.PathSample
		err := s.admitted(ctx, est, func(ctx context.Context) error {
			return s.run(ctx, kindDispersion, func(ctx context.Context) error {
				var err error
				samples, err = e.m.Dispersion(ctx, corners, opt)
				return err
			})
		})
		if err != nil {
			return nil, err
		}
		s.met.qpoints.Add(float64(len(samples)))
		return dispersionToProto(e.hash, canon, unit, samples), nil
	})
}

// pathOptions converts the request's sampling options, checking the unit,
// the spacing and the cap on points.
func (s *Service) pathOptions(req *modegridv1.ComputeDispersionRequest, vs *violations) (physics.Unit, physics.PathOptions) {
	if !validUnit(req.GetUnit()) {
		vs.Add("unit", "unknown frequency unit %d", req.GetUnit())
	}
	// connect_branches is the deprecated spelling of follow_modes: either
	// asks for it, and both share one cache entry.
	opt := physics.PathOptions{FollowModes: req.GetFollowModes() || req.GetConnectBranches(), SiteWeights: req.GetSiteWeights()}
	spacing := req.GetSpacingInvA()
	switch {
	case math.IsNaN(spacing) || math.IsInf(spacing, 0) || spacing < 0:
		vs.Add("spacing_inv_a", "must be a finite number ≥ 0, got %v", spacing)
	case spacing > 0:
		opt.SpacingInvA = canonFloat(spacing)
	default:
		opt.Points = int(req.GetPoints())
		if opt.Points == 0 {
			opt.Points = physics.DefaultPathPoints
		}
		if opt.Points > s.cfg.MaxPathPoints {
			vs.Add("points", "%d samples exceed this server's cap max-path-points=%d", opt.Points, s.cfg.MaxPathPoints)
		}
	}
	return unitFromProto(req.GetUnit()), opt
}

// checkDispersion resolves the corners on e's model and checks the
// server's caps (samples, reply size) and the budget, returning the
// corners and the estimate of the work.
func (s *Service) checkDispersion(e *modelEntry, path []*modegridv1.PathPoint, opt physics.PathOptions, vs *violations) ([]physics.PathCorner, estimate) {
	var corners []physics.PathCorner
	if len(path) >= 2 && len(path) <= s.cfg.MaxPathCorners {
		corners = s.pathCorners(e.m, path, vs)
		if opt.SpacingInvA > 0 && len(corners) == len(path) {
			if n := pathLengthInvA(e.m, corners)/opt.SpacingInvA + float64(len(corners)); n > float64(s.cfg.MaxPathPoints) {
				vs.Add("spacing_inv_a", "a spacing of %v Å⁻¹ gives about %.0f samples, over this server's cap max-path-points=%d", opt.SpacingInvA, n, s.cfg.MaxPathPoints)
			}
		}
	}
	perSample := 8*e.m.ModeCount() + 64 // the response
	what := fmt.Sprintf("%d samples × %d branches", opt.Points, e.m.ModeCount())
	if opt.SiteWeights {
		perSample += 8 * e.m.ModeCount() * e.m.Sites()
		what += fmt.Sprintf(" × (1 + %d site weights)", e.m.Sites())
	}
	var est estimate
	if vs.Len() == 0 {
		n := opt.Points
		if opt.SpacingInvA > 0 {
			n = int(pathLengthInvA(e.m, corners)/opt.SpacingInvA) + len(corners)
		}
		if e.m.Polar() {
			for _, c := range corners { // a polar model samples a Γ corner from both sides
				if physics.IsGamma(c.Q) {
					n++
				}
			}
		}
		c := physics.DispersionCost(e.m.GridSizeOf(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}, 1), n, opt.FollowModes || opt.SiteWeights, opt.SiteWeights)
		c.Bytes += 2 * int64(n) * int64(perSample)
		est = estimate{cost: c, field: "points", change: "fewer samples (points or spacing_inv_a)"}
		s.budget.check(vs, est)
	}
	if opt.Points > 0 {
		s.checkReply(vs, "points", float64(opt.Points)*float64(perSample), what)
	}
	return corners, est
}

// dispersionParams is the canonical parameter string of a dispersion
// request, its cache key with the model hash: corners by coordinates.
func dispersionParams(corners []physics.PathCorner, opt physics.PathOptions, unit physics.Unit) string {
	var p params
	var b strings.Builder
	for i, c := range corners {
		if i > 0 {
			if c.BreakBefore {
				b.WriteByte('|')
			} else {
				b.WriteByte('-')
			}
		}
		fmt.Fprintf(&b, "%s(%s,%s,%s)", c.Label, fmtFloat(c.Q[0]), fmtFloat(c.Q[1]), fmtFloat(c.Q[2]))
	}
	p.add("path", b.String())
	if opt.SpacingInvA > 0 {
		p.add("spacing_inv_a", fmtFloat(opt.SpacingInvA))
	} else {
		p.add("points", fmt.Sprint(opt.Points))
	}
	p.add("unit", unitName(unit))
	p.addBool("follow_modes", opt.FollowModes)
	p.addBool("site_weights", opt.SiteWeights)
	return p.String()
}

// dispersionToProto converts the engine's samples, frequencies into unit.
func dispersionToProto(hash, canon string, unit physics.Unit, samples []physics.PathSample) *modegridv1.ComputeDispersionResponse {
	out := &modegridv1.ComputeDispersionResponse{ModelHash: hash, Parameters: canon, Unit: unitToProto(unit),
		Samples: make([]*modegridv1.DispersionSample, len(samples))}
	for i, smp := range samples {
		f := make([]float64, len(smp.FreqTHz))
		for k, v := range smp.FreqTHz {
			f[k] = unit.FromTHz(v)
		}
		out.Samples[i] = &modegridv1.DispersionSample{DistanceInvA: smp.DistanceInvA, Label: smp.Label, Frequencies: f,
			Q: &modegridv1.QPoint{Q1: smp.Q[0], Q2: smp.Q[1], Q3: smp.Q[2]}, SiteWeights: smp.SiteWeight}
		if d := smp.GammaDir; d != ([3]float64{}) {
			out.Samples[i].GammaDirection = &modegridv1.QPoint{Q1: d[0], Q2: d[1], Q3: d[2]}
		}
	}
	return out
}

// pathCorners resolves the corners: given coordinates (canonical) or the
// model's built-in label, so that equal paths spelled with labels or with
// numbers share a cache entry.
func (s *Service) pathCorners(m *physics.Model, path []*modegridv1.PathPoint, vs *violations) []physics.PathCorner {
	std := m.StandardPoints()
	out := make([]physics.PathCorner, 0, len(path))
	for i, pp := range path {
		c := physics.PathCorner{Label: pp.GetLabel(), BreakBefore: pp.GetBreakBefore() && i > 0}
		if q := pp.GetQ(); q != nil {
			c.Q = [3]float64{canonFloat(q.GetQ1()), canonFloat(q.GetQ2()), canonFloat(q.GetQ3())}
			for k, v := range c.Q {
				switch {
				case !(math.Abs(v) <= physics.MaxQ):
					vs.Add(fmt.Sprintf("path[%d].q.q%d", i, k+1), qRangeMsg, v)
				case k >= m.Dim() && v != 0:
					vs.Add(fmt.Sprintf("path[%d].q.q%d", i, k+1), "must be 0 for a %d-dimensional crystal, got %v", m.Dim(), v)
				}
			}
		} else {
			key := c.Label
			switch strings.ToUpper(key) {
			case "Γ", "GAMMA", "G": // spellings of Γ, as physics accepts them
				key = "G"
			}
			q, ok := std[key]
			if !ok {
				vs.Add(fmt.Sprintf("path[%d].label", i), "%q is not a built-in point of this %s lattice (have %s); give q", c.Label, latticeName(m), labelList(std))
				continue
			}
			c.Q = q
		}
		c.HasQ = true
		out = append(out, c)
	}
	return out
}

func latticeName(m *physics.Model) string {
	if t := m.LatticeType(); t != "" {
		return t
	}
	return "unrecognised"
}

// pathLengthInvA is the path's length in Å⁻¹ (2π included), breaks not
// counted: |Σ_k Δq_k b_k| summed over the connected segments.
func pathLengthInvA(m *physics.Model, corners []physics.PathCorner) float64 {
	b := m.Reciprocal()
	total := 0.0
	for i := 1; i < len(corners); i++ {
		if corners[i].BreakBefore {
			continue
		}
		var v [3]float64
		for k := 0; k < 3; k++ {
			dq := corners[i].Q[k] - corners[i-1].Q[k]
			for c := 0; c < 3; c++ {
				v[c] += dq * b[k][c]
			}
		}
		total += math.Sqrt(v[0]*v[0] + v[1]*v[1] + v[2]*v[2])
	}
	return total
}
