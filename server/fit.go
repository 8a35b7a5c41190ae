package server

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"

	"google.golang.org/grpc"
	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/fit"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/polar"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// Fit fits a model's free parameters to measured data (physics/fit),
// streaming one progress message per evaluation and the result last. Fits
// are not cached (their data are the request); the fitted model is stored
// like an inline model, so its hash works at once in every other call.
func (s *Service) Fit(req *modegridv1.FitRequest, stream grpc.ServerStreamingServer[modegridv1.FitResponse]) error {
	ctx := stream.Context()
	return s.toStatus(ctx, "Fit", s.fit(ctx, req, stream))
}

func (s *Service) fit(ctx context.Context, req *modegridv1.FitRequest, stream grpc.ServerStreamingServer[modegridv1.FitResponse]) error {
	var vs violations
	src := req.GetModel()
	if src.GetSymmetrize() {
		vs.Add("model.symmetrize", "is not supported by fits: parameters are the numbers of the model as given (symmetrise it first and fit the result)")
	}
	if src.GetCrystal().GetSupercellFc() != nil {
		vs.Add("model.crystal.supercell_fc", "a supercell force-constant set cannot be fitted: fit a model of springs, shells and blocks")
	}
	if s.precheckFit(&vs, req) {
		return vs.Err() // refused from the request alone, before compiling
	}
	e, err := s.resolve(ctx, src, &vs)
	if err != nil {
		return err
	}
	start, byHash := s.startCrystal(src, e)
	flags := s.startFlags(src, e) // the compile options the starting model was made with
	dim := len(start.GetLattice())
	prob := s.fitProblem(req, dim, &vs)
	var est estimate
	if prob != nil && start != nil {
		prob.Crystal = crystalFromProto(start)
		// A polar model is fitted with its dipole–dipole term in every D
		// (physics/fit: force constants by unit models without the
		// charges, charges by the term's exact quadratic form).
		prob.Options = physics.Options{EnforceSumRule: src.GetEnforceSumRule(), SymTolA: src.GetSymmetryToleranceA(), Limits: physics.Limits{MaxSites: s.cfg.MaxSites},
			EnforceChargeNeutrality: flags.GetEnforceChargeNeutrality(), LongRange: polar.Builder()}
		if e != nil || (dim >= 1 && dim <= 3 && start.GetPolarizations() <= 3) {
			addFitViolations(&vs, prob.Validate(), byHash) // with the model's own violations when it has any
		}
		if vs.Len() == 0 {
			est = s.fitEstimate(prob, e.m.GridSizeOf(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}, 1), start)
			s.checkFitReply(&vs, prob, start)
			s.budget.check(&vs, est)
		}
	}
	if err := vs.Err(); err != nil {
		return err
	}
	canon := fitParams(req)
	var res *fit.Result
	err = s.admitted(ctx, est, func(ctx context.Context) error {
		return s.run(ctx, kindFit, func(ctx context.Context) error {
			var sendErr error
			prob.Progress = func(p fit.Progress) {
				if sendErr == nil {
					sendErr = stream.Send(&modegridv1.FitResponse{ModelHash: e.hash, Parameters: canon, Update: &modegridv1.FitResponse_Progress{Progress: &modegridv1.FitProgress{
						Iteration: uint32(p.Iteration), Evaluations: uint32(p.Evaluations), ChiSquare: p.ChiSquare, Damping: p.Lambda}}})
				}
			}
			var err error
			res, err = fit.Fit(ctx, prob)
			return errors.Join(err, sendErr)
		})
	})
	if err != nil {
		if asValidation(err, new(*physics.ValidationError)) {
			addFitViolations(&vs, err, byHash)
			return vs.Err()
		}
		return err
	}
	return s.sendFitResult(ctx, stream, src, flags.GetEnforceChargeNeutrality(), start, e.hash, canon, res)
}

// sendFitResult stores the fitted model (compiled again under the cache's
// rules, outside the fit's slot) and sends the result.
func (s *Service) sendFitResult(ctx context.Context, stream grpc.ServerStreamingServer[modegridv1.FitResponse], src *modegridv1.ModelSource,
	neutral bool, start *modegridv1.Crystal, hash, canon string, res *fit.Result) error {
	fitted := fittedCrystal(start, res.Crystal)
	var vs violations
	fe, err := s.resolveInline(ctx, &modegridv1.ModelSource{
		Source:                  &modegridv1.ModelSource_Crystal{Crystal: fitted},
		EnforceSumRule:          src.GetEnforceSumRule(),
		SymmetryToleranceA:      src.GetSymmetryToleranceA(),
		EnforceChargeNeutrality: neutral,
	}, &vs)
	if err != nil {
		return err
	}
	if vs.Len() > 0 || fe == nil {
		return fmt.Errorf("the fitted model does not compile: %v", vs.Err())
	}
	return stream.Send(&modegridv1.FitResponse{ModelHash: hash, Parameters: canon,
		Update: &modegridv1.FitResponse_Result{Result: fitResultToProto(res, fitted, fe.hash)}})
}

// startCrystal is the starting model's message: inline, or the source the
// stored model was compiled from (nil when the model is unusable); byHash
// says it came by reference.
func (s *Service) startCrystal(src *modegridv1.ModelSource, e *modelEntry) (*modegridv1.Crystal, bool) {
	if c := src.GetCrystal(); c != nil {
		return c, false
	}
	if e == nil {
		return nil, true
	}
	var stored modegridv1.ModelSource
	if proto.Unmarshal(e.source, &stored) != nil {
		return nil, true
	}
	return stored.GetCrystal(), true
}

// startFlags is the model source whose compile options the starting
// model was made with: the request's for an inline model, the stored
// source for one by hash (its charge-neutrality option; nil-safe).
func (s *Service) startFlags(src *modegridv1.ModelSource, e *modelEntry) *modegridv1.ModelSource {
	if src.GetCrystal() != nil || e == nil {
		return src
	}
	var stored modegridv1.ModelSource
	if proto.Unmarshal(e.source, &stored) != nil {
		return src
	}
	return &stored
}

// precheckFit is Fit's pre-compile check: the request's own caps and the
// lower bound of its cost from the model's message.
func (s *Service) precheckFit(vs *violations, req *modegridv1.FitRequest) bool {
	return s.precheck(vs, req.GetModel(), func(r rawModel, vs *violations) {
		var scratch violations
		p := s.fitProblem(req, r.size.Dim, &scratch)
		if p != nil {
			p.Crystal = r.c
		}
		if scratch.Len() > 0 || p == nil || p.Validate() != nil {
			return // the normal path reports them
		}
		est := s.fitEstimate(p, r.size, req.GetModel().GetCrystal())
		s.lowerBound(vs, est)
	})
}

// fitEstimate is the cost of a fit on a model of size (fit.Cost), with
// the compile's own bound for the compiles at every evaluation.
func (s *Service) fitEstimate(p *fit.Problem, size physics.GridSize, c *modegridv1.Crystal) estimate {
	secs, _ := compileSeconds(crystalFromProto(c))
	cost := fit.Cost(fit.ShapeOf(p, size, fit.CompileCost(size, secs*physics.FlopsPerCoreSecond)))
	return estimate{cost: cost, field: "max_evaluations", change: "fewer evaluations (max_evaluations), fewer data or smaller heat-capacity grids"}
}

// fitResultOverhead is the size of a fit result beyond its residuals,
// parameters and model: counts, reasons and framing.
const fitResultOverhead = 1024

// checkFitReply refuses a fit whose result cannot fit one message: the
// fitted model (the size of the starting one), a residual per datum (the
// field path and five numbers) and the parameters with their correlation.
func (s *Service) checkFitReply(vs *violations, p *fit.Problem, start *modegridv1.Crystal) {
	n := float64(len(p.Free))
	bytes := float64(fitResultOverhead+proto.Size(start)) + float64(p.DataCount())*96 + n*(96+8*n) + float64(len(p.Ties))*96
	s.checkReply(vs, "frequencies", bytes, fmt.Sprintf("a fit result of %d data", p.DataCount()))
}

// fitParams is the canonical form of a fit's parameters: the free and tied
// paths as given, the evaluation limit, the data counts and a digest of
// the data (the request without its model, serialised deterministically).
func fitParams(req *modegridv1.FitRequest) string {
	var p params
	strip := proto.Clone(req).(*modegridv1.FitRequest)
	strip.Model = nil
	b, _ := proto.MarshalOptions{Deterministic: true}.Marshal(strip)
	sum := sha256.Sum256(b)
	p.add("free", fmt.Sprint(len(req.GetFree())))
	p.add("ties", fmt.Sprint(len(req.GetTies())))
	p.add("data", fmt.Sprintf("%d+%d+%d+%d+%d", len(req.GetFrequencies()), len(req.GetGammaFrequencies()),
		len(req.GetSoundVelocities()), len(req.GetElasticConstants()), len(req.GetHeatCapacities())))
	maxEval := req.GetMaxEvaluations()
	if maxEval == 0 {
		maxEval = fit.DefaultMaxEvaluations
	}
	p.add("max_evaluations", fmt.Sprint(maxEval))
	p.add("request_sha256", hex.EncodeToString(sum[:8]))
	return p.String()
}

// asValidation is errors.As for a *physics.ValidationError.
func asValidation(err error, target **physics.ValidationError) bool { return errors.As(err, target) }

// cloneCrystal is a deep copy of c.
func cloneCrystal(c *modegridv1.Crystal) *modegridv1.Crystal {
	return proto.Clone(c).(*modegridv1.Crystal)
}
