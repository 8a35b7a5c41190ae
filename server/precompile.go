package server

// Admission before compilation. The estimates of admission.go need the
// compiled model (its interactions, its symmetry); compiling a large model
// is itself work — a neighbour-shell search over every site pair in every
// cell within reach, 2 s for a 512-site supercell — so a request carrying
// a new model that could never be admitted would be refused only after it.
// Here the request alone, before resolve, gives a LOWER BOUND of its cost:
//
//   - the model's sites, polarizations p and dimensionality are read from
//     the message; its interactions are at least its springs and blocks
//     (shell bonds are found by the compile), plus ⌈n·N/2⌉ for a supercell
//     force-constant set of N atoms (precompile_fc.go);
//   - the grid is reduced by the largest point group possible in its
//     dimension (minIrreducible), so at least ⌈N/|G|⌉ points are
//     diagonalised, while every array kept for all N points (frequencies,
//     unfolded site weights, eigenvectors, site tensors, thermal channels)
//     is the same as in the real estimate;
//   - the same estimators (physics.GridModesCost, DOSCost, ThermalCost,
//     StreamCost) then give a cost never above the post-compile estimate,
//     and the reply sizes depend on the sites alone (exact).
//
// A request that not even its lower bound lets fit is refused with
// INVALID_ARGUMENT at once: no compile, no slot, no computation counted.
// Everything else goes on as before and meets the exact estimate after the
// compile. The compile itself is bounded too (compileSeconds), and so is
// the fold of a supercell set that precedes it (fcShape.foldCost).

import (
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/polar"
	"github.com/materials-lab/modegrid/physics/spectra"
	"github.com/materials-lab/modegrid/physics/thermo"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// maxPointGroupOrder is the order of the largest point group (time reversal
// included) that can relate q-points of a d-dimensional lattice: m3̄m, 48
// operations, in 3D (it contains the inversion, so time reversal adds
// none); p6mm's point group 6mm, 12 operations, in 2D (its 2-fold rotation
// is the 2D inversion q → −q, so again time reversal adds none); {1, −1}
// in 1D. International Tables for Crystallography, Vol. A, ch. 10 (the
// crystallographic point groups and their orders).
var maxPointGroupOrder = [4]int{1, 2, 12, 48}

// minIrreducible is a lower bound of the irreducible points of an n-point
// grid in dim dimensions: each star has at most |G| points.
func minIrreducible(n, dim int) int {
	g := maxPointGroupOrder[min(max(dim, 1), 3)]
	return max(1, (n+g-1)/g)
}

// compileNsPerPair is a lower bound of the time the compile's neighbour
// search spends on one site pair of one cell: measured 21–31 ns on the
// project's 2-core machine (supercells of 8–512 sites, shells 1 and 2,
// physics.Compile timed alone); a fifth of the fastest, so that a
// faster machine is not refused what it would compile within the bound.
const compileNsPerPair = 4.0

// rawModel is what an inline model's message tells of its size before it
// is compiled.
type rawModel struct {
	c    *physics.Crystal
	size physics.GridSize // Interactions: springs + blocks (+ folded set), a lower bound
	// fc is the shape of a well-formed supercell force-constant set
	// (hasFC), folded before the compile (precompile_fc.go).
	fc    fcShape
	hasFC bool
	// polarBuild is the cost of setting up the dipole–dipole term of a
	// model with Born charges (and, for a supercell set, of its dipole
	// part at every commensurate q), 0 otherwise; set with
	// size.LongRangeFlops by withPolar once the model is known valid.
	polarBuild physics.Cost
}

// withPolar sizes the dipole–dipole term of a valid model with Born
// charges (polar.Estimate: the same enumeration as the compile, without
// the blocks): its work per q joins the size, its set-up the compile's
// bound. A set-up too large for the engine is left to the compile, which
// refuses it with its violation.
func (r rawModel) withPolar() rawModel {
	if len(r.c.EpsilonInf) == 0 {
		return r
	}
	sz, err := polar.Estimate(r.c)
	if err != nil {
		return r
	}
	n := len(r.c.Sites)
	r.size.LongRangeFlops = sz.FlopsPerQ(n)
	r.polarBuild = sz.BuildCost(n)
	if r.hasFC {
		r.polarBuild.Flops += float64(r.fc.det) * (sz.FlopsPerQ(n) + 36*float64(n*n))
	}
	return r
}

// rawModelOf reads src when it carries an inline model whose shape the
// estimates can trust (1–3 lattice vectors, p in 0–3, 1 to max-sites
// sites); ok is false otherwise, and for a model by hash.
func (s *Service) rawModelOf(src *modegridv1.ModelSource) (rawModel, bool) {
	cr := src.GetCrystal()
	if cr == nil {
		return rawModel{}, false
	}
	d, p, n := len(cr.GetLattice()), int(cr.GetPolarizations()), len(cr.GetSites())
	if d < 1 || d > 3 || p < 0 || p > 3 || n < 1 || n > s.cfg.MaxSites {
		return rawModel{}, false
	}
	c := crystalFromProto(cr)
	r := rawModel{c: c, size: physics.GridSize{Sites: n, P: c.P(), Dim: d,
		Interactions: len(cr.GetSprings()) + len(cr.GetBlocks())}}
	if fs, ok := fcShapeOf(cr); ok {
		fs.sym = src.GetSymmetrize()
		r.fc, r.hasFC = fs, true
		r.size.Interactions += fs.foldedInteractions()
	}
	return r, true
}

// grid is the lower-bound size of the model on spec.
func (r rawModel) grid(spec mesh.GridSpec) physics.GridSize {
	g := r.size
	g.Points = spec.Count()
	g.Irreducible = minIrreducible(g.Points, g.Dim)
	return g
}

// valid reports whether the model passes the compile's validation; an
// invalid model is left to the normal path, which lists its violations
// (the same answer as before this step existed).
func (s *Service) valid(r rawModel) bool {
	return physics.Validate(r.c, physics.Limits{MaxSites: s.cfg.MaxSites}) == nil
}

// compileSeconds is a lower bound of the compile's time: the first pass of
// the neighbour search of each shell, every from-site against every
// to-site in every cell within the search radius (physics' findShell:
// radius 1.5·max|a_k|·shell, reach ⌈radius/d_k⌉ + 1 cells along k, d_k
// the spacing of the lattice planes). Shells are searched in order and a
// search over physics.ShellSearchBudget pairs fails the compile at once,
// so counting stops at the first shell that might exceed it.
func compileSeconds(c *physics.Crystal) (secs, pairs float64) {
	d := len(c.Lattice)
	spacing, maxLen := planeSpacings(c.Lattice)
	count := map[string]float64{}
	for _, s := range c.Sites {
		count[s.Label]++
	}
	for _, sh := range c.Shells {
		radius := 1.5 * maxLen * float64(sh.Shell)
		lo, hi := 1.0, 1.0
		for k := range d {
			x := radius / spacing[k]
			lo *= float64(2*min(int(math.Ceil(x*(1-1e-9)))+1, physics.DefaultMaxCellOffset) + 1)
			hi *= float64(2*min(int(math.Ceil(x*(1+1e-9)))+1, physics.DefaultMaxCellOffset) + 1)
		}
		n := count[sh.FromLabel] * count[sh.ToLabel]
		if hi*n > physics.ShellSearchBudget || math.IsNaN(hi) {
			break
		}
		pairs += lo * n
	}
	return pairs * compileNsPerPair * 1e-9, pairs
}

// planeSpacings is, for each lattice vector a_k, the distance between the
// lattice planes it crosses (the volume of all vectors over that of the
// others: 2π/|b_k|), and the longest vector's length.
func planeSpacings(lat [][3]float64) (spacing [3]float64, maxLen float64) {
	all := gram(lat)
	for k := range lat {
		others := make([][3]float64, 0, 2)
		others = append(others, lat[:k]...)
		others = append(others, lat[k+1:]...)
		spacing[k] = math.Sqrt(all / gram(others))
		maxLen = math.Max(maxLen, math.Sqrt(dot(lat[k], lat[k])))
	}
	return spacing, maxLen
}

// gram is the Gram determinant of up to three vectors (the squared
// volume they span; 1 for none).
func gram(v [][3]float64) float64 {
	switch len(v) {
	case 0:
		return 1
	case 1:
		return dot(v[0], v[0])
	case 2:
		a, b, c := dot(v[0], v[0]), dot(v[0], v[1]), dot(v[1], v[1])
		return a*c - b*b
	}
	x := [3]float64{v[1][1]*v[2][2] - v[1][2]*v[2][1], v[1][2]*v[2][0] - v[1][0]*v[2][2], v[1][0]*v[2][1] - v[1][1]*v[2][0]}
	t := dot(v[0], x)
	return t * t
}

func dot(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }

// checkCompile refuses a model whose compile alone would run past the
// compute-time bound, counting the fold of a supercell set before it; a
// fold whose own memory cannot fit the budget is refused too.
func (s *Service) checkCompile(vs *violations, r rawModel) {
	secs, pairs := compileSeconds(r.c)
	secs += r.polarBuild.Seconds(1)
	var fold physics.Cost
	if r.hasFC {
		fold = r.fc.foldCost()
	}
	foldSecs := fold.Seconds(1)
	if fold.Bytes > s.budget.total {
		s.budget.refused.WithLabelValues(reasonMemoryNeverFits).Inc()
		vs.Add("model.crystal.supercell_fc", "folding the supercell set (%d sites, %d atoms: at least %d folded blocks and two %d×%d sum-rule systems) needs about %s, over this server's memory budget %s (memory-budget); give fewer primitive sites or a smaller supercell",
			r.fc.n, r.fc.atoms, r.fc.n*r.fc.atoms, r.fc.n, r.fc.n, fmtBytes(fold.Bytes), fmtBytes(s.budget.total))
		return
	}
	if secs+foldSecs <= s.cfg.MaxComputeSeconds {
		return
	}
	s.budget.refused.WithLabelValues(reasonCompileTooLong).Inc()
	if foldSecs >= secs {
		vs.Add("model.crystal.supercell_fc", "folding the supercell set (%d sites, %d atoms: image search, accumulation and two %d×%d sum-rule SVDs) takes at least %.3g floating-point operations, about %.3g s on 1 core%s, over this server's bound max-compute-seconds=%g; give fewer primitive sites or a smaller supercell",
			r.fc.n, r.fc.atoms, r.fc.n, r.fc.n, fold.Flops, foldSecs, compileMore(secs), s.cfg.MaxComputeSeconds)
		return
	}
	vs.Add("model.crystal.shells", "compiling the model searches at least %.3g site pairs for its neighbour shells, at least %.0f s, over this server's bound max-compute-seconds=%g; ask for nearer shells (shell), fewer sites, or give the bonds as springs",
		pairs, secs+foldSecs, s.cfg.MaxComputeSeconds)
}

// compileMore words the compile's share of a fold's refusal (none when
// its bound is 0).
func compileMore(secs float64) string {
	if secs == 0 {
		return ""
	}
	return fmt.Sprintf(" and the compile at least %.3g s more", secs)
}

// precheck runs the pre-compile checks of a request on an inline model:
// the compile's bound, then refuse (given the lower-bound size of the
// model) for the request's own bounds. It reports whether the request was
// refused (violations added to vs). A model already compiled is left to
// the exact estimates; a model that fails validation (its validation is
// linear in springs and quadratic in sites: 3 ms at 512 sites, against
// the compile's 2 s) is not pre-checked: the normal path lists its
// violations.
func (s *Service) precheck(vs *violations, src *modegridv1.ModelSource, refuse func(r rawModel, vs *violations)) bool {
	r, ok := s.rawModelOf(src)
	if !ok {
		return false
	}
	if _, _, key, err := inlineKey(src); err != nil || s.cache.Contains(key) {
		return false // compiled already: the exact estimates are as quick
	}
	if !s.valid(r) {
		return false
	}
	r = r.withPolar()
	n := vs.Len()
	s.checkCompile(vs, r)
	if vs.Len() == n && refuse != nil {
		refuse(r, vs)
	}
	return vs.Len() > n
}

// qsetFor parses set for a model of dim dimensions without reporting: nil
// when the set has a problem (the normal path reports it).
func (s *Service) qsetFor(set *modegridv1.QPointSet, dim int, allowList bool) *qset {
	var scratch violations
	qs := s.parseQSet(set, dim, "qpoints", allowList, &scratch)
	if scratch.Len() > 0 || qs == nil {
		return nil
	}
	return qs
}

// lowerBound marks est as a lower bound and checks it against the budget.
func (s *Service) lowerBound(vs *violations, est estimate) {
	est.lower = true
	s.budget.check(vs, est)
}

// precheckDOS is ComputeDos's pre-compile check.
func (s *Service) precheckDOS(vs *violations, req *modegridv1.ComputeDosRequest, opt spectra.DOSOptions) bool {
	return s.precheck(vs, req.GetModel(), func(r rawModel, vs *violations) {
		s.checkDOSReply(vs, opt, r.size.Sites)
		if qs := s.qsetFor(req.GetQpoints(), r.size.Dim, false); qs != nil && vs.Len() == 0 {
			s.lowerBound(vs, dosCost(r.grid(qs.grid), opt))
		}
	})
}

// precheckThermal is ComputeThermal's pre-compile check.
func (s *Service) precheckThermal(vs *violations, req *modegridv1.ComputeThermalRequest, opt thermo.ThermalOptions) bool {
	return s.precheck(vs, req.GetModel(), func(r rawModel, vs *violations) {
		if len(opt.TempsK) == 0 {
			return
		}
		s.checkThermalReply(vs, opt, r.size.Sites)
		if qs := s.qsetFor(req.GetQpoints(), r.size.Dim, false); qs != nil && vs.Len() == 0 {
			s.lowerBound(vs, thermalCost(r.grid(qs.grid), opt))
		}
	})
}

// precheckModes is ComputeModes's pre-compile check: the size of one
// point's message (exact) and the stream's cost.
func (s *Service) precheckModes(vs *violations, req *modegridv1.ComputeModesRequest, opt physics.ModeOptions) bool {
	return s.precheck(vs, req.GetModel(), func(r rawModel, vs *violations) {
		if qs := s.qsetFor(req.GetQpoints(), r.size.Dim, true); qs != nil {
			est, per := s.streamCost(r.grid(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}), qs.count, opt)
			s.checkReply(vs, est.field, per, fmt.Sprintf("one q-point of %d modes", r.size.Sites*r.size.P))
			s.lowerBound(vs, est)
		}
	})
}

// precheckCheck is CheckModel's pre-compile check: the stability grid.
func (s *Service) precheckCheck(vs *violations, src *modegridv1.ModelSource) bool {
	return s.precheck(vs, src, func(r rawModel, vs *violations) {
		s.lowerBound(vs, stabilityCost(r.grid(stabilitySpec(r.size.Dim, s.cfg.StabilityMesh))))
	})
}
