package server

// Shared pieces of the heat RPCs (ComputeGruneisen, ComputeQuasiHarmonic,
// ComputeConductivity): several models of one crystal in one request,
// their field paths, and the status of the engine's heat errors.

import (
	"context"
	"errors"
	"fmt"
	"strings"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/thermo"
	"github.com/materials-lab/modegrid/physics/thermo/qha"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// resolveModels resolves every model of a request under field ("models"):
// each model's violations come back under field[i] instead of "model", all
// at once; the compile bound of each inline model is checked first
// (precompile.go). It returns nil entries where a model had problems.
func (s *Service) resolveModels(ctx context.Context, srcs []*modegridv1.ModelSource, field string, vs *violations) ([]*modelEntry, error) {
	out := make([]*modelEntry, len(srcs))
	for i, src := range srcs {
		prefix := fmt.Sprintf("%s[%d]", field, i)
		var sub violations
		if s.precheck(&sub, src, nil) {
			renameModelFields(vs, &sub, prefix)
			continue
		}
		e, err := s.resolve(ctx, src, &sub)
		if err != nil {
			return nil, err
		}
		renameModelFields(vs, &sub, prefix)
		out[i] = e
	}
	return out, nil
}

// renameModelFields adds sub's violations to vs with their leading
// "model" replaced by prefix.
func renameModelFields(vs, sub *violations, prefix string) {
	for _, v := range sub.List() {
		f := v.Field
		if f == "model" || strings.HasPrefix(f, "model.") || strings.HasPrefix(f, "model[") {
			f = prefix + f[len("model"):]
		}
		vs.Add(f, "%s", v.Description)
	}
}

// volumeSet builds the engine's set from resolved entries (nil when any is
// missing or the set is refused, with violations added), with ref the
// caller's reference index or −1.
func volumeSet(entries []*modelEntry, ref int, vs *violations) *qha.VolumeSet {
	models := make([]*physics.Model, len(entries))
	for i, e := range entries {
		if e == nil {
			return nil
		}
		models[i] = e.m
	}
	set, err := qha.NewVolumeSet(models, ref)
	if err != nil {
		vs.AddErr("", "models", err)
		return nil
	}
	return set
}

// modelsParam names every model by hash, in request order.
func modelsParam(entries []*modelEntry) string {
	hs := make([]string, len(entries))
	for i, e := range entries {
		hs[i] = e.hash
	}
	return strings.Join(hs, ",")
}

// checkModelCount refuses too few or too many models.
func (s *Service) checkModelCount(vs *violations, field string, n, least int) {
	switch {
	case n < least:
		vs.Add(field, "at least %d models of one crystal at different volumes are required, got %d", least, n)
	case n > qha.MaxVolumes:
		vs.Add(field, "%d models exceed the limit of %d", n, qha.MaxVolumes)
	}
}

// heatStatus turns the heat RPCs' engine errors into statuses: an unstable
// model is FAILED_PRECONDITION (as for thermal properties), an
// equation-of-state fit that cannot be made is a bad request on the static
// energies; anything else goes through toStatus.
func (s *Service) heatStatus(ctx context.Context, method string, err error) error {
	switch {
	case err == nil:
		return nil
	case errors.Is(err, thermo.ErrUnstable):
		return status.Errorf(codes.FailedPrecondition, "%v (set allow_unstable to compute anyway, leaving imaginary modes out)", err)
	case errors.Is(err, qha.ErrFit):
		var vs violations
		vs.Add("static_energies_ev", "%v", err)
		return s.toStatus(ctx, method, vs.Err())
	}
	return s.toStatus(ctx, method, err)
}

// gridOnly parses a q-point set that must be a grid or a finite crystal.
func (s *Service) gridOnly(set *modegridv1.QPointSet, dim int, vs *violations) (mesh.GridSpec, bool) {
	qs := s.parseQSet(set, dim, "qpoints", false, vs)
	if qs == nil {
		return mesh.GridSpec{}, false
	}
	return qs.grid, true
}
