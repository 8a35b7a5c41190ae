package server

import (
	"context"
	"fmt"

	"google.golang.org/grpc"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// ComputeModes streams the modes on a q-point set in chunks of bounded size,
// in q order. Modes streams are not cached (they can be far larger than
// anything worth keeping); the model is.
func (s *Service) ComputeModes(req *modegridv1.ComputeModesRequest, stream grpc.ServerStreamingServer[modegridv1.ComputeModesResponse]) error {
	ctx := stream.Context()
	return s.toStatus(ctx, "ComputeModes", s.computeModes(ctx, req, stream))
}

// modeChunkOverhead is the per-point size (bytes) of a Modes message
// beyond its numbers: q, weight, flags and framing.
const modeChunkOverhead = 64

func (s *Service) computeModes(ctx context.Context, req *modegridv1.ComputeModesRequest, stream grpc.ServerStreamingServer[modegridv1.ComputeModesResponse]) error {
	var vs violations
	if !validUnit(req.GetUnit()) {
		vs.Add("unit", "unknown frequency unit %d", req.GetUnit())
	}
	opt := physics.ModeOptions{Eigenvectors: req.GetEigenvectors(), Velocities: req.GetGroupVelocities()}
	if s.precheckModes(&vs, req, opt) {
		return vs.Err() // refused from the request alone, before compiling
	}
	e, err := s.resolve(ctx, req.GetModel(), &vs)
	if err != nil {
		return err
	}
	dim := 0
	if e != nil {
		dim = e.m.Dim()
	}
	qs := s.parseQSet(req.GetQpoints(), dim, "qpoints", true, &vs)
	unit := unitFromProto(req.GetUnit())
	var est estimate
	if vs.Len() == 0 {
		est = s.modesEstimate(e, qs.count, opt, &vs)
	}
	if err := vs.Err(); err != nil {
		return err
	}

	// Chunk size: as asked (or the default), but never more mode data per
	// message than MaxChunkBytes.
	n := e.m.ModeCount()
	per := 8*n + modeChunkOverhead
	if opt.Eigenvectors {
		per += 16 * n * n
	}
	if opt.Velocities {
		per += 24 * n
	}
	chunk := int(req.GetChunkSize())
	if chunk == 0 {
		chunk = s.cfg.ChunkPoints
	}
	chunk = max(1, min(chunk, s.cfg.MaxChunkBytes/per))
	opt.ChunkSize = chunk
	opt.GammaDirs = cartesianDirs(e.m, qs.dirs)
	toProto := modesConverter(e.m, unit, qs.dirs)

	var p params
	p.add("qpoints", qs.param())
	p.add("unit", unitName(unit))
	p.addBool("eigenvectors", opt.Eigenvectors)
	p.addBool("group_velocities", opt.Velocities)
	canon := p.String()

	total := uint32(qs.count)
	noteCache(ctx, "computed")
	return s.admitted(ctx, est, func(ctx context.Context) error {
		return s.run(ctx, kindModes, func(ctx context.Context) error {
			// The points are built only once the computation holds its slot,
			// so requests waiting in the queue hold no point lists (a grid at
			// the default cap is 128 MiB of them).
			pts := qs.points(dim)
			return e.m.StreamModes(ctx, pts, opt, func(c physics.ModeChunk) error {
				s.met.qpoints.Add(float64(len(c.Points)))
				resp := &modegridv1.ComputeModesResponse{
					ModelHash:  e.hash,
					Parameters: canon,
					Offset:     uint32(c.Offset),
					Total:      total,
					Unit:       unitToProto(unit),
					Points:     make([]*modegridv1.Modes, len(c.Points)),
				}
				for i := range c.Points {
					resp.Points[i] = toProto(&c.Points[i], c.Offset+i)
				}
				return stream.Send(resp)
			})
		})
	})
}

// modesEstimate is the cost of a modes stream (modesCost), checked: one
// point that cannot fit a message (a 512-site model with eigenvectors is
// 1536² complex numbers, 38 MB) is refused here, before any work, and so
// is a stream over the budget or the compute-time bound.
func (s *Service) modesEstimate(e *modelEntry, count int, opt physics.ModeOptions, vs *violations) estimate {
	return s.checkModes(e.m.GridSizeOf(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}, 1), count, opt, vs)
}

// checkModes is modesEstimate for a model of size.
func (s *Service) checkModes(size physics.GridSize, count int, opt physics.ModeOptions, vs *violations) estimate {
	est, per := s.streamCost(size, count, opt)
	s.checkReply(vs, est.field, per, fmt.Sprintf("one q-point of %d modes", size.Sites*size.P))
	s.budget.check(vs, est)
	return est
}

// modesCost is the cost of a modes stream of count points: the point
// list, the chunks computed ahead, and a message and its encoding; per is
// the size of one point's message.
func (s *Service) modesCost(e *modelEntry, count int, opt physics.ModeOptions) (estimate, float64) {
	return s.streamCost(e.m.GridSizeOf(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}, 1), count, opt)
}

// streamCost is modesCost for a model of size.
func (s *Service) streamCost(size physics.GridSize, count int, opt physics.ModeOptions) (estimate, float64) {
	n := float64(size.Sites * size.P)
	per := 8*n + modeChunkOverhead
	field := "qpoints"
	if opt.Eigenvectors {
		per += 16 * n * n
		field = "eigenvectors"
	}
	if opt.Velocities {
		per += 24 * n
	}
	chunk := max(1, min(s.cfg.ChunkPoints, s.cfg.MaxChunkBytes/int(per)))
	c := physics.StreamCost(size, count, chunk, 0, opt)
	c.Bytes += 32*int64(count) + 2*int64(per)*int64(chunk)
	change := "fewer q-points (qpoints)"
	if opt.Eigenvectors {
		change = "fewer q-points (qpoints) or no eigenvectors"
	}
	return estimate{cost: c, field: field, change: change}, per
}

// modesToProto converts the modes at one point, frequencies in unit.
func modesToProto(pm *physics.PointModes, unit physics.Unit) *modegridv1.Modes {
	out := &modegridv1.Modes{
		Q:           &modegridv1.QPoint{Q1: pm.Q[0], Q2: pm.Q[1], Q3: pm.Q[2]},
		Weight:      pm.Weight,
		Frequencies: make([]float64, len(pm.FreqTHz)),
		Imaginary:   pm.Imaginary,
	}
	for k, f := range pm.FreqTHz {
		out.Frequencies[k] = unit.FromTHz(f)
	}
	if pm.Eigvecs != nil {
		out.Eigenvectors = make([]float64, 2*len(pm.Eigvecs))
		for i, z := range pm.Eigvecs {
			out.Eigenvectors[2*i] = real(z)
			out.Eigenvectors[2*i+1] = imag(z)
		}
	}
	if pm.VelKmS != nil {
		out.GroupVelocitiesKmS = make([]float64, 0, 3*len(pm.VelKmS))
		for _, v := range pm.VelKmS {
			out.GroupVelocitiesKmS = append(out.GroupVelocitiesKmS, v[0], v[1], v[2])
		}
	}
	return out
}

// cartesianDirs converts a list's directions of approach at Γ to the
// Cartesian ones the engine takes (nil when none, or for a model without
// a long-range term, which ignores them).
func cartesianDirs(m *physics.Model, dirs [][3]float64) [][3]float64 {
	if dirs == nil || !m.Polar() {
		return nil
	}
	out := make([][3]float64, len(dirs))
	for i, d := range dirs {
		out[i] = m.CartesianQ(d)
	}
	return out
}

// modesConverter returns the conversion of the modes at the point of
// index idx, frequencies in unit, with how a polar model's Γ was taken
// (markGamma).
func modesConverter(m *physics.Model, unit physics.Unit, dirs [][3]float64) func(pm *physics.PointModes, idx int) *modegridv1.Modes {
	polar := m.Polar()
	return func(pm *physics.PointModes, idx int) *modegridv1.Modes {
		out := modesToProto(pm, unit)
		if polar {
			markGamma(out, pm, dirs, idx)
		}
		return out
	}
}

// markGamma states how a polar model's Γ point was taken: along the
// direction the list gave (gamma_direction), or the analytic part only
// (gamma_analytic: grids, and list points without a direction). dirs are
// the list's directions (nil for none or a grid), idx the point's index.
func markGamma(out *modegridv1.Modes, pm *physics.PointModes, dirs [][3]float64, idx int) {
	if !physics.IsGamma(pm.Q) {
		return
	}
	if dirs != nil && dirs[idx] != ([3]float64{}) {
		d := dirs[idx]
		out.GammaDirection = &modegridv1.QPoint{Q1: d[0], Q2: d[1], Q3: d[2]}
		return
	}
	out.GammaAnalytic = true
}
