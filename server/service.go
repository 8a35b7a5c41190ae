package server

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"log/slog"
	"time"

	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/fcimport"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/polar"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
	"github.com/materials-lab/modegrid/server/cache"
	"github.com/materials-lab/modegrid/server/gate"
)

// Service implements modegridv1.ModegridServiceServer. Make one with New
// (inside a Server) or NewService.
type Service struct {
	modegridv1.UnimplementedModegridServiceServer

	cfg   Config // defaults resolved
	log   *slog.Logger
	cache *cache.Cache
	gate  *gate.Gate
	met   *metrics
	// budget is the server-wide memory budget of computations and the
	// compute-time bound (admission.go); reductions the grid reductions
	// kept for reuse, whose bound is taken out of the budget.
	budget     *budget
	reductions *mesh.ReductionCache
	// uploads bounds and counts the UploadModel streams (upload.go).
	uploads *uploads

	// backendLog and integrityLog rate-limit the log lines about shared
	// cache failures and refused cache entries (cachelog.go).
	backendLog, integrityLog *logLimiter

	// hook, when set (tests only), runs at the start of every computation,
	// after it obtained its slot.
	hook func(ctx context.Context, kind string)
}

// run performs one computation of kind: it waits for a slot (refusing with
// a *gate.Refusal past the queue), counts it, times it, and counts it as
// cancelled when its context ended before it did.
func (s *Service) run(ctx context.Context, kind string, fn func(ctx context.Context) error) error {
	release, err := s.gate.Acquire(ctx)
	if err != nil {
		return err
	}
	defer release()
	s.met.computations.WithLabelValues(kind).Inc()
	start := time.Now()
	if s.hook != nil {
		s.hook(ctx, kind)
	}
	err = fn(ctx)
	s.met.computeSeconds.WithLabelValues(kind).Observe(time.Since(start).Seconds())
	if err != nil && ctx.Err() != nil {
		s.met.canceled.WithLabelValues(kind).Inc()
	}
	return err
}

// modelEntry is a compiled model with what is needed to rebuild it on
// another replica: its source, serialised deterministically.
type modelEntry struct {
	m      *physics.Model
	hash   string
	source []byte // deterministic ModelSource{crystal, enforce_sum_rule, symmetry_tolerance_a, symmetrize, enforce_charge_neutrality}
	// symmetrized: m is the source's crystal made exactly symmetric.
	symmetrized bool
	// fold reports the fold of the source's supercell force-constant set
	// (nil when it has none). It belongs to the source, not the hash: two
	// sets differing only in what the fold corrects compile alike.
	fold *modegridv1.SupercellFold
}

// size is the entry's charge in the cache: an estimate of the compiled
// model (force-constant terms dominate, and the stacked copy of a model
// that assembles in batches) plus its source, plus the dipole–dipole
// term's arrays for a polar model.
func (e *modelEntry) size() int64 {
	n := int64(1024+len(e.source)+200*e.m.Interactions()+100*e.m.Sites()) + e.m.StackBytes()
	if t, ok := e.m.LongRangeTerm().(*polar.Term); ok {
		n += t.TermSizes().BuildCost(e.m.Sites()).Bytes
	}
	return n
}

// modelCodec stores a model in the Backend as its source; a replica reading
// it compiles it again, and refuses it unless it compiles to the model hash
// of the key it was read under.
var modelCodec = &cache.Codec{
	Version: 1,
	Verify: func(k cache.Key, v any) error {
		if h := v.(*modelEntry).hash; h != k.Model {
			return fmt.Errorf("the stored source compiles to model %s", prefix(h))
		}
		return nil
	},
	Encode: func(v any) ([]byte, error) { return v.(*modelEntry).source, nil },
	Decode: func(ctx context.Context, b []byte) (any, int64, error) {
		var src modegridv1.ModelSource
		if err := proto.Unmarshal(b, &src); err != nil {
			return nil, 0, err
		}
		e, err := compileEntry(ctx, &src, b, physics.Limits{}, 0)
		if err != nil {
			return nil, 0, err
		}
		return e, e.size(), nil
	},
}

// compileEntry compiles an inline model. raw is its deterministic
// serialisation. maxSymFlops bounds the symmetrisation of a supercell set,
// whose cost is known only once its space group is found (0: no bound;
// fcimport.Options.MaxSymmetrizeFlops). It stops with ctx.Err() when ctx
// ends first.
// With symmetrize set, the crystal is first made exactly symmetric
// (physics.Symmetrize; a supercell set by its fold, fcimport.FoldModel)
// and the entry is that model.
func compileEntry(ctx context.Context, src *modegridv1.ModelSource, raw []byte, lim physics.Limits, maxSymFlops float64) (*modelEntry, error) {
	opt := physics.Options{EnforceSumRule: src.GetEnforceSumRule(), Limits: lim, SymTolA: src.GetSymmetryToleranceA(),
		EnforceChargeNeutrality: src.GetEnforceChargeNeutrality(), LongRange: polar.Builder()}
	c, fold, err := foldSupercell(ctx, src.GetCrystal(), crystalFromProto(src.GetCrystal()), lim.MaxSites,
		fcimport.Options{Symmetrize: src.GetSymmetrize(), SymTolA: opt.SymTolA, Limits: lim, MaxSymmetrizeFlops: maxSymFlops}, src.GetEnforceChargeNeutrality())
	if err != nil {
		return nil, err
	}
	if src.GetSymmetrize() && fold == nil {
		if c, _, err = physics.Symmetrize(ctx, c, opt); err != nil {
			return nil, err
		}
	}
	m, err := physics.Compile(ctx, c, opt)
	if err != nil {
		return nil, err
	}
	return &modelEntry{m: m, hash: m.Hash(), source: raw, symmetrized: src.GetSymmetrize(), fold: fold}, nil
}

// modelKey is the cache key of a model referred to by hash.
func modelKey(hash string) cache.Key { return cache.Key{Kind: kindModel, Model: hash} }

// isHash reports whether h looks like a model hash: 64 lower-case hex
// digits.
func isHash(h string) bool {
	if len(h) != 64 {
		return false
	}
	for _, c := range h {
		if !('0' <= c && c <= '9' || 'a' <= c && c <= 'f') {
			return false
		}
	}
	return true
}

// resolve returns the model of src, from the cache when it was seen
// before. Problems with the model are added to vs (field paths under
// "model") and the entry is nil; an unknown reference is NOT_FOUND.
func (s *Service) resolve(ctx context.Context, src *modegridv1.ModelSource, vs *violations) (*modelEntry, error) {
	switch {
	case src.GetCrystal() != nil:
		return s.resolveInline(ctx, src, vs)
	case src.GetModelHash() != "":
		h := src.GetModelHash()
		if !isHash(h) {
			vs.Add("model.model_hash", "must be 64 lower-case hex digits (a hash from an earlier response), got %q", h)
			return nil, nil
		}
		v, src, ok := s.cache.Lookup(ctx, modelKey(h), modelCodec)
		if !ok {
			if err := ctx.Err(); err != nil {
				return nil, err // left while the stored model was rebuilt
			}
			return nil, errModelNotFound(h)
		}
		noteCache(ctx, src.String())
		e := v.(*modelEntry)
		noteModel(ctx, e.hash)
		return e, nil
	default:
		vs.Add("model", "a model is required: set crystal (inline) or model_hash")
		return nil, nil
	}
}

func (s *Service) resolveInline(ctx context.Context, src *modegridv1.ModelSource, vs *violations) (*modelEntry, error) {
	tooMany := len(src.GetCrystal().GetSites()) > s.cfg.MaxSites
	if tooMany {
		vs.Add("model.crystal.sites", "%d sites exceed this server's cap max-sites=%d", len(src.GetCrystal().GetSites()), s.cfg.MaxSites)
	}
	badTol := !checkSymTol(vs, src.GetSymmetryToleranceA())
	if badTol && !tooMany {
		// No compile with a bad option, but the crystal's own violations
		// are listed with it (Validate is quick below the sites cap).
		vs.AddErr("model.crystal", "model.crystal", physics.Validate(crystalFromProto(src.GetCrystal()), physics.Limits{MaxSites: s.cfg.MaxSites}))
	}
	if badTol || tooMany {
		return nil, nil
	}
	norm, raw, key, err := inlineKey(src)
	if err != nil {
		vs.Add("model.crystal", "cannot be serialised: %v", err)
		return nil, nil
	}
	// The compile is shared by every concurrent caller of the same model
	// (cache.Do): its ctx ends when the last of them has left, so one
	// caller's deadline never cancels it for the others, and a compile
	// nobody waits for stops at once.
	v, from, err := s.cache.Do(ctx, key, nil, func(ctx context.Context) (any, int64, error) {
		// A supercell set's fold holds maps of its n·N pair blocks: its
		// estimate is taken from the memory budget while it runs.
		if fs, ok := fcShapeOf(norm.GetCrystal()); ok {
			release, err := s.budget.reserve(ctx, fcimport.FoldBytes(fs.n, fs.atoms, norm.GetSymmetrize()))
			if err != nil {
				return nil, 0, err
			}
			defer release()
		}
		var e *modelEntry
		err := s.run(ctx, kindCompile, func(ctx context.Context) error {
			var err error
			e, err = compileEntry(ctx, norm, raw, physics.Limits{MaxSites: s.cfg.MaxSites}, s.cfg.MaxComputeSeconds*physics.FlopsPerCoreSecond)
			return err
		})
		if err != nil {
			return nil, 0, err
		}
		s.cache.Put(ctx, modelKey(e.hash), e, e.size(), modelCodec)
		return e, e.size(), nil
	})
	if err != nil {
		if isValidation(err) {
			vs.AddErr("model.crystal", "model.crystal", err)
			return nil, nil
		}
		return nil, err
	}
	e := v.(*modelEntry)
	// Referable by hash from now on, here and (through the Backend) on
	// other replicas. The entry is charged under both keys: a model
	// evicted under its hash stays usable inline, and sending it inline
	// makes it referable again.
	if from == cache.Memory && !s.cache.Contains(modelKey(e.hash)) {
		s.cache.Put(ctx, modelKey(e.hash), e, e.size(), modelCodec)
	}
	noteModel(ctx, e.hash)
	return e, nil
}

// checkSymTol reports whether tol is an allowed symmetry tolerance,
// adding a violation of model.symmetry_tolerance_a when it is not.
func checkSymTol(vs *violations, tol float64) bool {
	if tol != 0 && !(tol >= physics.MinSymTolA && tol <= physics.MaxSymTolA) {
		vs.Add("model.symmetry_tolerance_a", "must be 0 (the default, %g Å) or between %g and %g Å, got %v", physics.DefaultSymTolA, physics.MinSymTolA, physics.MaxSymTolA, tol)
		return false
	}
	return true
}

// inlineKey is the normalised source of an inline model, its
// deterministic serialisation and the cache key of its compile.
func inlineKey(src *modegridv1.ModelSource) (*modegridv1.ModelSource, []byte, cache.Key, error) {
	norm := &modegridv1.ModelSource{
		Source:             &modegridv1.ModelSource_Crystal{Crystal: src.GetCrystal()},
		EnforceSumRule:     src.GetEnforceSumRule(),
		SymmetryToleranceA: src.GetSymmetryToleranceA(),
		Symmetrize:         src.GetSymmetrize(),
		// Only a model with charges compiles differently with it: without
		// them the option is dropped, so both spellings share the key.
		EnforceChargeNeutrality: src.GetEnforceChargeNeutrality() && len(src.GetCrystal().GetEpsilonInf()) > 0,
	}
	raw, err := proto.MarshalOptions{Deterministic: true}.Marshal(norm)
	if err != nil {
		return nil, nil, cache.Key{}, err
	}
	sum := sha256.Sum256(raw)
	return norm, raw, cache.Key{Kind: kindInline, Model: hex.EncodeToString(sum[:])}, nil
}

// isValidation reports whether err carries physics validation violations.
func isValidation(err error) bool {
	var ve *physics.ValidationError
	return errors.As(err, &ve)
}
