package server

import (
	"context"
	"errors"
	"fmt"
	"math"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/thermo"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

var thermalCodec = protoCodec(func() *modegridv1.ComputeThermalResponse { return &modegridv1.ComputeThermalResponse{} })

// ComputeThermal returns harmonic thermal properties on a grid or finite
// crystal at a list of temperatures. Cached by (model hash, canonical
// parameters); the grid's modes are shared with DOS requests. A model with
// imaginary modes is FAILED_PRECONDITION unless allow_unstable.
func (s *Service) ComputeThermal(ctx context.Context, req *modegridv1.ComputeThermalRequest) (*modegridv1.ComputeThermalResponse, error) {
	resp, err := s.computeThermal(ctx, req)
	var sr *sumRuleError
	switch {
	case errors.As(err, &sr):
		return nil, status.Errorf(codes.FailedPrecondition, "%v (%s)", sr.err, sr.hint())
	case errors.Is(err, thermo.ErrUnstable):
		return nil, status.Errorf(codes.FailedPrecondition, "%v (set allow_unstable to compute anyway, leaving imaginary modes out)", err)
	}
	return resp, s.toStatus(ctx, "ComputeThermal", err)
}

// sumRuleError is an instability of a model whose explicit blocks break the
// acoustic sum rule (not enforced): the broken rule, not the lattice, is
// the likely cause, and the fix is to impose it rather than to leave the
// imaginary modes out.
type sumRuleError struct {
	err            error   // wraps thermo.ErrUnstable
	violationEVPA2 float64 // Model.SumRuleViolation, eV/Å²
}

func (e *sumRuleError) Error() string { return e.err.Error() + " (" + e.hint() + ")" }
func (e *sumRuleError) Unwrap() error { return e.err }

// hint names the request field that fixes the cause.
func (e *sumRuleError) hint() string {
	return fmt.Sprintf("the explicit force-constant blocks break the acoustic sum rule by %.3g eV/Å², "+
		"which makes long-wave modes imaginary: set enforce_sum_rule to impose it", e.violationEVPA2)
}

// sumRuleCause wraps an instability of e's model as a *sumRuleError when
// its blocks break the sum rule and the request did not enforce it.
func sumRuleCause(e *modelEntry, err error) error {
	if !errors.Is(err, thermo.ErrUnstable) || !(e.m.SumRuleViolation() > 0) {
		return err
	}
	var src modegridv1.ModelSource
	if proto.Unmarshal(e.source, &src) != nil || src.GetEnforceSumRule() {
		return err
	}
	return &sumRuleError{err: err, violationEVPA2: e.m.SumRuleViolation()}
}

// thermalFields maps thermo.ThermalOptions's field paths onto
// ComputeThermalRequest's: the explicit temperatures come first in
// TempsK, so their indices agree; the range's values are checked here.
var thermalFields = fieldMap{"temperatures_k": "temperatures_k", "route": "route"}

// tempRequest is a request with an explicit temperature list and a range
// (thermal, quasi-harmonic, conductivity and Grüneisen requests).
type tempRequest interface {
	GetTemperaturesK() []float64
	GetRange() *modegridv1.TemperatureRange
}

// temperatures expands the explicit list and the range into one list,
// canonical values, checking the range and the cap (the explicit values
// are left to the engine's check).
func (s *Service) temperatures(req tempRequest, vs *violations) []float64 {
	var ts []float64
	check := func(field string, t float64) bool {
		if math.IsNaN(t) || math.IsInf(t, 0) || t < 0 || t > thermo.MaxTempK {
			vs.Add(field, "must be a temperature in [0, %g] K, got %v", thermo.MaxTempK, t)
			return false
		}
		return true
	}
	list := req.GetTemperaturesK()
	if len(list) > s.cfg.MaxTemps {
		vs.Add("temperatures_k", "%d temperatures exceed this server's cap max-temps=%d", len(list), s.cfg.MaxTemps)
		return nil
	}
	// The explicit values are the engine's to check (physics.
	// ThermalOptions.Validate): they keep their indices, the range's
	// values follow them.
	for _, t := range list {
		ts = append(ts, canonFloat(t))
	}
	if r := req.GetRange(); r != nil {
		start, stop, step := canonFloat(r.GetStartK()), canonFloat(r.GetStopK()), canonFloat(r.GetStepK())
		ok := check("range.start_k", start)
		ok = check("range.stop_k", stop) && ok
		if !(step > 0) || math.IsInf(step, 0) {
			vs.Add("range.step_k", "must be > 0, got %v", r.GetStepK())
			ok = false
		}
		if ok && stop < start {
			vs.Add("range.stop_k", "must be ≥ start_k (%v), got %v", start, stop)
			ok = false
		}
		if ok {
			// Values start + i·step up to stop, stop included when on the
			// step (within 1e-9 of a step, for decimal steps).
			// Counted in floating point first: a tiny step gives more
			// values than an int holds, and a wrapped count would slip
			// past the cap.
			nf := math.Floor((stop-start)/step+1e-9) + 1
			if float64(len(ts))+nf > float64(s.cfg.MaxTemps) {
				vs.Add("range", "%s temperatures exceed this server's cap max-temps=%d", countString(float64(len(ts))+nf), s.cfg.MaxTemps)
				return nil
			}
			n := int(nf)
			for i := range n {
				ts = append(ts, rangeValue(start, step, i))
			}
		}
	}
	if len(ts) == 0 && vs.Len() == 0 {
		vs.Add("temperatures_k", "at least one temperature is required (temperatures_k or range)")
	}
	return ts
}

func (s *Service) computeThermal(ctx context.Context, req *modegridv1.ComputeThermalRequest) (*modegridv1.ComputeThermalResponse, error) {
	var vs violations
	bad := map[string]bool{}
	opt := thermo.ThermalOptions{AllowUnstable: req.GetAllowUnstable(), MSD: req.GetMsd()}
	switch req.GetRoute() {
	case modegridv1.ThermalRoute_THERMAL_ROUTE_UNSPECIFIED, modegridv1.ThermalRoute_THERMAL_ROUTE_MODE_SUM:
		opt.Route = thermo.ModeSum
	case modegridv1.ThermalRoute_THERMAL_ROUTE_DOS_INTEGRAL:
		opt.Route = thermo.DOSIntegral
	default:
		vs.Add("route", "unknown route %d", req.GetRoute())
		bad["route"] = true
	}
	opt.TempsK = s.temperatures(req, &vs)
	if len(opt.TempsK) > 0 { // none: reported above, in the request's terms
		thermalFields.addEngine(&vs, opt.Validate(), "temperatures_k", bad)
	}
	if s.precheckThermal(&vs, req, opt) {
		return nil, vs.Err() // refused from the request alone, before compiling
	}
	e, err := s.resolve(ctx, req.GetModel(), &vs)
	if err != nil {
		return nil, err
	}
	dim := 0
	if e != nil {
		dim = e.m.Dim()
	}
	qs := s.parseQSet(req.GetQpoints(), dim, "qpoints", false, &vs)
	if e != nil {
		s.checkThermalReply(&vs, opt, e.m.Sites())
	}
	var est estimate
	if vs.Len() == 0 {
		est = s.thermalEstimate(e, qs.grid, opt)
		s.budget.check(&vs, est)
	}
	if err := vs.Err(); err != nil {
		return nil, err
	}

	var p params
	p.add("grid", gridParam(qs.grid))
	p.add("temperatures_k", tempsParam(opt.TempsK))
	p.add("route", opt.Route.String())
	p.addBool("allow_unstable", opt.AllowUnstable)
	p.addBool("msd", opt.MSD)
	canon := p.String()

	return cachedResult(ctx, s, kindThermal, e.hash, canon, thermalCodec, func(ctx context.Context) (*modegridv1.ComputeThermalResponse, error) {
		var res *thermo.ThermalResult
		err := s.admitted(ctx, est, func(ctx context.Context) error {
			g, _, err := s.gridModes(ctx, e, qs.grid, gridNeed{vectors: opt.MSD})
			if err != nil {
				return err
			}
			return s.run(ctx, kindThermal, func(ctx context.Context) error {
				var err error
				res, err = thermo.ComputeThermal(ctx, e.m, g, opt)
				return sumRuleCause(e, err)
			})
		})
		if err != nil {
			return nil, err
		}
		return thermalToProto(e, canon, res), nil
	})
}

// checkThermalReply refuses a thermal call whose reply for a model of
// sites sites cannot fit one message.
func (s *Service) checkThermalReply(vs *violations, opt thermo.ThermalOptions, sites int) {
	per := 100.0 // ten numbers and framing
	if opt.MSD {
		per += float64(sites) * 110
	}
	s.checkReply(vs, "temperatures_k", float64(len(opt.TempsK))*per, fmt.Sprintf("%d temperatures", len(opt.TempsK)))
}

func thermalToProto(e *modelEntry, canon string, r *thermo.ThermalResult) *modegridv1.ComputeThermalResponse {
	out := &modegridv1.ComputeThermalResponse{
		ModelHash:                e.hash,
		Parameters:               canon,
		ZeroPointEnergyEv:        r.ZPEeV,
		ZeroPointEnergyKjPerMol:  physics.EVToKJPerMol(r.ZPEeV),
		DebyeTemperatureElasticK: r.ThetaElasticK,
		ImaginaryModesExcluded:   uint32(r.ImaginaryExcluded),
		Points:                   make([]*modegridv1.ThermalPoint, len(r.Points)),
		GammaAnalytic:            e.m.Polar(),
	}
	labels := e.m.Labels()
	atoms := float64(e.m.Sites())
	var massAmu float64
	for i := range e.m.Sites() {
		massAmu += e.m.MassAmu(i)
	}
	out.AtomsPerCell, out.CellMassAmu = uint32(e.m.Sites()), massAmu
	out.ZeroPointEnergyKjPerMolAtoms = physics.EVToKJPerMol(r.ZPEeV) / atoms
	out.ZeroPointEnergyKjPerKg = physics.EVToKJPerKg(r.ZPEeV, massAmu)
	for i, tp := range r.Points {
		pt := &modegridv1.ThermalPoint{
			TemperatureK:           tp.TempK,
			InternalEnergyEv:       tp.UeV,
			FreeEnergyEv:           tp.FeV,
			EntropyEvPerK:          tp.SeVPerK,
			HeatCapacityEvPerK:     tp.CveVPerK,
			InternalEnergyKjPerMol: physics.EVToKJPerMol(tp.UeV),
			FreeEnergyKjPerMol:     physics.EVToKJPerMol(tp.FeV),
			EntropyJPerMolK:        physics.EVPerKToJPerMolK(tp.SeVPerK),
			HeatCapacityJPerMolK:   physics.EVPerKToJPerMolK(tp.CveVPerK),
			DebyeTemperatureK:      tp.ThetaDK,
			DebyeTemperatureStatus: debyeStatusToProto(tp.ThetaDStatus),
			DebyeTemperatureReason: tp.ThetaDReason,
			// Per mole of atoms: per mole of cells over the sites per cell.
			InternalEnergyKjPerMolAtoms: physics.EVToKJPerMol(tp.UeV) / atoms,
			FreeEnergyKjPerMolAtoms:     physics.EVToKJPerMol(tp.FeV) / atoms,
			EntropyJPerMolAtomsK:        physics.EVPerKToJPerMolK(tp.SeVPerK) / atoms,
			HeatCapacityJPerMolAtomsK:   physics.EVPerKToJPerMolK(tp.CveVPerK) / atoms,
			InternalEnergyKjPerKg:       physics.EVToKJPerKg(tp.UeV, massAmu),
			FreeEnergyKjPerKg:           physics.EVToKJPerKg(tp.FeV, massAmu),
			EntropyJPerKgK:              physics.EVPerKToJPerKgK(tp.SeVPerK, massAmu),
			HeatCapacityJPerKgK:         physics.EVPerKToJPerKgK(tp.CveVPerK, massAmu),
		}
		for si, m := range tp.MSD {
			d := &modegridv1.SiteDisplacement{Site: uint32(si), Label: labels[si]}
			if m.Divergent {
				// The grid sum grows with the grid: no number is sent.
				d.Divergent, d.DivergenceReason = true, m.DivergentReason
			} else {
				d.UA2, d.UIsoA2, d.BA2 = append([]float64(nil), m.U[:]...), m.UIso, m.B
			}
			pt.Displacements = append(pt.Displacements, d)
		}
		out.Points[i] = pt
	}
	return out
}

// debyeStatusToProto converts the physics θ_D status; the number beside it
// is 0 unless the status is DETERMINED or ELASTIC_LIMIT.
func debyeStatusToProto(s thermo.ThetaStatus) modegridv1.DebyeTemperatureStatus {
	switch s {
	case thermo.ThetaDetermined:
		return modegridv1.DebyeTemperatureStatus_DEBYE_TEMPERATURE_STATUS_DETERMINED
	case thermo.ThetaElasticLimit:
		return modegridv1.DebyeTemperatureStatus_DEBYE_TEMPERATURE_STATUS_ELASTIC_LIMIT
	case thermo.ThetaGridTooCoarse:
		return modegridv1.DebyeTemperatureStatus_DEBYE_TEMPERATURE_STATUS_GRID_TOO_COARSE
	case thermo.ThetaIllConditioned:
		return modegridv1.DebyeTemperatureStatus_DEBYE_TEMPERATURE_STATUS_ILL_CONDITIONED
	}
	return modegridv1.DebyeTemperatureStatus_DEBYE_TEMPERATURE_STATUS_UNDEFINED
}
