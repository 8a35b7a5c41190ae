package server

import (
	"context"
	"fmt"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/thermo/qha"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

var gruneisenCodec = protoCodec(func() *modegridv1.ComputeGruneisenResponse { return &modegridv1.ComputeGruneisenResponse{} })

// ComputeGruneisen returns mode Grüneisen parameters from models at several
// volumes, on a q-point set or a path, with their mean γ(T) on a grid.
// Cached by (reference model hash, canonical parameters naming every
// model).
func (s *Service) ComputeGruneisen(ctx context.Context, req *modegridv1.ComputeGruneisenRequest) (*modegridv1.ComputeGruneisenResponse, error) {
	resp, err := s.computeGruneisen(ctx, req)
	return resp, s.heatStatus(ctx, "ComputeGruneisen", err)
}

// gruneisenPlan is a checked Grüneisen request.
type gruneisenPlan struct {
	set     *qha.VolumeSet
	entries []*modelEntry
	qs      *qset                // the q-point set (nil for a path)
	count   int                  // points (or path samples)
	pts     []mesh.QPoint        // made under admission
	corners []physics.PathCorner // path only
	pathOpt physics.PathOptions
	samples []physics.PathSample // path only, sampled under admission
	grid    bool                 // points are a whole grid (γ(T) allowed)
	temps   []float64
	canon   string
	est     estimate
}

func (s *Service) computeGruneisen(ctx context.Context, req *modegridv1.ComputeGruneisenRequest) (*modegridv1.ComputeGruneisenResponse, error) {
	var vs violations
	s.checkModelCount(&vs, "models", len(req.GetModels()), qha.MinVolumes)
	var temps []float64
	if len(req.GetTemperaturesK()) > 0 || req.GetRange() != nil {
		temps = s.temperatures(req, &vs)
	}
	if vs.Len() > 0 {
		return nil, vs.Err()
	}
	if s.precheck(&vs, req.GetModels()[0], func(r rawModel, vs *violations) {
		// A lower bound before compiling: every point at every volume.
		n := int(req.GetPathPoints())
		if len(req.GetPath()) > 0 && n == 0 {
			n = physics.DefaultPathPoints
		}
		if qs := s.qsetFor(req.GetQpoints(), r.size.Dim, true); qs != nil {
			n = qs.count
		}
		if n > 0 && vs.Len() == 0 {
			s.lowerBound(vs, estimate{cost: qha.GruneisenCost(r.grid(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}), n, len(req.GetModels())),
				field: "qpoints", change: "fewer q-points or models"})
		}
	}) {
		return nil, renamedFirst(&vs)
	}
	entries, err := s.resolveModels(ctx, req.GetModels(), "models", &vs)
	if err != nil {
		return nil, err
	}
	ref := -1
	if req.Reference != nil {
		ref = int(req.GetReference())
	}
	plan := &gruneisenPlan{entries: entries, temps: temps, set: volumeSet(entries, ref, &vs)}
	if plan.set != nil {
		s.gruneisenPoints(req, plan, &vs)
	}
	if err := vs.Err(); err != nil {
		return nil, err
	}
	refHash := entries[plan.set.Index[plan.set.Ref]].hash
	return cachedResult(ctx, s, kindGruneisen, refHash, plan.canon, gruneisenCodec, func(ctx context.Context) (*modegridv1.ComputeGruneisenResponse, error) {
		var g *qha.ModeGammas
		err := s.admitted(ctx, plan.est, func(ctx context.Context) error {
			return s.run(ctx, kindGruneisen, func(ctx context.Context) error {
				if plan.corners != nil {
					if err := plan.samplePath(ctx); err != nil {
						return err
					}
				} else {
					plan.pts = plan.qs.points(plan.set.Models[plan.set.Ref].Dim())
				}
				var err error
				g, err = qha.ModeGruneisen(ctx, plan.set, plan.pts)
				return err
			})
		})
		if err != nil {
			return nil, err
		}
		s.met.qpoints.Add(float64(len(plan.pts) * len(entries)))
		return gruneisenToProto(refHash, plan, g), nil
	})
}

// gruneisenPoints resolves the points (a q-point set, or a path sampled on
// the reference model), the estimate and the canonical parameters.
func (s *Service) gruneisenPoints(req *modegridv1.ComputeGruneisenRequest, plan *gruneisenPlan, vs *violations) {
	ref := plan.set.Models[plan.set.Ref]
	var p params
	p.add("models", modelsParam(plan.entries))
	p.add("reference", fmt.Sprint(plan.set.Index[plan.set.Ref]))
	hasPath, hasSet := len(req.GetPath()) > 0, req.GetQpoints().GetSet() != nil
	switch {
	case hasPath == hasSet:
		vs.Add("qpoints", "give exactly one of qpoints and path")
		return
	case hasSet:
		qs := s.parseQSet(req.GetQpoints(), ref.Dim(), "qpoints", true, vs)
		if qs == nil {
			return
		}
		plan.qs, plan.grid, plan.count = qs, qs.list == nil, qs.count
		p.add("qpoints", qs.param())
	default:
		if s.gruneisenPath(req, plan, &p, vs); vs.Len() > 0 {
			return
		}
	}
	if len(plan.temps) > 0 && !plan.grid {
		vs.Add("temperatures_k", "the mean γ(T) needs a grid or a finite crystal (qpoints.grid or qpoints.cells)")
	}
	p.add("temperatures_k", tempsParam(plan.temps))
	plan.canon = p.String()
	size := ref.GridSizeOf(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}, 1)
	n := plan.count
	per := float64(17*ref.ModeCount() + 96)
	s.checkReply(vs, "qpoints", float64(n)*per, fmt.Sprintf("%d q-points × %d modes", n, ref.ModeCount()))
	if vs.Len() == 0 {
		c := qha.GruneisenCost(size, n, len(plan.entries))
		if plan.corners != nil {
			c = c.Plus(physics.DispersionCost(size, n, false, false))
		}
		c.Bytes += 2 * int64(float64(n)*per)
		plan.est = estimate{cost: c, field: "qpoints", change: "fewer q-points or models"}
		s.budget.check(vs, plan.est)
	}
}

// gruneisenPath checks a path's corners on the reference model; it is
// sampled (samplePath) once the request is admitted.
func (s *Service) gruneisenPath(req *modegridv1.ComputeGruneisenRequest, plan *gruneisenPlan, p *params, vs *violations) {
	path := req.GetPath()
	if len(path) < 2 || len(path) > s.cfg.MaxPathCorners {
		vs.Add("path", "between 2 and max-path-corners=%d corners are required, got %d", s.cfg.MaxPathCorners, len(path))
		return
	}
	opt := physics.PathOptions{Points: int(req.GetPathPoints())}
	if opt.Points == 0 {
		opt.Points = physics.DefaultPathPoints
	}
	if opt.Points > s.cfg.MaxPathPoints {
		vs.Add("path_points", "%d samples exceed this server's cap max-path-points=%d", opt.Points, s.cfg.MaxPathPoints)
		return
	}
	corners := s.pathCorners(plan.set.Models[plan.set.Ref], path, vs)
	if vs.Len() > 0 {
		return
	}
	plan.corners, plan.pathOpt, plan.count = corners, opt, opt.Points
	p.add("path", dispersionParams(corners, opt, physics.THz))
}

// samplePath samples the path on the reference model (its dispersion,
// whose q-points, distances and labels the response keeps).
func (plan *gruneisenPlan) samplePath(ctx context.Context) error {
	samples, err := plan.set.Models[plan.set.Ref].Dispersion(ctx, plan.corners, plan.pathOpt)
	if err != nil {
		return err
	}
	plan.samples = samples
	plan.pts = plan.pts[:0]
	for _, smp := range samples {
		plan.pts = append(plan.pts, mesh.QPoint{Q: smp.Q, Weight: 1})
	}
	return nil
}

func gruneisenToProto(hash string, plan *gruneisenPlan, g *qha.ModeGammas) *modegridv1.ComputeGruneisenResponse {
	set := plan.set
	out := &modegridv1.ComputeGruneisenResponse{ModelHash: hash, Parameters: plan.canon, Reference: uint32(set.Index[set.Ref]),
		VolumesA3: make([]float64, len(set.Models)), MinOverlap: g.MinOverlap}
	for k, i := range set.Index {
		out.VolumesA3[i] = set.VolA3[k]
	}
	n := g.NModes
	for i, p := range g.Points {
		gp := &modegridv1.GruneisenPoint{Q: &modegridv1.QPoint{Q1: p.Q[0], Q2: p.Q[1], Q3: p.Q[2]},
			FrequenciesThz: g.FreqTHz[i*n : (i+1)*n], Gamma: g.Gamma[i*n : (i+1)*n], Defined: g.Defined[i*n : (i+1)*n]}
		if plan.samples != nil {
			gp.DistanceInvA, gp.Label = plan.samples[i].DistanceInvA, plan.samples[i].Label
		}
		out.Points = append(out.Points, gp)
	}
	if len(plan.temps) > 0 {
		avg, ok := g.AverageGamma(plan.temps)
		for t, tK := range plan.temps {
			out.Averages = append(out.Averages, &modegridv1.GammaAtTemperature{TemperatureK: tK, Gamma: avg[t], Defined: ok[t]})
		}
	}
	return out
}
