package fcimport

import (
	"context"
	"errors"
	"maps"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/lattice"
)

// withSprings adds a central-force spring (kl along, kt across the bond,
// eV/Å²) on every pair of sites from ≤ to at distance distA Å, each bond
// once (from < to in every cell; from = to with the cell offset
// lexicographically positive).
func withSprings(c *physics.Crystal, from, to int, distA, kl, kt float64) {
	g := &geometry{d: c.Dim(), lat: c.Lattice}
	for a := -2; a <= 2; a++ {
		for b := -2; b <= 2; b++ {
			for e := -2; e <= 2; e++ {
				n := []int{a, b, e}[:g.d]
				if from == to && !lessZero([3]int{-a, -b, -e}) {
					continue
				}
				df := make([]float64, g.d)
				for x := range df {
					df[x] = c.Sites[to].Frac[x] + float64(n[x]) - c.Sites[from].Frac[x]
				}
				v := g.cart(df)
				if math.Abs(math.Sqrt(dot(v, v))-distA) < 1e-9 {
					c.Springs = append(c.Springs, physics.Spring{From: from, To: to, Cell: n, KLong: kl, KTrans: kt})
				}
			}
		}
	}
}

// fccLattice is the fcc primitive lattice of cubic constant 4 Å.
func fccLattice() [][3]float64 { return [][3]float64{{0, 2, 2}, {2, 0, 2}, {2, 2, 0}} }

// rocksalt is an invented two-species crystal on the rock-salt structure
// (space group Fm-3m, point group m-3m of order 48): A (23 amu) at 0 and
// B (35 amu) at (½,½,½) of the fcc primitive cell, nearest A–B springs at
// 2 Å and A–A, B–B springs at 2√2 Å.
func rocksalt() *physics.Crystal {
	c := &physics.Crystal{Lattice: fccLattice(), Polarizations: 3, Sites: []physics.Site{
		{Label: "A", MassAmu: 23, Frac: []float64{0, 0, 0}},
		{Label: "B", MassAmu: 35, Frac: []float64{0.5, 0.5, 0.5}},
	}}
	withSprings(c, 0, 1, 2, 1.5, 0.2)
	withSprings(c, 0, 0, 2*math.Sqrt2, 0.3, 0.05)
	withSprings(c, 1, 1, 2*math.Sqrt2, 0.25, 0.04)
	return c
}

// diamond is an invented one-species crystal on the diamond structure
// (space group Fd-3m): two sites of 28 amu at 0 and (¼,¼,¼) of the fcc
// primitive cell, nearest-neighbour springs at √3 Å and second-neighbour
// springs at 2√2 Å. With the origin on an atom, the 24 operations that
// exchange the two sites carry the translation (¼,¼,¼) (International
// Tables for Crystallography, Vol. A, space group 227, origin choice 1).
func diamond() *physics.Crystal {
	c := &physics.Crystal{Lattice: fccLattice(), Polarizations: 3, Sites: []physics.Site{
		{Label: "C", MassAmu: 28, Frac: []float64{0, 0, 0}},
		{Label: "C", MassAmu: 28, Frac: []float64{0.25, 0.25, 0.25}},
	}}
	withSprings(c, 0, 1, math.Sqrt(3), 2.0, 0.3)
	withSprings(c, 0, 0, 2*math.Sqrt2, 0.2, 0.02)
	withSprings(c, 1, 1, 2*math.Sqrt2, 0.2, 0.02)
	return c
}

// fccConventional is fcc() given in its 4-site cubic cell (a = 4 Å), a
// cell that is not primitive: its operations are the 48 of m-3m times
// the 4 internal translations.
func fccConventional() *physics.Crystal {
	c := &physics.Crystal{Lattice: [][3]float64{{4, 0, 0}, {0, 4, 0}, {0, 0, 4}}, Polarizations: 3}
	for _, f := range [][]float64{{0, 0, 0}, {0, 0.5, 0.5}, {0.5, 0, 0.5}, {0.5, 0.5, 0}} {
		c.Sites = append(c.Sites, physics.Site{Label: "M", MassAmu: 60, Frac: f})
	}
	for i := 0; i < 4; i++ {
		for j := i; j < 4; j++ {
			withSprings(c, i, j, 2*math.Sqrt2, 1.2, 0.1)
		}
	}
	return c
}

// noisy adds uniform noise in [−amp, amp] eV/Å² to every element of Φ:
// it breaks index permutation, the sum rule and the crystal's symmetry.
func noisy(s *Set, rng *rand.Rand, amp float64) {
	for x := range s.Phi {
		s.Phi[x] += amp * (2*rng.Float64() - 1)
	}
}

// foldedWith folds s for c with opt and compiles the result.
func foldedWith(t *testing.T, c *physics.Crystal, s *Set, opt Options) (*physics.Model, Report) {
	t.Helper()
	fc, rep, err := FoldModel(context.Background(), c, s, opt)
	if err != nil {
		t.Fatal(err)
	}
	m, err := physics.Compile(context.Background(), fc, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return m, rep
}

// freqErr is the largest |ν_got − ν_want| (THz) at 30 seeded random q.
func freqErr(want, got *physics.Model) float64 {
	rng := rand.New(rand.NewPCG(7, 11))
	var e float64
	for x := 0; x < 30; x++ {
		q := [3]float64{rng.Float64() - 0.5, rng.Float64() - 0.5, rng.Float64() - 0.5}
		fw, fg := want.FrequenciesTHz(q), got.FrequenciesTHz(q)
		for i := range fw {
			e = math.Max(e, math.Abs(fw[i]-fg[i]))
		}
	}
	return e
}

// coreOperations is the number of operations the core finds for c's
// sites alone (one per rotation).
func coreOperations(t *testing.T, c *physics.Crystal) int {
	t.Helper()
	geo := *c
	geo.Springs = nil
	m, err := physics.Compile(context.Background(), &geo, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	ops, err := m.Symmetry(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	return len(ops)
}

// TestSymmetrizeExactSet: a set written out from an exactly symmetric
// spring model is already invariant, and symmetrising it changes its
// frequencies by rounding only (the group average is a projection). The
// operation counts: the diatomic chain (Kittel ch. 4) has the identity
// and the inversion through a site; rock salt and diamond the 48 of m-3m
// (International Tables for Crystallography, Vol. A, groups 225 and
// 227); the 4-site cubic cell of fcc 48 × 4 internal translations, where
// the core, keeping one translation per rotation, finds 48.
func TestSymmetrizeExactSet(t *testing.T) {
	cases := []struct {
		name      string
		c         *physics.Crystal
		m         []int
		ops, core int
	}{
		{"diatomic chain", diatomic(), []int{3}, 2, 2},
		{"fcc", fcc(), []int{3, 0, 0, 0, 3, 0, 0, 0, 3}, 48, 48},
		{"rock salt", rocksalt(), []int{3, 0, 0, 0, 3, 0, 0, 0, 3}, 48, 48},
		{"diamond", diamond(), []int{3, 0, 0, 0, 3, 0, 0, 0, 3}, 48, 48},
		{"fcc in its cubic cell", fccConventional(), []int{2, 0, 0, 0, 2, 0, 0, 0, 2}, 192, 48},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			s, _ := supercell(t, tc.c, tc.m, nil, 0)
			want, err := physics.Compile(context.Background(), tc.c, physics.Options{})
			if err != nil {
				t.Fatal(err)
			}
			got, rep := foldedWith(t, tc.c, s, Options{Symmetrize: true})
			if rep.Operations != tc.ops {
				t.Errorf("%d operations, want %d", rep.Operations, tc.ops)
			}
			if n := coreOperations(t, tc.c); n != tc.core {
				t.Errorf("the core finds %d operations, want %d", n, tc.core)
			}
			if rep.InvarianceBefore > 1e-13 || rep.InvarianceAfter > 1e-13 {
				t.Errorf("invariance violation %g before, %g after: want rounding (≤ 1e-13 eV/Å²)", rep.InvarianceBefore, rep.InvarianceAfter)
			}
			if e := freqErr(want, got); e > 1e-10 {
				t.Errorf("frequencies off the springs' by %g THz", e)
			}
		})
	}
}

// TestSymmetrizeNoisy: a set from a symmetric spring model with uniform
// noise of 0.02 eV/Å² on every element, symmetrised: the invariance
// violation falls from the noise's size to rounding, the sum rule and
// index permutation hold to rounding, the frequencies come closer to the
// noiseless set's at random q, and degeneracies the noise split are
// restored. At Γ the optical modes of rock salt and diamond are a
// triplet: a second-rank tensor invariant under a cubic point group is a
// multiple of the identity (J. F. Nye, Physical Properties of Crystals,
// ch. 1), so the 3×3 block of the optical displacement at Γ is, and its
// three frequencies are equal; the noise splits them, the average
// restores them to 1e-9 relative.
func TestSymmetrizeNoisy(t *testing.T) {
	cases := []struct {
		name    string
		c       *physics.Crystal
		m       []int
		optical bool
	}{
		{"rock salt", rocksalt(), []int{3, 0, 0, 0, 3, 0, 0, 0, 3}, true},
		{"diamond", diamond(), []int{3, 0, 0, 0, 3, 0, 0, 0, 3}, true},
		{"fcc in its cubic cell", fccConventional(), []int{2, 0, 0, 0, 2, 0, 0, 0, 2}, false},
		{"fcc, non-diagonal supercell", fcc(), []int{3, 1, 0, 0, 3, 0, 0, -1, 3}, false},
	}
	const amp = 0.02
	for x, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			clean, _ := supercell(t, tc.c, tc.m, nil, 0)
			ref, _ := foldedWith(t, tc.c, clean, Options{})
			s, _ := supercell(t, tc.c, tc.m, rand.New(rand.NewPCG(uint64(x), 17)), 1e-4)
			noisy(s, rand.New(rand.NewPCG(uint64(x), 23)), amp)
			plain, _ := foldedWith(t, tc.c, s, Options{})
			sym, rep := foldedWith(t, tc.c, s, Options{Symmetrize: true})
			t.Logf("%d operations; invariance %.3g → %.3g eV/Å²; sum rule %.3g → %.3g; permutation %.3g → %.3g",
				rep.Operations, rep.InvarianceBefore, rep.InvarianceAfter, rep.SumRuleBefore, rep.SumRuleAfter, rep.PermutationBefore, rep.PermutationAfter)
			if rep.InvarianceBefore < amp/10 || rep.InvarianceAfter > 1e-13 {
				t.Errorf("invariance violation %g before, %g after: want about the noise (%g) before, rounding after", rep.InvarianceBefore, rep.InvarianceAfter, amp)
			}
			if rep.SumRuleAfter > 1e-12 || rep.PermutationAfter != 0 {
				t.Errorf("sum rule %g, permutation %g after: want rounding, 0", rep.SumRuleAfter, rep.PermutationAfter)
			}
			ep, es := freqErr(ref, plain), freqErr(ref, sym)
			t.Logf("largest frequency error: %.3g THz unsymmetrised, %.3g THz symmetrised", ep, es)
			if !(es < ep/2) {
				t.Errorf("symmetrised frequencies off by %g THz, unsymmetrised by %g: want at least 2× closer", es, ep)
			}
			for _, q := range [][3]float64{{0, 0, 0}, {0, 0.5, 0.5}, {0.5, 0.5, 0.5}} {
				sameDegeneracies(t, q, ref.FrequenciesTHz(q), plain.FrequenciesTHz(q), sym.FrequenciesTHz(q))
			}
			if tc.optical {
				f := sym.FrequenciesTHz([3]float64{})
				if spread := (f[5] - f[3]) / f[5]; spread > 1e-9 {
					t.Errorf("Γ optical triplet %v: spread %g relative, want ≤ 1e-9", f[3:], spread)
				}
				if p := plain.FrequenciesTHz([3]float64{}); (p[5]-p[3])/p[5] < 1e-6 {
					t.Errorf("Γ optical triplet unsymmetrised %v: the noise should split it", p[3:])
				}
			}
		})
	}
}

// sameDegeneracies checks that every pair of modes degenerate in the
// noiseless model (within 1e-9 relative to the highest) is degenerate in
// the symmetrised one too. Only for q where the space group forces them
// (Γ, and for the primitive cells X = (0,½,½) and L = (½,½,½), whose
// transverse pairs are degenerate by their 4- and 3-fold axes; for the
// cubic cell the same coordinates are points of its own zone): a
// nearest-neighbour model also has accidental degeneracies (the 4-site
// cubic cell of fcc has a fourfold one at (¼,½,¾), split into two
// symmetric pairs by symmetric noise), which no symmetrisation restores.
func sameDegeneracies(t *testing.T, q [3]float64, ref, plain, sym []float64) {
	t.Helper()
	top := ref[len(ref)-1]
	for i := 0; i+1 < len(ref); i++ {
		if ref[i+1]-ref[i] > 1e-9*top {
			continue
		}
		if d := sym[i+1] - sym[i]; d > 1e-9*top {
			t.Errorf("q=%v modes %d, %d: degenerate in the noiseless model, %g THz apart symmetrised (%g unsymmetrised)", q, i, i+1, d, plain[i+1]-plain[i])
		}
	}
}

// TestNotAGroup: operations that are not closed under composition (one
// left out of a group) are named as a violation of the set.
func TestNotAGroup(t *testing.T) {
	c := rocksalt()
	ops, err := spaceGroup(context.Background(), c, physics.DefaultSymTolA)
	if err != nil {
		t.Fatal(err)
	}
	err = closed(context.Background(), ops[1:], 3)
	var ve *physics.ValidationError
	if !errors.As(err, &ve) || !strings.Contains(err.Error(), "supercell_fc") || !strings.Contains(err.Error(), "do not form a group") {
		t.Fatalf("err = %v, want a ValidationError naming supercell_fc", err)
	}
}

// TestSymmetrizeCancelled: a cancelled context stops the symmetrisation.
func TestSymmetrizeCancelled(t *testing.T) {
	c := rocksalt()
	s, _ := supercell(t, c, []int{2, 0, 0, 0, 2, 0, 0, 0, 2}, nil, 0)
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, _, err := FoldModel(ctx, c, s, Options{Symmetrize: true}); !errors.Is(err, context.Canceled) {
		t.Fatalf("err = %v, want context.Canceled", err)
	}
}

// TestSymmetrizeNearlySymmetricCell: a rock-salt cell whose lattice
// vectors and B site are off by up to 3e-5 Å (within the default
// symmetry tolerance of 1e-4 Å) with a noisy set: the cell is made
// exactly symmetric, and the final model is symmetric in its own frame —
// the core finds all 48 operations of m-3m on it at a tolerance of 1e-9 Å,
// which it checks on the dynamical matrix (D(Sq) = U D(q) U† to 1e-9 of
// its largest element); on the model folded without symmetrisation it
// finds the identity alone.
func TestSymmetrizeNearlySymmetricCell(t *testing.T) {
	c := rocksalt()
	s, _ := supercell(t, c, []int{3, 0, 0, 0, 3, 0, 0, 0, 3}, nil, 0)
	noisy(s, rand.New(rand.NewPCG(8, 8)), 0.01)
	off := *c
	off.Lattice = [][3]float64{{0, 2.00003, 2}, {2, -0.00002, 2.00001}, {2, 2, 0}}
	off.Sites = []physics.Site{c.Sites[0], {Label: "B", MassAmu: 35, Frac: []float64{0.5, 0.500004, 0.5}}}
	for name, tc := range map[string]struct {
		opt  Options
		want int
	}{"symmetrised": {Options{Symmetrize: true}, 48}, "as given": {Options{}, 1}} {
		fc, rep, err := FoldModel(context.Background(), &off, s, tc.opt)
		if err != nil {
			t.Fatal(err)
		}
		m, err := physics.Compile(context.Background(), fc, physics.Options{SymTolA: 1e-9})
		if err != nil {
			t.Fatal(err)
		}
		ops, err := m.Symmetry(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		if len(ops) != tc.want {
			t.Errorf("%s: the core finds %d operations at 1e-9 Å, want %d", name, len(ops), tc.want)
		}
		if tc.opt.Symmetrize && (rep.Operations != 48 || rep.InvarianceAfter > 1e-13) {
			t.Errorf("%s: %d operations, invariance %g after: want 48, rounding", name, rep.Operations, rep.InvarianceAfter)
		}
	}
}

// TestFactorisedGroupAverage: the group average computed as the average
// over the pure translations followed by one operation per rotation, on
// the indexed set (indexedSet.average), equals the average over every
// operation (averageOver the whole group) to rounding, on a random set of blocks of the 4-site cubic
// cell of an fcc crystal (192 operations: 4 translations × 48 rotations);
// the support closed in two steps (closeUnderGroup) is the support closed
// under every operation; the factorised invariance is 0 only for an
// invariant set and never above the invariance over every operation.
func TestFactorisedGroupAverage(t *testing.T) {
	c := fccConventional()
	ops, err := spaceGroup(context.Background(), c, physics.DefaultSymTolA)
	if err != nil {
		t.Fatal(err)
	}
	trans, reps := factorGroup(ops)
	if len(ops) != 192 || len(trans) != 4 || len(reps) != 48 {
		t.Fatalf("%d operations, %d translations, %d rotations; want 192, 4, 48", len(ops), len(trans), len(reps))
	}
	rng := rand.New(rand.NewPCG(4, 48))
	fc := map[key][9]float64{}
	for range 40 {
		var b [9]float64
		for x := range b {
			b[x] = 2*rng.Float64() - 1
		}
		fc[key{rng.IntN(4), rng.IntN(4), [3]int{rng.IntN(3) - 1, rng.IntN(3) - 1, rng.IntN(3) - 1}}] = b
	}
	whole := maps.Clone(fc)
	ctx := context.Background()
	if err := closeUnderGroup(ctx, fc, ops, 3); err != nil {
		t.Fatal(err)
	}
	if err := closeUnder(ctx, whole, ops, 3); err != nil {
		t.Fatal(err)
	}
	if len(fc) != len(whole) {
		t.Fatalf("support closed in two steps has %d blocks, under every operation %d", len(fc), len(whole))
	}
	for k := range whole {
		if _, ok := fc[k]; !ok {
			t.Fatalf("block %v missing from the support closed in two steps", k)
		}
	}
	direct, err := averageOver(ctx, whole, ops, 3)
	if err != nil {
		t.Fatal(err)
	}
	idx, err := newIndexedSet(ctx, fc, ops, 3)
	if err != nil {
		t.Fatal(err)
	}
	idx.load(fc)
	before, err := idx.invariance(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if err := idx.average(ctx); err != nil {
		t.Fatal(err)
	}
	fact := maps.Clone(fc)
	idx.store(fact)
	after, err := idx.invariance(ctx)
	if err != nil {
		t.Fatal(err)
	}
	worst := 0.0
	for k, b := range direct {
		for x := range b {
			worst = math.Max(worst, math.Abs(b[x]-fact[k][x]))
		}
	}
	if worst > 1e-13 || len(direct) != len(fact) {
		t.Errorf("factorised average differs from the direct one by %.3g (%d against %d blocks)", worst, len(fact), len(direct))
	}
	allOps := func(m map[key][9]float64) float64 {
		var v float64
		for k, phi := range m {
			for x := range ops {
				rot := rotate(&ops[x].cart, &phi)
				img := m[ops[x].image(k, 3)]
				for a := range rot {
					v = math.Max(v, math.Abs(rot[a]-img[a]))
				}
			}
		}
		return v
	}
	if before < 0.1 || before > allOps(fc) || after > 1e-13 || allOps(fact) > 1e-13 {
		t.Errorf("invariance before %.3g (over every operation %.3g), after %.3g (%.3g); want before of order 1 and at most the full one, after rounding", before, allOps(fc), after, allOps(fact))
	}
}

// TestNotAGroupAnywhere: leaving any one operation out of a group with
// translations (the fcc crystal's 4-site cubic cell, 192 operations) is
// found by the generator-based closure check, and the whole group passes.
func TestNotAGroupAnywhere(t *testing.T) {
	ops, err := spaceGroup(context.Background(), fccConventional(), physics.DefaultSymTolA)
	if err != nil {
		t.Fatal(err)
	}
	if err := closed(context.Background(), ops, 3); err != nil {
		t.Fatalf("the whole group: %v", err)
	}
	for _, x := range []int{0, 1, 3, 4, 50, 100, 191} {
		rest := append(append([]symOp(nil), ops[:x]...), ops[x+1:]...)
		if err := closed(context.Background(), rest, 3); err == nil || !strings.Contains(err.Error(), "do not form a group") {
			t.Errorf("operation %d left out: err = %v; want not a group", x, err)
		}
	}
}

// averageOver returns (1/|ops|) Σ_g C_g Φ(g⁻¹·k) C_gᵀ, every block pushed
// to its images, over the operations given: the direct average, which
// TestFactorisedGroupAverage compares the indexed one with.
func averageOver(ctx context.Context, fc map[key][9]float64, ops []symOp, d int) (map[key][9]float64, error) {
	out := make(map[key][9]float64, len(fc))
	w := 1 / float64(len(ops))
	for _, k := range sortedKeys(fc) {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		phi := fc[k]
		for x := range ops {
			ik := ops[x].image(k, d)
			rot := rotate(&ops[x].cart, &phi)
			b := out[ik]
			for a := range b {
				b[a] += w * rot[a]
			}
			out[ik] = b
		}
	}
	return out, nil
}

// mapSitesBrute is mapSites as it was before the bins: every site tried
// for every image (the reference of TestSiteBinsMatchBrute).
func mapSitesBrute(c *physics.Crystal, lat [3][3]float64, rx [][3]float64, t [3]float64, tolA float64, op *symOp) bool {
	d := c.Dim()
	used := make([]bool, len(c.Sites))
	for i := range c.Sites {
		found := false
		for j, sj := range c.Sites {
			if used[j] || sj.MassAmu != c.Sites[i].MassAmu {
				continue
			}
			var p [3]float64
			for a := 0; a < d; a++ {
				p[a] = rx[i][a] + t[a]
			}
			if cell, dist := roundedImage(lat, d, p, sj.Frac); dist < tolA {
				op.perm[i], used[j], found = j, true, true
				for a := 0; a < d; a++ {
					op.shift[i][a] = int(cell[a])
				}
				break
			}
		}
		if !found {
			return false
		}
	}
	return true
}

// TestSiteBinsMatchBrute: the site mapping through bins (mapSites) makes
// the same decision, permutation and shifts as trying every site, for
// every rotation of the lattice's point group and every candidate
// translation, on crystals with many operations (supercells of a
// two-site cubic crystal, an fcc cubic cell, rock salt, diamond), with
// sites moved by less and by more than the tolerance, and in one and two
// dimensions; at tolerances from 1e-6 Å to 0.3 Å (a few bins to the cap).
func TestSiteBinsMatchBrute(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	crystals := []*physics.Crystal{fccConventional(), rocksalt(), diamond(),
		testmodels.Sized(t, 16), testmodels.Sized(t, 32),
		testmodels.Distorted(testmodels.Sized(t, 32), rng, 3e-5, 0),
		testmodels.Distorted(testmodels.Sized(t, 16), rng, 0.02, 0),
		testmodels.Load(t, "diatomic-chain"), testmodels.Load(t, "square-net")}
	decisions, accepted := 0, 0
	for ci, c := range crystals {
		d := c.Dim()
		var lat [3][3]float64
		copy(lat[:], c.Lattice)
		recip := lattice.Reciprocal(lat, d)
		for _, tolA := range []float64{1e-6, 1e-4, 0.05, 0.3} {
			bins := newSiteBins(c, recip, tolA)
			used := make([]bool, len(c.Sites))
			for _, r := range lattice.PointGroup(lat, d, tolA) {
				rx := make([][3]float64, len(c.Sites))
				for i, s := range c.Sites {
					for a := 0; a < d; a++ {
						for b := 0; b < d; b++ {
							rx[i][a] += float64(r[a][b]) * s.Frac[b]
						}
					}
				}
				for j0 := range c.Sites {
					var tr [3]float64
					for a := 0; a < d; a++ {
						tr[a] = c.Sites[j0].Frac[a] - rx[0][a]
						tr[a] -= math.Floor(tr[a])
					}
					n := len(c.Sites)
					a := symOp{perm: make([]int, n), shift: make([][3]int, n)}
					b := symOp{perm: make([]int, n), shift: make([][3]int, n)}
					clear(used)
					okA := mapSites(c, lat, rx, tr, tolA, &a, bins, used)
					okB := mapSitesBrute(c, lat, rx, tr, tolA, &b)
					decisions++
					if okA != okB || okA && (!slices.Equal(a.perm, b.perm) || !slices.Equal(a.shift, b.shift)) {
						t.Fatalf("crystal %d, tol %g, rotation %v, translation of site %d: bins %v %v %v, every site %v %v %v",
							ci, tolA, r, j0, okA, a.perm, a.shift, okB, b.perm, b.shift)
					}
					if okA {
						accepted++
					}
				}
			}
		}
	}
	t.Logf("%d candidate operations decided alike, %d accepted", decisions, accepted)
	if accepted < 100 {
		t.Errorf("only %d operations accepted: the test exercises too few maps", accepted)
	}
}
