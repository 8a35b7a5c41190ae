package server

import (
	"context"
	"fmt"
	"math"
	"slices"
	"strings"
	"sync/atomic"
	"testing"

	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/fcimport"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// diatomicSupercell is the diatomic chain example (springs K = 2 eV/Å²
// between nearest L–H neighbours, Kittel, Introduction to Solid State
// Physics, ch. 4) written as a 3-cell supercell force-constant set: atoms
// at 2.5·i Å (L, H alternating, listed in reverse), Φ_xx(i,i) = 2K,
// Φ_xx(i,i±1 mod 6) = −K.
func diatomicSupercell(t *testing.T) *modegridv1.Crystal { return chainSupercell(t, 3) }

// ringBlocks are the N×N force-constant blocks (eV/Å², 9 numbers each,
// row-major) of a ring of len(order) atoms with nearest-neighbour springs
// K = 2 eV/Å² along x, the atoms listed in the given order:
// Φ_xx(i,i) = 2K, Φ_xx(i, i±1 mod N) = −K, the rest 0.
func ringBlocks(order []int) []float64 {
	n := len(order)
	phi := make([]float64, 0, 9*n*n)
	for _, i := range order {
		for _, j := range order {
			blk := make([]float64, 9)
			switch {
			case i == j:
				blk[0] = 4
			case (i-j+n)%n == 1 || (j-i+n)%n == 1:
				blk[0] = -2
			}
			phi = append(phi, blk...)
		}
	}
	return phi
}

// TestSupercellModesOverGRPC: through real gRPC, the diatomic chain given
// as a supercell set computes the same modes as its spring model.
func TestSupercellModesOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	qs := qlist(0, 0.1, 0.37, -0.23, 0.5)
	want, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(example(t, "diatomic-chain")), Qpoints: qs})
	if err != nil {
		t.Fatal(err)
	}
	got, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(diatomicSupercell(t)), Qpoints: qs})
	if err != nil {
		t.Fatal(err)
	}
	wp, gp := allPoints(want), allPoints(got)
	if len(wp) != 5 || len(gp) != 5 {
		t.Fatalf("got %d and %d points, want 5", len(wp), len(gp))
	}
	for i := range wp {
		for m, f := range wp[i].GetFrequencies() {
			if g := gp[i].GetFrequencies()[m]; math.Abs(g-f) > 1e-10 {
				t.Errorf("q=%v mode %d: supercell %.15g, springs %.15g", wp[i].GetQ(), m, g, f)
			}
		}
	}
}

// TestSupercellRefused: a set together with springs, and a set with an
// atom far from every site, are INVALID_ARGUMENT naming the fields.
func TestSupercellRefused(t *testing.T) {
	ts := startServer(t, Config{})
	both := diatomicSupercell(t)
	both.Springs = example(t, "diatomic-chain").GetSprings()
	far := diatomicSupercell(t)
	far.SupercellFc.Atoms[2].Position[0] += 0.7
	far.SupercellFc.Atoms[4].Position[0] -= 0.9
	for name, tc := range map[string]struct {
		c      *modegridv1.Crystal
		fields []string
	}{
		"both":       {both, []string{"supercell_fc"}},
		"unmappable": {far, []string{"supercell_fc.atoms[2]", "supercell_fc.atoms[4]"}},
	} {
		_, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(tc.c), Qpoints: qlist(0.1)})
		st := status.Convert(err)
		if st.Code() != codes.InvalidArgument {
			t.Fatalf("%s: %v, want INVALID_ARGUMENT", name, err)
		}
		var fields []string
		for _, d := range st.Details() {
			if br, ok := d.(*errdetails.BadRequest); ok {
				for _, v := range br.GetFieldViolations() {
					fields = append(fields, v.GetField())
				}
			}
		}
		all := strings.Join(fields, " ")
		for _, f := range tc.fields {
			if !strings.Contains(all, f) {
				t.Errorf("%s: violations %q do not name %s", name, all, f)
			}
		}
	}
}

// TestSupercellCap: a set's supercell atoms are capped at 8 × the server's
// max sites (a 2×2×2 supercell of the largest model): the rock-salt set of
// 54 atoms (2 sites) is refused on a server of max sites 4 (cap 32),
// naming the field and the cap, and computes on one of max sites 8 (cap
// 64), where its 2-site model is well within the sites cap.
func TestSupercellCap(t *testing.T) {
	c, _ := rocksaltFCSet(t)
	ts := startServer(t, Config{MaxSites: 4})
	_, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(c), Qpoints: qlist(0.1)})
	if st := status.Convert(err); st.Code() != codes.InvalidArgument || !strings.Contains(st.Message(), "supercell_fc.atoms") || !strings.Contains(st.Message(), "cap of 32 (8 × the server's max sites 4)") {
		t.Fatalf("err = %v, want INVALID_ARGUMENT naming supercell_fc.atoms and the cap", err)
	}
	roomy := startServer(t, Config{MaxSites: 8})
	if _, err := collectModes(testContext(t), roomy.api, &modegridv1.ComputeModesRequest{Model: inline(c), Qpoints: qlist(0.1)}); err != nil {
		t.Errorf("54 atoms on a server of max sites 8: %v", err)
	}
}

// TestSupercellCheckReportsFold: through real gRPC, CheckModel reports the
// fold of a 3-cell set with an on-site element raised by δ (breaking the
// acoustic sum rule) and one pair element changed by ε (breaking index
// permutation). Derived: a folded block is the set's block summed over
// the supercell's 3 cells of atom i and divided by 3, so the row sum of
// that site is off by δ/3 and the pair differs from its transpose by ε/3.
// The sum rule is measured after the pair is averaged (ε/2 each way), so
// atom 0's row is off by (δ + ε/2)/3; both corrections bring them to
// rounding. Given in N/m the same sizes
// are reported in eV/Å².
func TestSupercellCheckReportsFold(t *testing.T) {
	ts := startServer(t, Config{})
	const delta, eps, n = 0.3, 0.06, 6
	c := diatomicSupercell(t)
	c.SupercellFc.Phi[0] += delta       // atom 0's on-site xx
	c.SupercellFc.Phi[(0*n+1)*9] += eps // Φ_xx(0, 1), not Φ_xx(1, 0)
	c.SupercellFc.ToleranceA = 2e-3
	inN := proto.Clone(c).(*modegridv1.Crystal)
	inN.ForceUnit = modegridv1.ForceUnit_FORCE_UNIT_N_PER_M
	for i := range inN.SupercellFc.Phi {
		inN.SupercellFc.Phi[i] *= physics.EVPerA2InNPerM
	}
	for name, cr := range map[string]*modegridv1.Crystal{"eV/Å²": c, "N/m": inN} {
		r, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: inline(cr)})
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		f := r.GetSupercellFold()
		if f == nil {
			t.Fatalf("%s: no supercell_fold in %v", name, r)
		}
		if f.GetAtomsMapped() != n || f.GetToleranceA() != 2e-3 || f.GetSharedImagePairs() == 0 {
			t.Errorf("%s: atoms %d tolerance %v shared %d, want %d, 0.002, > 0 (pairs 7.5 Å apart in a 15 Å cell)", name, f.GetAtomsMapped(), f.GetToleranceA(), f.GetSharedImagePairs(), n)
		}
		near := func(what string, got, want float64) {
			if math.Abs(got-want) > 1e-12 {
				t.Errorf("%s: %s = %.15g, want %.15g", name, what, got, want)
			}
		}
		near("permutation before", f.GetPermutationBeforeEvPerA2(), eps/3)
		near("permutation after", f.GetPermutationAfterEvPerA2(), 0)
		near("sum rule after", f.GetSumRuleAfterEvPerA2(), 0)
		near("sum rule before", f.GetSumRuleBeforeEvPerA2(), (delta+eps/2)/3)
	}
	plain, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: inline(example(t, "diatomic-chain"))})
	if err != nil {
		t.Fatal(err)
	}
	if plain.GetSupercellFold() != nil {
		t.Errorf("a spring model reports a fold: %v", plain.GetSupercellFold())
	}
}

// chainSet is a 1D chain of n sites 2.5 Å apart in one cell (the
// supercell matrix is [1]) given as its force-constant set: nearest
// neighbours K = 2 eV/Å² (invented), on-site 2K.
func chainSet(n int) *modegridv1.Crystal {
	c := &modegridv1.Crystal{Name: fmt.Sprintf("chain-set-%d", n), Lattice: []*modegridv1.Vec3{{X: 2.5 * float64(n)}}, Polarizations: 1}
	fc := &modegridv1.SupercellForceConstants{Matrix: []int32{1}}
	order := make([]int, n)
	for i := range n {
		c.Sites = append(c.Sites, &modegridv1.Site{Label: fmt.Sprintf("S%d", i), MassAmu: 30, Frac: []float64{float64(i) / float64(n)}})
		fc.Atoms = append(fc.Atoms, &modegridv1.SupercellAtom{Position: []float64{2.5 * float64(i), 0, 0}})
		order[i] = i
	}
	fc.Phi = ringBlocks(order)
	c.SupercellFc = fc
	return c
}

// TestSupercellFoldAdmission: through real gRPC with max-compute-seconds
// 1e-4, the diatomic chain's 3-cell set computes; a 32-site set, whose
// fold is at least 2.39e5 operations (the image search, 32²·5·9 = 46 080;
// the accumulation, 18·32² = 18 432; the sum-rule correction's two 32×32
// SVDs, 2·8·32³/3 = 174 763: 0.00024 s at the server's rate), is refused
// before anything runs: no computation counted, not even the compile, and
// the refusal names the set, its work and the bound.
func TestSupercellFoldAdmission(t *testing.T) {
	ts := startServer(t, Config{MaxComputeSeconds: 1e-4})
	reg := ts.srv.Registry()
	got, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(diatomicSupercell(t)), Qpoints: qlist(0.25)})
	if err != nil || len(allPoints(got)) != 1 {
		t.Fatalf("a set within the bounds: %v, %d points; want 1 point", err, len(allPoints(got)))
	}
	work0 := metricSum(t, reg, "modegrid_computations_total")
	q0 := metric(t, reg, "modegrid_qpoints_diagonalized_total", nil)
	_, err = collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(chainSet(32)), Qpoints: qlist(0.25)})
	desc := badFields(t, err)["model.crystal.supercell_fc"]
	for _, w := range []string{"two 32×32", "2.39e+05", "max-compute-seconds=0.0001"} {
		if !strings.Contains(desc, w) {
			t.Errorf("model.crystal.supercell_fc: %q does not say %q", desc, w)
		}
	}
	if w := metricSum(t, reg, "modegrid_computations_total"); w != work0 {
		t.Errorf("computations went from %v to %v: work started", work0, w)
	}
	if q := metric(t, reg, "modegrid_qpoints_diagonalized_total", nil); q != q0 {
		t.Errorf("q-points diagonalised went from %v to %v", q0, q)
	}
	if n := metric(t, reg, "modegrid_admission_refused_total", map[string]string{"reason": reasonCompileTooLong}); n != 1 {
		t.Errorf("compile_too_long refusals = %v; want 1", n)
	}
	// The same set on a server with room computes: the refusal was the bound's.
	roomy := startServer(t, Config{})
	if _, err := collectModes(testContext(t), roomy.api, &modegridv1.ComputeModesRequest{Model: inline(chainSet(32)), Qpoints: qlist(0.25)}); err != nil {
		t.Errorf("the 32-site set with the default bound: %v", err)
	}
}

// TestFoldedInteractionsBound: the pre-compile count of a set's folded
// interactions is never above what the compiled model has, nor above the
// set's own block count; a malformed set counts none.
func TestFoldedInteractionsBound(t *testing.T) {
	svc := NewService()
	for name, c := range map[string]*modegridv1.Crystal{"diatomic 3 cells": diatomicSupercell(t), "chain of 5": chainSet(5), "chain of 12": chainSet(12)} {
		fs, ok := fcShapeOf(c)
		if !ok {
			t.Fatalf("%s: shape not read", name)
		}
		e, err := svc.resolve(testContext(t), inline(c), &violations{})
		if err != nil || e == nil {
			t.Fatalf("%s: %v", name, err)
		}
		low, blocks := fs.foldedInteractions(), len(c.GetSupercellFc().GetPhi())/9
		t.Logf("%s: bound %d, compiled %d, set blocks %d", name, low, e.m.Interactions(), blocks)
		if low < 1 || low > e.m.Interactions() || low > blocks {
			t.Errorf("%s: bound %d, compiled %d, set blocks %d", name, low, e.m.Interactions(), blocks)
		}
	}
	bad := chainSet(5)
	bad.SupercellFc.Phi = bad.SupercellFc.Phi[9:]
	if _, ok := fcShapeOf(bad); ok {
		t.Error("a set short of one block has a shape")
	}
}

// TestSupercellFoldMemory: a 32-site set's fold is estimated at
// fcimport.FoldBytes(32, 32, false) = 3 kB × 32² pair blocks + 48·32² +
// 256 kB = 3 457 024 bytes (3.3 MiB; the figure tested against the fold's
// allocation in fcimport); on a 1 MiB memory budget it is refused before
// any computation, naming the set and the budget.
func TestSupercellFoldMemory(t *testing.T) {
	ts := startServer(t, Config{MemoryBudget: 1 << 20})
	reg := ts.srv.Registry()
	_, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(chainSet(32)), Qpoints: qlist(0.25)})
	desc := badFields(t, err)["model.crystal.supercell_fc"]
	if !strings.Contains(desc, "memory budget") || !strings.Contains(desc, "about 3.3 MiB") || !strings.Contains(desc, "two 32×32") {
		t.Errorf("model.crystal.supercell_fc: %q; want the sum-rule system and the memory budget named", desc)
	}
	if n := metricSum(t, reg, "modegrid_computations_total"); n != 0 {
		t.Errorf("computations = %v; want 0 (not even the compile)", n)
	}
	if n := metric(t, reg, "modegrid_admission_refused_total", map[string]string{"reason": reasonMemoryNeverFits}); n != 1 {
		t.Errorf("memory_never_fits refusals = %v; want 1", n)
	}
}

// TestSupercellSiteCap: first-principles cells reach 200 atoms. A chain of
// 200 sites given as a supercell set (its own cell, nearest-neighbour
// constants 2 eV/Å², 30 amu) folds and computes through real gRPC, and its
// 200 frequencies at q = 0.25 are those of the monatomic chain at the 200
// wavevectors k = (q + m)/200 the big cell folds onto Γ…q,
// ν = 2√(K/M)|sin(πk)| (Kittel, Introduction to Solid State Physics,
// ch. 4), to 1e-9 relative. A set of maxSupercellSites + 1 sites is
// refused on its sites, naming the cap.
func TestSupercellSiteCap(t *testing.T) {
	ts := startServer(t, Config{})
	const n, q = 200, 0.25
	got, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(chainSet(n)), Qpoints: qlist(q)})
	if err != nil {
		t.Fatalf("a %d-site set: %v", n, err)
	}
	freqs := allPoints(got)[0].GetFrequencies()
	var want []float64
	for m := range n {
		want = append(want, 2*math.Sqrt(2.0/30)*math.Abs(math.Sin(math.Pi*(q+float64(m))/n))*physics.NuUnitTHz)
	}
	slices.Sort(want)
	if len(freqs) != n {
		t.Fatalf("%d frequencies; want %d", len(freqs), n)
	}
	for m := range want {
		if math.Abs(freqs[m]-want[m]) > 1e-9*want[n-1] {
			t.Fatalf("mode %d: %.12g THz; want %.12g", m, freqs[m], want[m])
		}
	}
	var vs violations
	if _, err := NewService().resolve(testContext(t), inline(chainSet(maxSupercellSites+1)), &vs); err != nil {
		t.Fatal(err)
	}
	found := false
	for _, v := range vs.List() {
		found = found || strings.HasSuffix(v.Field, "sites") && strings.Contains(v.Description, fmt.Sprint("cap of ", maxSupercellSites))
	}
	if !found {
		t.Errorf("violations %v; want the sites named with the cap of %d", vs.List(), maxSupercellSites)
	}
}

// TestFoldReservesMemory: while a supercell set is folded and compiled,
// its fold estimate (fcimport.FoldBytes) is held from the server's memory
// budget: seen from the compile's start (the test hook) as the budget in
// use, and returned afterwards.
func TestFoldReservesMemory(t *testing.T) {
	var seen atomic.Int64
	var ts *testServer
	ts = startServer(t, Config{}, serverOpts{hook: func(_ context.Context, kind string) {
		if kind == kindCompile {
			seen.Store(ts.srv.svc.budget.inUse.Load())
		}
	}})
	c := chainSet(12)
	if _, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(c), Qpoints: qlist(0.25)}); err != nil {
		t.Fatal(err)
	}
	if want := fcimport.FoldBytes(12, 12, false); seen.Load() < want {
		t.Errorf("budget in use during the fold: %d B; want at least the fold's %d B", seen.Load(), want)
	}
	if n := ts.srv.svc.budget.inUse.Load(); n != 0 {
		t.Errorf("budget in use after the call: %d B; want 0", n)
	}
}
