package server

import (
	"context"
	"fmt"
	"sort"
	"strings"

	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/polar"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

var checkCodec = protoCodec(func() *modegridv1.CheckModelResponse { return &modegridv1.CheckModelResponse{} })

// CheckModel validates a model and summarises it. An invalid inline model
// is not a call error: the response lists every violation of the crystal
// (paths relative to it). A bad option of the model source (its symmetry
// tolerance), like every other problem of the request, is
// INVALID_ARGUMENT. The summary of a valid model is cached by its hash.
func (s *Service) CheckModel(ctx context.Context, req *modegridv1.CheckModelRequest) (*modegridv1.CheckModelResponse, error) {
	resp, err := s.checkModel(ctx, req)
	return resp, s.toStatus(ctx, "CheckModel", err)
}

// checkModel is CheckModel before the conversion of errors to statuses.
func (s *Service) checkModel(ctx context.Context, req *modegridv1.CheckModelRequest) (*modegridv1.CheckModelResponse, error) {
	var vs violations
	var mvs violations // violations of the model itself, answered in the response
	src := req.GetModel()
	var e *modelEntry
	var err error
	if src.GetCrystal() != nil {
		if s.precheckCheck(&vs, src) {
			return nil, vs.Err() // refused from the request alone, before compiling
		}
		e, err = s.resolve(ctx, src, &mvs)
	} else {
		e, err = s.resolve(ctx, src, &vs)
	}
	if err != nil {
		return nil, err
	}
	if !crystalOnly(&mvs) {
		// A problem beyond the crystal is the request's: a call error
		// that lists the crystal's violations too (all at once).
		vs.AddErr("", "model", mvs.Err())
	}
	if err := vs.Err(); err != nil {
		return nil, err
	}
	mesh := s.cfg.StabilityMesh
	canon := fmt.Sprintf("stability_mesh=%d", mesh)
	if e == nil {
		return invalidModelResponse(canon, &mvs), nil
	}
	stab := s.stabilityEstimate(e, mesh)
	s.budget.check(&vs, stab)
	if err := vs.Err(); err != nil {
		return nil, err
	}
	resp, err := cachedResult(ctx, s, kindCheck, e.hash, canon, checkCodec, func(ctx context.Context) (*modegridv1.CheckModelResponse, error) {
		out := s.modelSummary(e, canon)
		err := s.admitted(ctx, stab, func(ctx context.Context) error {
			return s.run(ctx, kindCheck, func(ctx context.Context) error {
				return s.checkSymmetryAndStability(ctx, e.m, mesh, out)
			})
		})
		if err != nil {
			return nil, err
		}
		return out, nil
	})
	if err != nil {
		return nil, err
	}
	return withDescription(resp, e), nil
}

// crystalPrefix is the path of an inline model's crystal in a request.
const crystalPrefix = "model.crystal."

// crystalOnly reports whether every violation in mvs is of a field inside
// the crystal (under crystalPrefix), which the report can name relative to
// the Crystal message.
func crystalOnly(mvs *violations) bool {
	for _, v := range mvs.List() {
		if !strings.HasPrefix(v.Field, crystalPrefix) {
			return false
		}
	}
	return true
}

// invalidModelResponse is the answer for an inline model that does not
// compile: not valid, every violation of the model listed (fields relative
// to the crystal; crystalOnly holds).
func invalidModelResponse(canon string, mvs *violations) *modegridv1.CheckModelResponse {
	out := &modegridv1.CheckModelResponse{Parameters: canon}
	for _, v := range mvs.List() {
		out.Violations = append(out.Violations, &modegridv1.FieldViolation{Field: strings.TrimPrefix(v.Field, crystalPrefix), Description: v.Description})
	}
	return out
}

// modelSummary is the part of a valid model's summary that needs no
// computation: sizes, sum rule, lattice type, standard points (sorted by
// label), default path and typical costs.
func (s *Service) modelSummary(e *modelEntry, canon string) *modegridv1.CheckModelResponse {
	m := e.m
	out := &modegridv1.CheckModelResponse{
		Valid:                   true,
		ModelHash:               e.hash,
		Parameters:              canon,
		Dimensions:              uint32(m.Dim()),
		Sites:                   uint32(m.Sites()),
		Polarizations:           uint32(m.Polarizations()),
		ModesPerCell:            uint32(m.ModeCount()),
		SumRuleViolationEvPerA2: m.SumRuleViolation(),
		LatticeType:             m.LatticeType(),
		Polar:                   polarCheck(m),
	}
	std := m.StandardPoints()
	labels := make([]string, 0, len(std))
	for l := range std {
		labels = append(labels, l)
	}
	sort.Strings(labels)
	for _, l := range labels {
		q := std[l]
		out.StandardPoints = append(out.StandardPoints, &modegridv1.PathPoint{Label: l, Q: &modegridv1.QPoint{Q1: q[0], Q2: q[1], Q3: q[2]}})
	}
	for _, c := range m.DefaultPath() {
		out.DefaultPath = append(out.DefaultPath, &modegridv1.PathPoint{Label: c.Label, BreakBefore: c.BreakBefore})
	}
	out.TypicalCosts = s.typicalCosts(e)
	return out
}

// checkSymmetryAndStability fills the computed part of the summary in
// out: the symmetry operations, the tolerance and what a looser one would
// find, and the stability scan on mesh (counted in the q-points metric).
// It runs holding a computation slot.
func (s *Service) checkSymmetryAndStability(ctx context.Context, m *physics.Model, mesh int, out *modegridv1.CheckModelResponse) error {
	d := m.Dim()
	ops, err := m.Symmetry(ctx)
	if err != nil {
		return err
	}
	for _, op := range ops {
		so := &modegridv1.SymmetryOperation{}
		for i := 0; i < d; i++ {
			for j := 0; j < d; j++ {
				so.Rotation = append(so.Rotation, int32(op.Rot[i][j]))
			}
			so.Translation = append(so.Translation, op.Trans[i])
		}
		out.Symmetry = append(out.Symmetry, so)
	}
	out.SymmetryToleranceA = m.SymTolA()
	if out.SymmetryAtLooserTolerance, err = looserSymmetry(ctx, m); err != nil {
		return err
	}
	lo, hi, stable, err := m.Stability(ctx, mesh)
	if err != nil {
		return err
	}
	s.met.qpoints.Add(float64(stabilityPoints(d, mesh)))
	out.MinFrequencyThz, out.MaxFrequencyThz, out.Stable = lo, hi, stable
	return nil
}

// withDescription adds to a cached summary what belongs to the
// description rather than to the compiled model — the interactions counted
// and the shells found — which the hash deliberately ignores (a shell and
// its explicit springs, or an added zero spring, share a hash). They come
// from the model as this request gave it (for a request by hash, as it
// was first sent). The cached message is shared, so this is a copy.
func withDescription(resp *modegridv1.CheckModelResponse, e *modelEntry) *modegridv1.CheckModelResponse {
	out := proto.Clone(resp).(*modegridv1.CheckModelResponse)
	out.Interactions = uint32(e.m.Interactions())
	out.Symmetrized = e.symmetrized
	out.SupercellFold = e.fold
	if out.Polar != nil {
		// A sum rule enforced where it already held leaves the hash alone.
		out.Polar.ChargeNeutralityEnforced = e.m.ChargeNeutralityEnforced()
	}
	out.Shells = nil
	for i, sh := range e.m.Shells() {
		out.Shells = append(out.Shells, &modegridv1.ShellBonds{Shell: uint32(i), Bonds: uint32(sh.Bonds), DistanceA: sh.DistanceA})
	}
	return out
}

// stabilityPoints is the number of points of the coarse stability grid.
func stabilityPoints(d, mesh int) int {
	n := 1
	for range d {
		n *= mesh
	}
	return n
}

// looserSymmetryMaxSites is the largest model whose check searches for
// operations at looser tolerances.
const looserSymmetryMaxSites = 64

// looserSymmetry counts the operations found at 10× and 100× the model's
// symmetry tolerance, and at the default when that is looser still (a
// tolerance set far too tight would otherwise get no hint), keeping those
// within physics.MaxSymTolA, so that check can say when a looser
// tolerance would find more. Each costs one more symmetry search, which
// grows with sites² per candidate operation and is not part of CheckModel's
// admitted estimate: models over looserSymmetryMaxSites get no hint (a
// fraction of a second each up to there; tens of seconds at 512 sites).
func looserSymmetry(ctx context.Context, m *physics.Model) ([]*modegridv1.SymmetryAtTolerance, error) {
	if m.Sites() > looserSymmetryMaxSites {
		return nil, nil
	}
	tols := []float64{10 * m.SymTolA(), 100 * m.SymTolA()}
	if physics.DefaultSymTolA > tols[1] {
		tols = append(tols, physics.DefaultSymTolA)
	}
	var out []*modegridv1.SymmetryAtTolerance
	for _, tol := range tols {
		if tol > physics.MaxSymTolA {
			break
		}
		ops, err := m.SymmetryAt(ctx, tol)
		if err != nil {
			return nil, err
		}
		out = append(out, &modegridv1.SymmetryAtTolerance{ToleranceA: tol, Operations: uint32(len(ops))})
	}
	return out, nil
}

// polarCheck summarises a model's polar data (nil without): the charge
// neutrality violation as given and the size of the dipole–dipole Ewald
// sum (whether the rule was enforced is the request's: withDescription).
func polarCheck(m *physics.Model) *modegridv1.PolarCheck {
	if !m.Polar() {
		return nil
	}
	out := &modegridv1.PolarCheck{ChargeNeutralityViolationE: m.ChargeNeutralityViolation()}
	if t, ok := m.LongRangeTerm().(*polar.Term); ok {
		out.EwaldParameterInvA = t.LambdaInvA()
		out.EwaldRealTerms = uint32(t.RealTerms())
		out.EwaldReciprocalVectors = uint32(t.ReciprocalVectors())
	}
	return out
}
