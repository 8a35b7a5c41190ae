package server

import (
	"context"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/thermo/qha"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

var qhaCodec = protoCodec(func() *modegridv1.ComputeQuasiHarmonicResponse { return &modegridv1.ComputeQuasiHarmonicResponse{} })

// ComputeQuasiHarmonic returns quasi-harmonic thermodynamics from models
// at five or more volumes and their static energies. Cached by (middle
// model hash, canonical parameters naming every model and energy).
func (s *Service) ComputeQuasiHarmonic(ctx context.Context, req *modegridv1.ComputeQuasiHarmonicRequest) (*modegridv1.ComputeQuasiHarmonicResponse, error) {
	resp, err := s.computeQuasiHarmonic(ctx, req)
	return resp, s.heatStatus(ctx, "ComputeQuasiHarmonic", err)
}

// qhaFields maps qha.Options' field paths onto the request's.
var qhaFields = fieldMap{"temperatures_k": "temperatures_k", "pressure_gpa": "pressure_gpa", "eos": "eos"}

func (s *Service) computeQuasiHarmonic(ctx context.Context, req *modegridv1.ComputeQuasiHarmonicRequest) (*modegridv1.ComputeQuasiHarmonicResponse, error) {
	var vs violations
	s.checkModelCount(&vs, "models", len(req.GetModels()), qha.MinQHAVolumes)
	opt := qha.Options{PressureGPa: canonFloat(req.GetPressureGpa()), AllowUnstable: req.GetAllowUnstable(), Cache: s.reductions}
	switch req.GetEos() {
	case modegridv1.EquationOfState_EQUATION_OF_STATE_UNSPECIFIED, modegridv1.EquationOfState_EQUATION_OF_STATE_VINET:
		opt.EOS = qha.Vinet
	case modegridv1.EquationOfState_EQUATION_OF_STATE_BIRCH_MURNAGHAN:
		opt.EOS = qha.BirchMurnaghan
	default:
		vs.Add("eos", "unknown equation of state %d", req.GetEos())
	}
	opt.TempsK = s.temperatures(req, &vs)
	if len(opt.TempsK) > 0 {
		qhaFields.addEngine(&vs, opt.Validate(), "temperatures_k", violatedFields(vs.Err()))
	}
	static := make([]float64, len(req.GetStaticEnergiesEv()))
	for i, e := range req.GetStaticEnergiesEv() {
		static[i] = canonFloat(e)
	}
	vs.AddErr("", "static_energies_ev", qha.CheckStatic(len(req.GetModels()), static))
	if vs.Len() > 0 {
		return nil, vs.Err()
	}
	if s.precheck(&vs, req.GetModels()[0], func(r rawModel, vs *violations) {
		// A lower bound before compiling any model: every volume's grid
		// modes and sums, as large as the first model's.
		if qs := s.qsetFor(req.GetQpoints(), r.size.Dim, false); qs != nil && vs.Len() == 0 {
			s.lowerBound(vs, estimate{cost: qha.QHACost(r.grid(qs.grid), len(req.GetModels()), len(opt.TempsK)),
				field: "qpoints", change: "a smaller grid (qpoints), fewer temperatures or fewer volumes"})
		}
	}) {
		return nil, renamedFirst(&vs)
	}
	entries, err := s.resolveModels(ctx, req.GetModels(), "models", &vs)
	if err != nil {
		return nil, err
	}
	set := volumeSet(entries, -1, &vs)
	var est estimate
	if set != nil {
		ref := set.Models[set.Ref]
		if ref.Dim() != 3 {
			vs.Add("models", "the quasi-harmonic approximation is computed for 3D crystals, got %d dimensions", ref.Dim())
		}
		if grid, ok := s.gridOnly(req.GetQpoints(), ref.Dim(), &vs); ok && vs.Len() == 0 {
			opt.Grid = grid
			s.checkReply(&vs, "temperatures_k", float64(len(opt.TempsK))*400, "the quasi-harmonic points")
			c := qha.QHACost(s.gridSize(entries[set.Index[set.Ref]], grid), len(set.Models), len(opt.TempsK))
			c.Bytes += 2 * 400 * int64(len(opt.TempsK))
			est = estimate{cost: c, field: "qpoints", change: "a smaller grid (qpoints), fewer temperatures or fewer volumes"}
			s.budget.check(&vs, est)
		}
	}
	if err := vs.Err(); err != nil {
		return nil, err
	}
	var p params
	p.add("models", modelsParam(entries))
	p.add("static_energies_ev", tempsParam(static))
	p.add("grid", gridParam(opt.Grid))
	p.add("temperatures_k", tempsParam(opt.TempsK))
	p.add("pressure_gpa", fmtFloat(opt.PressureGPa))
	p.add("eos", opt.EOS.String())
	p.addBool("allow_unstable", opt.AllowUnstable)
	canon := p.String()
	refHash := entries[set.Index[set.Ref]].hash
	return cachedResult(ctx, s, kindQHA, refHash, canon, qhaCodec, func(ctx context.Context) (*modegridv1.ComputeQuasiHarmonicResponse, error) {
		var res *qha.Result
		err := s.admitted(ctx, est, func(ctx context.Context) error {
			return s.run(ctx, kindQHA, func(ctx context.Context) error {
				var err error
				res, err = qha.Compute(ctx, set, static, opt)
				return err
			})
		})
		if err != nil {
			return nil, err
		}
		return qhaToProto(refHash, canon, set, opt, res), nil
	})
}

func eosToProto(f qha.EOSFit) *modegridv1.EosFit {
	return &modegridv1.EosFit{E0Ev: f.E0eV, V0A3: f.V0A3, B0Gpa: f.B0eVA3 * qha.EVPerA3ToGPa, B0Prime: f.B0p,
		RmsResidualEv: f.RMSeV, MaxResidualEv: f.MaxAbseV}
}

func qhaToProto(hash, canon string, set *qha.VolumeSet, opt qha.Options, r *qha.Result) *modegridv1.ComputeQuasiHarmonicResponse {
	atoms := float64(set.Models[0].Sites())
	out := &modegridv1.ComputeQuasiHarmonicResponse{ModelHash: hash, Parameters: canon, StaticFit: eosToProto(r.Static),
		Unbracketed: uint32(r.Unbracketed), AtomsPerCell: uint32(atoms), PressureGpa: opt.PressureGPa,
		VolumesA3: make([]float64, len(set.Models))}
	for k, i := range set.Index {
		out.VolumesA3[i] = set.VolA3[k]
	}
	for _, p := range r.Points {
		cv, cp := physics.EVPerKToJPerMolK(p.CveVPerK), physics.EVPerKToJPerMolK(p.CpeVPerK)
		out.Points = append(out.Points, &modegridv1.QuasiHarmonicPoint{
			TemperatureK: p.TempK, VolumeA3: p.VolumeA3, GibbsEnergyEv: p.GibbsEV, BulkModulusGpa: p.BulkModulusGPa,
			VolumeExpansionPerK: p.AlphaVolPerK, LinearExpansionPerK: p.AlphaLinPerK,
			HeatCapacityVEvPerK: p.CveVPerK, HeatCapacityPEvPerK: p.CpeVPerK,
			HeatCapacityVJPerMolK: cv, HeatCapacityPJPerMolK: cp,
			HeatCapacityVJPerMolAtomsK: cv / atoms, HeatCapacityPJPerMolAtomsK: cp / atoms,
			Gruneisen: p.Gamma, GruneisenDefined: p.GammaOK, Fit: eosToProto(p.Fit), EntropyFitRmsEvPerK: p.EntropyRMS,
			Bracketed: p.Bracketed, Found: p.Found, Warning: p.Warning,
		})
	}
	return out
}

// renamedFirst is the error of violations found on the first model before
// compiling: "model…" paths become "models[0]…".
func renamedFirst(vs *violations) error {
	var out violations
	renameModelFields(&out, vs, "models[0]")
	return out.Err()
}
