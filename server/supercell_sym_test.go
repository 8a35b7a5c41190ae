package server

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/fcimport"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// scAtom is an atom of a test supercell: its site and cell.
type scAtom struct {
	site int
	cell [3]int
}

// rocksaltFCSet writes the rocksalt-like example (first-shell
// central-force springs, Kittel, Introduction to Solid State Physics,
// ch. 4: Φ(i,j) = −(k_L êêᵀ + k_T(1 − êêᵀ)) for neighbours, Φ(i,i) = −Σ of
// its row) as the N×N set of its 3×3×3 supercell, N = 54, atoms in (cell,
// site) order, Cartesian, in the example's force unit (N/m). Translated
// rows are equal to the bit, as in a set written out from one row per
// site. 3 lattice
// vectors of 3.96 Å put every neighbour (2.8 and 3.96 Å) well inside half
// the supercell, so each pair has one image.
func rocksaltFCSet(t *testing.T) (*modegridv1.Crystal, []scAtom) {
	t.Helper()
	c := example(t, "rocksalt-like")
	var lat [3][3]float64
	for k, v := range c.GetLattice() {
		lat[k] = [3]float64{v.GetX(), v.GetY(), v.GetZ()}
	}
	shells := map[[2]string][2]float64{}
	for _, s := range c.GetShells() {
		shells[[2]string{s.GetFromLabel(), s.GetToLabel()}] = [2]float64{s.GetKLong(), s.GetKTrans()}
		shells[[2]string{s.GetToLabel(), s.GetFromLabel()}] = [2]float64{s.GetKLong(), s.GetKTrans()}
	}
	dist := map[[2]string]float64{{"P", "Q"}: 2.8, {"Q", "P"}: 2.8, {"P", "P"}: 2.8 * math.Sqrt2, {"Q", "Q"}: 2.8 * math.Sqrt2}
	var atoms []scAtom
	pos := func(a scAtom) [3]float64 {
		var x [3]float64
		for k := 0; k < 3; k++ {
			f := c.GetSites()[a.site].GetFrac()[k] + float64(a.cell[k])
			for e := 0; e < 3; e++ {
				x[e] += f * lat[k][e]
			}
		}
		return x
	}
	fc := &modegridv1.SupercellForceConstants{Matrix: []int32{3, 0, 0, 0, 3, 0, 0, 0, 3}}
	for n := 0; n < 27; n++ {
		for s := range c.GetSites() {
			a := scAtom{s, [3]int{n / 9, n / 3 % 3, n % 3}}
			atoms = append(atoms, a)
			x := pos(a)
			fc.Atoms = append(fc.Atoms, &modegridv1.SupercellAtom{Position: x[:]})
		}
	}
	nat := len(atoms)
	phi := make([]float64, 9*nat*nat)
	for i, ai := range atoms {
		for j, aj := range atoms {
			if i == j {
				continue
			}
			pair := [2]string{c.GetSites()[ai.site].GetLabel(), c.GetSites()[aj.site].GetLabel()}
			for img := 0; img < 27; img++ {
				// The bond from fractional differences (exact here), so
				// that translated pairs get the same bits.
				k := [3]int{img/9 - 1, img/3%3 - 1, img%3 - 1}
				var v [3]float64
				for e := 0; e < 3; e++ {
					df := c.GetSites()[aj.site].GetFrac()[e] - c.GetSites()[ai.site].GetFrac()[e] + float64(aj.cell[e]-ai.cell[e]+3*k[e])
					for a := 0; a < 3; a++ {
						v[a] += df * lat[e][a]
					}
				}
				l := math.Sqrt(v[0]*v[0] + v[1]*v[1] + v[2]*v[2])
				if math.Abs(l-dist[pair]) > 1e-9 {
					continue
				}
				ks := shells[pair]
				for a := 0; a < 3; a++ {
					for b := 0; b < 3; b++ {
						ee := v[a] * v[b] / (l * l)
						id := 0.0
						if a == b {
							id = 1
						}
						blk := -(ks[0]*ee + ks[1]*(id-ee))
						phi[9*(i*nat+j)+3*a+b] += blk
						phi[9*(i*nat+i)+3*a+b] -= blk
					}
				}
			}
		}
	}
	fc.Phi = phi
	c.Shells = nil
	c.SupercellFc = fc
	return c, atoms
}

// respell returns the set of c with its atoms in the order perm, given as
// n×N rows (the atoms of cell (1,1,1)) and, when fractional, with
// positions fractional in the supercell vectors (3 × the lattice's).
func respell(c *modegridv1.Crystal, atoms []scAtom, perm []int, fractional bool) *modegridv1.Crystal {
	out := proto.Clone(c).(*modegridv1.Crystal)
	src := c.GetSupercellFc()
	fc := &modegridv1.SupercellForceConstants{Matrix: src.GetMatrix(), Fractional: fractional}
	nat := len(atoms)
	for _, i := range perm {
		p := append([]float64(nil), src.GetAtoms()[i].GetPosition()...)
		if fractional {
			a := atoms[i]
			for k := 0; k < 3; k++ {
				p[k] = (c.GetSites()[a.site].GetFrac()[k] + float64(a.cell[k])) / 3
			}
		}
		fc.Atoms = append(fc.Atoms, &modegridv1.SupercellAtom{Position: p})
	}
	for s := range c.GetSites() {
		for x, i := range perm {
			if atoms[i].site == s && atoms[i].cell == [3]int{1, 1, 1} {
				fc.PrimitiveAtoms = append(fc.PrimitiveAtoms, uint32(x))
				for _, j := range perm {
					fc.Phi = append(fc.Phi, src.GetPhi()[9*(i*nat+j):9*(i*nat+j)+9]...)
				}
			}
		}
	}
	out.SupercellFc = fc
	return out
}

// TestSupercellSpellingsShareHash: through real gRPC, one force-constant
// set spelled N×N in order with Cartesian positions, n×N with the atoms
// shuffled, and n×N shuffled with fractional positions compiles to one
// model hash (the hash is of the folded, corrected model), with and
// without symmetrisation; the fold of the first is reported with
// CheckModel's usual figures.
func TestSupercellSpellingsShareHash(t *testing.T) {
	ts := startServer(t, Config{})
	c, atoms := rocksaltFCSet(t)
	// Scaled by 31/30 so that the means of equal blocks do not come out
	// exact by luck (27·x/27 is not x's bits for most x).
	for x := range c.SupercellFc.Phi {
		c.SupercellFc.Phi[x] *= 31.0 / 30
	}
	rng := rand.New(rand.NewPCG(3, 5))
	spellings := map[string]*modegridv1.Crystal{
		"N×N":                   c,
		"n×N shuffled":          respell(c, atoms, rng.Perm(len(atoms)), false),
		"n×N shuffled, reduced": respell(c, atoms, rng.Perm(len(atoms)), true),
	}
	for _, sym := range []bool{false, true} {
		hashes := map[string]string{}
		for name, cr := range spellings {
			r, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: &modegridv1.ModelSource{
				Source: &modegridv1.ModelSource_Crystal{Crystal: cr}, Symmetrize: sym}})
			if err != nil || !r.GetValid() {
				t.Fatalf("%s: %v %v", name, err, r.GetViolations())
			}
			hashes[r.GetModelHash()] = name
		}
		if len(hashes) != 1 {
			t.Errorf("symmetrize=%v: %d hashes for one set: %v", sym, len(hashes), hashes)
		}
	}
}

// TestSupercellSymmetrizeOverGRPC: through real gRPC, the rocksalt-like
// set with seeded noise of up to 0.3 N/m on every element (the springs
// are 0.4–20 N/m) and symmetrize set: CheckModel reports the 48
// operations of m-3m (rock salt, International Tables for
// Crystallography, Vol. A, group 225) averaged over, the invariance
// violation from about the noise down to rounding, the sum rule at
// rounding, and the core finds the 48 operations on the result, where it
// finds fewer on the noisy set unsymmetrised. At Γ the three optical
// frequencies of the symmetrised model are equal to 1e-9 relative (an
// invariant second-rank tensor of a cubic point group is a multiple of
// the identity: J. F. Nye, Physical Properties of Crystals, ch. 1).
func TestSupercellSymmetrizeOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	c, _ := rocksaltFCSet(t)
	rng := rand.New(rand.NewPCG(9, 1))
	const noise = 0.3 // N/m
	for x := range c.SupercellFc.Phi {
		c.SupercellFc.Phi[x] += noise * (2*rng.Float64() - 1)
	}
	src := func(sym bool) *modegridv1.ModelSource {
		return &modegridv1.ModelSource{Source: &modegridv1.ModelSource_Crystal{Crystal: c}, Symmetrize: sym}
	}
	plain, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: src(false)})
	if err != nil {
		t.Fatal(err)
	}
	r, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: src(true)})
	if err != nil {
		t.Fatal(err)
	}
	f := r.GetSupercellFold()
	t.Logf("operations %d (core: %d symmetrised, %d not); invariance %.3g → %.3g eV/Å²; sum rule %.3g → %.3g",
		f.GetOperations(), len(r.GetSymmetry()), len(plain.GetSymmetry()), f.GetInvarianceBeforeEvPerA2(), f.GetInvarianceAfterEvPerA2(), f.GetSumRuleBeforeEvPerA2(), f.GetSumRuleAfterEvPerA2())
	if !r.GetSymmetrized() || f.GetOperations() != 48 || len(r.GetSymmetry()) != 48 {
		t.Errorf("symmetrized %v, %d operations averaged, %d found on the result: want true, 48, 48", r.GetSymmetrized(), f.GetOperations(), len(r.GetSymmetry()))
	}
	if len(plain.GetSymmetry()) >= 48 || plain.GetSupercellFold().GetOperations() != 0 {
		t.Errorf("unsymmetrised: %d operations found, %d averaged: want fewer than 48 (the noise breaks them), 0", len(plain.GetSymmetry()), plain.GetSupercellFold().GetOperations())
	}
	if inEV := noise / physics.EVPerA2InNPerM; f.GetInvarianceBeforeEvPerA2() < inEV/10 || f.GetInvarianceAfterEvPerA2() > 1e-13 || f.GetSumRuleAfterEvPerA2() > 1e-12 {
		t.Errorf("invariance %g → %g, sum rule after %g eV/Å²: want about the noise (%g) → rounding, rounding", f.GetInvarianceBeforeEvPerA2(), f.GetInvarianceAfterEvPerA2(), f.GetSumRuleAfterEvPerA2(), inEV)
	}
	for sym, want := range map[bool]bool{true: true, false: false} {
		got, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: src(sym), Qpoints: qlist(0)})
		if err != nil {
			t.Fatal(err)
		}
		fr := allPoints(got)[0].GetFrequencies()
		spread := (fr[5] - fr[3]) / fr[5]
		if (spread <= 1e-9) != want {
			t.Errorf("symmetrize=%v: Γ optical %v, spread %g relative", sym, fr[3:], spread)
		}
	}
}

// TestFoldCostSymmetrize: asking for symmetrisation adds to the fold's
// lower bound three passes over the n·N folded blocks with the identity
// alone (54 multiply-adds for C Φ Cᵀ and d² + 2d for the image key, each
// counted as one operation, as the rest of the bound counts them), and
// raises the memory estimate from 3 kB to 6.5 kB a pair block and its
// fixed part from 256 to 512 kB (fcimport.FoldBytes): derived for the
// rocksalt-like set, n = 2, N = 54, d = 3: 3·108·(54 + 15) = 22 356
// operations and 108·(6 656 − 3 072) + 262 144 = 649 216 bytes.
func TestFoldCostSymmetrize(t *testing.T) {
	c, _ := rocksaltFCSet(t)
	fs, ok := fcShapeOf(c)
	if !ok {
		t.Fatal("shape not read")
	}
	plain := fs.foldCost()
	fs.sym = true
	sym := fs.foldCost()
	if d := sym.Flops - plain.Flops; d != 22356 {
		t.Errorf("symmetrisation adds %v operations, want 22356", d)
	}
	if d := sym.Bytes - plain.Bytes; d != 649216 {
		t.Errorf("symmetrisation adds %v bytes, want 649216", d)
	}
}

// TestSymmetrizeWorkBound: the symmetrisation's cost is known only once
// the space group is found; the fold then compares it with the server's
// bound before any pass over the blocks. The rocksalt-like set (48
// operations: 1 translation × 48 rotations) folds into 2·54 = 108 blocks at
// least (each primitive site against each supercell atom), so symmetrising
// it is at least fcimport.SymmetrizeFlops(108, 1, 48) = 1.058e7 operations
// (0.0106 s at 1 GFlop/s); its pre-compile lower bound is far below
// (TestFoldCostSymmetrize).
// On a server bounded at 0.005 s the set computes unsymmetrised and is
// refused symmetrised, naming the operations; on the default bound it
// symmetrises.
func TestSymmetrizeWorkBound(t *testing.T) {
	c, _ := rocksaltFCSet(t)
	src := func(sym bool) *modegridv1.ModelSource {
		return &modegridv1.ModelSource{Source: &modegridv1.ModelSource_Crystal{Crystal: c}, Symmetrize: sym}
	}
	tight := startServer(t, Config{MaxComputeSeconds: 0.005})
	if _, err := tight.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: src(false)}); err != nil {
		t.Fatalf("unsymmetrised on the tight bound: %v", err)
	}
	_, err := collectModes(testContext(t), tight.api, &modegridv1.ComputeModesRequest{Model: src(true), Qpoints: qlist(0)})
	desc := badFields(t, err)["model.crystal.supercell_fc"]
	for _, w := range []string{"48 operations", "1 translations × 48 rotations", "over the bound of 5e+06"} {
		if !strings.Contains(desc, w) {
			t.Errorf("model.crystal.supercell_fc: %q does not say %q", desc, w)
		}
	}
	chk, err := tight.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: src(true)})
	if err != nil || chk.GetValid() || len(chk.GetViolations()) != 1 || chk.GetViolations()[0].GetField() != "supercell_fc" {
		t.Errorf("CheckModel on the tight bound: %v, valid %v, violations %v; want invalid on supercell_fc (paths relative to the crystal)", err, chk.GetValid(), chk.GetViolations())
	}
	if f := fcimport.SymmetrizeFlops(108, 1, 48); f != 4*108*49*500 {
		t.Errorf("SymmetrizeFlops(108, 1, 48) = %g; want 4 passes × 108 blocks × 49 operations × 500", f)
	}
	roomy := startServer(t, Config{})
	r, err := roomy.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: src(true)})
	if err != nil || r.GetSupercellFold().GetOperations() != 48 {
		t.Errorf("symmetrised on the default bound: %v, %d operations", err, r.GetSupercellFold().GetOperations())
	}
}
