package server

import (
	"context"
	"errors"
	"fmt"
	"math"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/polar"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

var infraredCodec = protoCodec(func() *modegridv1.ComputeInfraredResponse { return &modegridv1.ComputeInfraredResponse{} })

// ComputeInfrared returns the infrared response of a polar model. Cached
// by (model hash, canonical parameters). An imaginary infrared-active mode
// at Γ is FAILED_PRECONDITION (ε₀ is not defined).
func (s *Service) ComputeInfrared(ctx context.Context, req *modegridv1.ComputeInfraredRequest) (*modegridv1.ComputeInfraredResponse, error) {
	resp, err := s.computeInfrared(ctx, req)
	if errors.Is(err, polar.ErrUnstableGamma) {
		return nil, status.Errorf(codes.FailedPrecondition, "%v: the static dielectric constant is not defined for an unstable crystal", err)
	}
	return resp, s.toStatus(ctx, "ComputeInfrared", err)
}

// irRequest is a checked infrared request: the engine's options and the
// unit of the request.
type irRequest struct {
	unit   physics.Unit
	opt    polar.IROptions
	lo, hi float64 // window in the unit; both 0 for the default
	points int
}

// computeInfrared converts and checks the request, then computes through
// the cache.
func (s *Service) computeInfrared(ctx context.Context, req *modegridv1.ComputeInfraredRequest) (*modegridv1.ComputeInfraredResponse, error) {
	var vs violations
	ir := s.infraredRequest(req, &vs)
	if s.precheck(&vs, req.GetModel(), nil) {
		return nil, vs.Err() // the compile alone is over the bound
	}
	e, err := s.resolve(ctx, req.GetModel(), &vs)
	if err != nil {
		return nil, err
	}
	var est estimate
	if e != nil {
		est = s.checkInfrared(e, req, &ir, &vs)
	}
	if err := vs.Err(); err != nil {
		return nil, err
	}
	canon := infraredParams(ir)
	return cachedResult(ctx, s, kindInfrared, e.hash, canon, infraredCodec, func(ctx context.Context) (*modegridv1.ComputeInfraredResponse, error) {
		var res *polar.IRResult
		err := s.admitted(ctx, est, func(ctx context.Context) error {
			return s.run(ctx, kindInfrared, func(ctx context.Context) error {
				var err error
				res, err = polar.Infrared(ctx, e.m, ir.opt)
				return err
			})
		})
		if err != nil {
			return nil, err
		}
		return infraredToProto(e.hash, canon, ir.unit, res), nil
	})
}

// infraredRequest checks what the request says without its model: the
// unit, the direction, the window, the points and the damping.
func (s *Service) infraredRequest(req *modegridv1.ComputeInfraredRequest, vs *violations) irRequest {
	if !validUnit(req.GetUnit()) {
		vs.Add("unit", "unknown frequency unit %d", req.GetUnit())
	}
	ir := irRequest{unit: unitFromProto(req.GetUnit())}
	ir.opt.Direction = unitDirection(req.GetDirection(), vs)
	s.irWindow(req, &ir, vs)
	damp := func(field string, x float64) float64 {
		if !(x >= 0) || math.IsInf(x, 0) {
			vs.Add(field, "must be a finite damping ≥ 0 (in the request's unit), got %v", x)
		}
		return ir.unit.ToTHz(canonFloat(x))
	}
	if md := req.GetModeDamping(); len(md) > 0 {
		for i, x := range md {
			ir.opt.DampingTHz = append(ir.opt.DampingTHz, damp(fmt.Sprintf("mode_damping[%d]", i), x))
		}
	} else if g := req.GetDamping(); g != 0 {
		ir.opt.DampingTHz = []float64{damp("damping", g)}
	}
	return ir
}

// unitDirection is the request's direction made a unit vector (zero, with
// a violation, when it is not a finite non-zero vector).
func unitDirection(d *modegridv1.Vec3, vs *violations) [3]float64 {
	dir := [3]float64{canonFloat(d.GetX()), canonFloat(d.GetY()), canonFloat(d.GetZ())}
	l := math.Sqrt(dir[0]*dir[0] + dir[1]*dir[1] + dir[2]*dir[2])
	if !(l > 0) || math.IsInf(l, 0) {
		vs.Add("direction", "must be a finite, non-zero Cartesian vector (the light's electric field), got (%v, %v, %v)", d.GetX(), d.GetY(), d.GetZ())
		return [3]float64{}
	}
	return [3]float64{canonFloat(dir[0] / l), canonFloat(dir[1] / l), canonFloat(dir[2] / l)}
}

// irWindow checks the window and the number of samples and, for a window
// given, lays the sample frequencies (THz) into ir.opt.
func (s *Service) irWindow(req *modegridv1.ComputeInfraredRequest, ir *irRequest, vs *violations) {
	ir.lo, ir.hi = canonFloat(req.GetMin()), canonFloat(req.GetMax())
	switch {
	case !(ir.lo >= 0) || math.IsInf(ir.lo, 0):
		vs.Add("min", "must be a finite frequency ≥ 0, got %v", req.GetMin())
	case !(ir.hi >= 0) || math.IsInf(ir.hi, 0):
		vs.Add("max", "must be a finite frequency ≥ 0, got %v", req.GetMax())
	case (ir.lo != 0 || ir.hi != 0) && !(ir.hi > ir.lo):
		vs.Add("max", "must be greater than min (%v), got %v (leave both 0 for a window from the modes)", ir.lo, ir.hi)
	}
	ir.points = int(req.GetPoints())
	switch {
	case ir.points == 0:
		ir.points = polar.DefaultIRPoints
	case ir.points < 2:
		vs.Add("points", "must be 0 (the default, %d) or at least 2, got %d", polar.DefaultIRPoints, ir.points)
	case ir.points > s.cfg.MaxPathPoints:
		vs.Add("points", "%d samples exceed this server's cap max-path-points=%d", ir.points, s.cfg.MaxPathPoints)
	}
	ir.opt.Points = ir.points
	if (ir.lo != 0 || ir.hi != 0) && vs.Len() == 0 {
		ir.opt.FreqTHz = make([]float64, ir.points)
		for i := range ir.opt.FreqTHz {
			ir.opt.FreqTHz[i] = ir.unit.ToTHz(ir.lo + (ir.hi-ir.lo)*float64(i)/float64(ir.points-1))
		}
	}
}

// checkInfrared checks what needs the model — charges, the number of
// per-mode dampings — and the reply and the budget, and returns the
// estimate of the work.
func (s *Service) checkInfrared(e *modelEntry, req *modegridv1.ComputeInfraredRequest, ir *irRequest, vs *violations) estimate {
	m := e.m
	if !m.Polar() {
		vs.Add("model", "the model has no Born effective charges: the infrared response needs every site's born_charge and the crystal's epsilon_inf")
		return estimate{}
	}
	if n := len(req.GetModeDamping()); n > 0 && n != m.ModeCount() {
		vs.Add("mode_damping", "must have one damping per mode at Γ (%d), got %d", m.ModeCount(), n)
	}
	s.checkReply(vs, "points", float64(ir.points)*40+float64(m.ModeCount())*160, fmt.Sprintf("%d samples and %d modes", ir.points, m.ModeCount()))
	est := estimate{cost: polar.InfraredCost(m.GridSizeOf(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}, 1), ir.points), field: "points", change: "fewer samples (points)"}
	s.budget.check(vs, est)
	return est
}

// infraredParams is the canonical parameter string: the unit direction,
// the unit, the window, the points and the damping as computed.
func infraredParams(ir irRequest) string {
	var p params
	d := ir.opt.Direction
	p.add("direction", fmt.Sprintf("(%s,%s,%s)", fmtFloat(d[0]), fmtFloat(d[1]), fmtFloat(d[2])))
	p.add("unit", unitName(ir.unit))
	if ir.lo != 0 || ir.hi != 0 {
		p.add("window", fmtFloat(ir.lo)+".."+fmtFloat(ir.hi))
	} else {
		p.add("window", "auto")
	}
	p.add("points", fmt.Sprint(ir.points))
	switch len(ir.opt.DampingTHz) {
	case 0:
		p.add("damping", "auto")
	default:
		ds := ""
		for i, g := range ir.opt.DampingTHz {
			if i > 0 {
				ds += ","
			}
			ds += fmtFloat(g)
		}
		p.add("damping_thz", ds)
	}
	return p.String()
}

// infraredToProto converts the engine's result, frequencies into unit.
func infraredToProto(hash, canon string, unit physics.Unit, r *polar.IRResult) *modegridv1.ComputeInfraredResponse {
	u := r.Direction
	out := &modegridv1.ComputeInfraredResponse{
		ModelHash: hash, Parameters: canon, Unit: unitToProto(unit),
		Direction:          &modegridv1.Vec3{X: u[0], Y: u[1], Z: u[2]},
		EpsilonInf:         r.EpsInf[:],
		EpsilonStatic:      r.EpsStatic[:],
		EpsilonInfAlong:    r.EpsInfDir,
		EpsilonStaticAlong: r.EpsStaticDir,
		ActiveThreshold:    polar.ActiveThreshold,
	}
	for _, md := range r.Modes {
		var along float64
		for a := 0; a < 3; a++ {
			for b := 0; b < 3; b++ {
				along += u[a] * md.Strength[3*a+b] * u[b]
			}
		}
		out.Modes = append(out.Modes, &modegridv1.InfraredMode{
			Frequency: unit.FromTHz(md.FreqTHz), Acoustic: md.Acoustic, Active: md.Active,
			ModeCharge: md.Charge[:], OscillatorStrength: md.Strength[:], StrengthAlong: along,
			Damping: unit.FromTHz(md.DampTHz),
		})
	}
	for _, f := range r.LOFreqTHz {
		out.LoFrequencies = append(out.LoFrequencies, unit.FromTHz(f))
	}
	out.Samples = make([]*modegridv1.InfraredSample, len(r.Samples))
	for i, smp := range r.Samples {
		out.Samples[i] = &modegridv1.InfraredSample{Frequency: unit.FromTHz(smp.FreqTHz), EpsilonReal: real(smp.Eps),
			EpsilonImag: imag(smp.Eps), Reflectivity: smp.Reflectivity}
	}
	return out
}
