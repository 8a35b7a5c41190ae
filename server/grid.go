package server

import (
	"context"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/server/cache"
)

// gridNeed is what a computation needs of the modes on a grid beyond the
// frequencies.
type gridNeed struct {
	sites   bool // per-site weights (projected DOS)
	vectors bool // eigenvectors (mean-square displacements)
}

func (n gridNeed) param() string {
	switch {
	case n.sites && n.vectors:
		return "keep=sites+vectors"
	case n.sites:
		return "keep=sites"
	case n.vectors:
		return "keep=vectors"
	default:
		return "keep=frequencies"
	}
}

// covers lists the needs whose grid modes also serve n, n first.
func (n gridNeed) covers() []gridNeed {
	all := []gridNeed{n}
	for _, o := range []gridNeed{{}, {sites: true}, {vectors: true}, {sites: true, vectors: true}} {
		if o != n && (o.sites || !n.sites) && (o.vectors || !n.vectors) {
			all = append(all, o)
		}
	}
	return all
}

func gridKey(hash string, spec mesh.GridSpec, n gridNeed) cache.Key {
	return cache.Key{Kind: kindGrid, Model: hash, Params: gridParam(spec) + ";" + n.param()}
}

// gridBytes is the memory held by grid modes.
func gridBytes(g *physics.GridModes) int64 {
	return g.Bytes()
}

// gridModes returns the modes of e's model on spec with at least what need
// asks for: from memory when any cached grid covers the need, else
// computed once for every concurrent caller and cached. It is the shared
// intermediate of DOS and thermal requests. Grid modes are not sent to the
// Backend: they are large and quick to rebuild compared with a transfer.
func (s *Service) gridModes(ctx context.Context, e *modelEntry, spec mesh.GridSpec, need gridNeed) (*physics.GridModes, cache.Source, error) {
	for _, n := range need.covers() {
		if v, ok := s.cache.Get(gridKey(e.hash, spec, n)); ok {
			return v.(*physics.GridModes), cache.Memory, nil
		}
	}
	v, src, err := s.cache.Do(ctx, gridKey(e.hash, spec, need), nil, func(ctx context.Context) (any, int64, error) {
		var g *physics.GridModes
		err := s.run(ctx, kindGrid, func(ctx context.Context) error {
			var err error
			g, err = e.m.GridModes(ctx, spec, physics.GridOptions{Projections: need.sites, Eigenvectors: need.vectors, Cache: s.reductions})
			return err
		})
		if err != nil {
			return nil, 0, err
		}
		s.met.qpoints.Add(float64(len(g.Points)))
		return g, gridBytes(g), nil
	})
	if err != nil {
		return nil, src, err
	}
	return v.(*physics.GridModes), src, nil
}
