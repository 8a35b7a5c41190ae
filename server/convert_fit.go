package server

import (
	"fmt"
	"strings"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/fit"
	"github.com/materials-lab/modegrid/physics/mesh"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// fitProblem converts a FitRequest (all but the model) into the engine's
// problem for a model of dim dimensions (0: unknown). The engine's field
// paths are the request's, so its violations need no mapping; what only
// the conversion can see (grids against the server's caps, the data count
// against its caps) is added to vs here.
func (s *Service) fitProblem(req *modegridv1.FitRequest, dim int, vs *violations) *fit.Problem {
	p := &fit.Problem{}
	if n := req.GetMaxEvaluations(); n > fit.MaxEvaluationsCap {
		vs.Add("max_evaluations", "must be 0 (the default, %d) or at most %d, got %d", fit.DefaultMaxEvaluations, fit.MaxEvaluationsCap, n)
	} else {
		p.MaxEvaluations = int(n)
	}
	for _, f := range req.GetFree() {
		p.Free = append(p.Free, fit.Free{Path: f.GetPath(), Lower: f.GetLower(), HasLower: f.Lower != nil, Upper: f.GetUpper(), HasUpper: f.Upper != nil})
	}
	for _, t := range req.GetTies() {
		p.Ties = append(p.Ties, fit.Tie{Path: t.GetPath(), To: t.GetTo(), Ratio: t.GetRatio()})
	}
	for _, f := range req.GetFrequencies() {
		q := f.GetQ()
		p.Frequencies = append(p.Frequencies, fit.Frequency{Q: [3]float64{canonFloat(q.GetQ1()), canonFloat(q.GetQ2()), canonFloat(q.GetQ3())},
			FreqTHz: f.GetFrequencyThz(), SigmaTHz: f.GetSigmaThz(), Branch: branchOf(f.GetBranch()), Polarization: fit.Polarization(f.GetPolarization())})
	}
	for _, g := range req.GetGammaFrequencies() {
		p.GammaFrequencies = append(p.GammaFrequencies, fit.GammaFrequency{FreqTHz: g.GetFrequencyThz(), SigmaTHz: g.GetSigmaThz(), Branch: branchOf(g.GetBranch())})
	}
	for _, v := range req.GetSoundVelocities() {
		d := v.GetDirection()
		p.SoundVelocities = append(p.SoundVelocities, fit.Velocity{Dir: [3]float64{d.GetX(), d.GetY(), d.GetZ()},
			KmS: v.GetKmS(), SigmaKmS: v.GetSigmaKmS(), Branch: branchOf(v.GetBranch()), Polarization: fit.Polarization(v.GetPolarization())})
	}
	for _, e := range req.GetElasticConstants() {
		ij := min(e.GetIj(), 100)
		p.ElasticConstants = append(p.ElasticConstants, fit.ElasticConstant{I: int(ij / 10), J: int(ij % 10), GPa: e.GetGpa(), SigmaGPa: e.GetSigmaGpa()})
	}
	n := 0
	for _, h := range req.GetHeatCapacities() {
		n += len(h.GetPoints())
	}
	if total := n + len(p.Frequencies) + len(p.GammaFrequencies) + len(p.SoundVelocities) + len(p.ElasticConstants); total > fit.MaxData {
		vs.Add("frequencies", "%d data exceed this server's cap of %d per fit", total, fit.MaxData)
		return nil
	}
	for i, h := range req.GetHeatCapacities() {
		p.HeatCapacities = append(p.HeatCapacities, s.heatSet(h, dim, fmt.Sprintf("heat_capacities[%d]", i), vs))
	}
	return p
}

// branchOf is a branch number within int range (larger ones are refused
// by the engine as too large).
func branchOf(b uint32) int { return int(min(b, 1<<30)) }

// heatSet converts one heat-capacity series; its grid is checked here
// against the server's cap (a grid with a problem is replaced by a
// one-point grid, so the engine does not report it again).
func (s *Service) heatSet(h *modegridv1.HeatCapacityData, dim int, field string, vs *violations) fit.HeatCapacitySet {
	set := fit.HeatCapacitySet{Grid: mesh.GridSpec{Mesh: [3]int{1, 1, 1}}}
	switch b := h.GetBasis(); b {
	case modegridv1.HeatCapacityBasis_HEAT_CAPACITY_BASIS_UNSPECIFIED, modegridv1.HeatCapacityBasis_HEAT_CAPACITY_BASIS_PER_MOL_ATOMS:
		set.Basis = fit.PerMolAtoms
	case modegridv1.HeatCapacityBasis_HEAT_CAPACITY_BASIS_PER_MOL_CELLS:
		set.Basis = fit.PerMolCells
	case modegridv1.HeatCapacityBasis_HEAT_CAPACITY_BASIS_PER_KG:
		set.Basis = fit.PerKg
	default:
		vs.Add(field+".basis", "unknown basis %d", b)
	}
	if h.GetGrid() == nil {
		vs.Add(field+".grid", "a Monkhorst–Pack grid is required (the mode sum's grid)")
	} else {
		var gvs violations
		g := s.parseMesh(h.GetGrid().GetMesh(), dim, field+".grid.mesh", &gvs)
		if gvs.Len() == 0 {
			set.Grid = g
			set.Grid.Shifted = h.GetGrid().GetShifted()
		}
		for _, v := range gvs.List() {
			vs.Add(v.Field, "%s", v.Description)
		}
	}
	for _, pt := range h.GetPoints() {
		set.Points = append(set.Points, fit.HeatCapacity{TempK: pt.GetTemperatureK(), Value: pt.GetValue(), Sigma: pt.GetSigma()})
	}
	return set
}

// maxFitViolations bounds the violations listed for one fit request: a
// file of 10⁵ bad points would otherwise make a BadRequest larger than a
// message may be.
const maxFitViolations = 100

// addFitViolations adds the engine's violations of a fit (err), with the
// model's paths under the request's model ("model.crystal…", or
// "model.model_hash" for a stored model), at most maxFitViolations of
// them.
func addFitViolations(vs *violations, err error, byHash bool) {
	var ve *physics.ValidationError
	if !asValidation(err, &ve) {
		vs.AddErr("", "", err)
		return
	}
	for i, v := range ve.Violations {
		field := v.Field
		if rest, ok := strings.CutPrefix(field, "model"); ok && (rest == "" || rest[0] == '.' || rest[0] == '[') {
			if byHash {
				field = "model.model_hash"
			} else {
				field = physics.JoinField("model.crystal", strings.TrimPrefix(rest, "."))
			}
		}
		if vs.Len() >= maxFitViolations {
			vs.Add(field, "and %d more problems of this request, this one first (only the first %d are listed)", len(ve.Violations)-i, maxFitViolations)
			return
		}
		vs.Add(field, "%s", v.Description)
	}
}

// fittedCrystal is the fitted model as a message: the starting one (every
// field kept, ε∞ among them) with the force constants and Born charges of
// the engine's fitted crystal (the charges as given, before any
// enforcement of neutrality, which the model source repeats).
func fittedCrystal(start *modegridv1.Crystal, c *physics.Crystal) *modegridv1.Crystal {
	out := cloneCrystal(start)
	for i, s := range out.GetSites() {
		if len(s.GetBornCharge()) > 0 {
			s.BornCharge = append([]float64(nil), c.Sites[i].BornCharge...)
		}
	}
	for i, s := range out.GetSprings() {
		s.KLong, s.KTrans = c.Springs[i].KLong, c.Springs[i].KTrans
	}
	for i, s := range out.GetShells() {
		s.KLong, s.KTrans = c.Shells[i].KLong, c.Shells[i].KTrans
	}
	for i, b := range out.GetBlocks() {
		b.Phi = append([]float64(nil), c.Blocks[i].Phi...)
	}
	return out
}

// fitResultToProto converts a finished fit.
func fitResultToProto(r *fit.Result, fitted *modegridv1.Crystal, fittedHash string) *modegridv1.FitResult {
	out := &modegridv1.FitResult{
		FittedModelHash: fittedHash, Fitted: fitted,
		Correlation: r.Correlation, ChiSquare: r.ChiSquare,
		Data: uint32(r.Data), Rank: uint32(r.Rank), DegreesOfFreedom: uint32(r.DOF), ReducedChiSquare: r.ReducedChiSquare,
		Iterations: uint32(r.Iterations), Evaluations: uint32(r.Evaluations), Converged: r.Converged, StopReason: r.Stop,
	}
	for _, p := range r.Params {
		out.Parameters = append(out.Parameters, &modegridv1.FittedParameter{Path: p.Path, Start: p.Start, Value: p.Value,
			StdError: p.StdErr, StdErrorUnscaled: p.StdErrUnscaled, Determined: p.Determined, AtBound: p.AtBound})
	}
	for _, t := range r.Ties {
		out.Ties = append(out.Ties, &modegridv1.FittedTie{Path: t.Path, To: t.To, Ratio: t.Ratio, Value: t.Value, Start: t.Start})
	}
	for _, x := range r.Residuals {
		out.Residuals = append(out.Residuals, &modegridv1.FitResidual{Datum: x.Field, Measured: x.Measured, Sigma: x.Sigma,
			Model: x.Model, Branch: uint32(x.Branch), Normalized: x.Normalized()})
	}
	for _, u := range r.Undetermined {
		g := &modegridv1.UndeterminedParameters{Paths: u.Params}
		for _, c := range u.Determined {
			g.Determined = append(g.Determined, combinationToProto(c))
		}
		for _, c := range u.Flat {
			g.Flat = append(g.Flat, combinationToProto(c))
		}
		out.Undetermined = append(out.Undetermined, g)
	}
	return out
}

func combinationToProto(c fit.Combination) *modegridv1.ParameterCombination {
	return &modegridv1.ParameterCombination{Coefficients: c.Coeffs, Value: c.Value, StdError: c.StdErr, StdErrorUnscaled: c.StdErrUnscaled}
}
