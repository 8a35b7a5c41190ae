package fcimport

import (
	"context"
	"errors"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/physics"
)

// springBlocks returns every block Φ(s,0;t,R) of the spring crystal c
// (both orientations and the on-site blocks), built from the central-force
// spring law Φ = −(k_L êêᵀ + k_T (1 − êêᵀ)) (Born–von Kármán, Kittel,
// Introduction to Solid State Physics, ch. 4).
func springBlocks(c *physics.Crystal) map[key][9]float64 {
	g := &geometry{d: c.Dim(), lat: c.Lattice}
	fc := map[key][9]float64{}
	add := func(k key, b [9]float64) {
		old := fc[k]
		for a := range b {
			old[a] += b[a]
		}
		fc[k] = old
	}
	for _, sp := range c.Springs {
		var r [3]int
		copy(r[:], sp.Cell)
		df := make([]float64, g.d)
		for x := 0; x < g.d; x++ {
			df[x] = c.Sites[sp.To].Frac[x] + float64(r[x]) - c.Sites[sp.From].Frac[x]
		}
		v := g.cart(df)
		l := math.Sqrt(dot(v, v))
		var phi [9]float64
		for a := 0; a < 3; a++ {
			for b := 0; b < 3; b++ {
				ee := v[a] * v[b] / (l * l)
				id := 0.0
				if a == b {
					id = 1
				}
				phi[3*a+b] = -(sp.KLong*ee + sp.KTrans*(id-ee))
			}
		}
		var self [9]float64
		for a := range phi {
			self[a] = -phi[a]
		}
		add(key{sp.From, sp.To, r}, phi)
		add(key{sp.To, sp.From, neg(r)}, transpose(phi))
		add(key{sp.From, sp.From, [3]int{}}, self)
		add(key{sp.To, sp.To, [3]int{}}, self)
	}
	return fc
}

// supercell writes the spring crystal c out as an N×N supercell set of
// matrix m: Φ_sc(i,j) = Σ over R ≡ n_j − n_i (mod the supercell) of
// Φ(s_i,0;s_j,R). The atoms are shuffled by rng (if not nil) and get
// Cartesian noise of amplitude noise Å.
func supercell(t *testing.T, c *physics.Crystal, m []int, rng *rand.Rand, noise float64) (*Set, []atomMap) {
	return supercellAs(t, c, m, rng, noise, false)
}

// supercellAs is supercell with the atoms' positions fractional in the
// supercell vectors when fractional is set (noise is then not applied).
func supercellAs(t *testing.T, c *physics.Crystal, m []int, rng *rand.Rand, noise float64, fractional bool) (*Set, []atomMap) {
	t.Helper()
	g, err := newGeometry(c, &Set{Matrix: m, Atoms: make([][]float64, 0)})
	if g == nil {
		t.Fatal(err)
	}
	var cells [][3]int
	seen := map[[3]int]bool{}
	for a := -4; a <= 4; a++ {
		for b := -4; b <= 4; b++ {
			for cc := -4; cc <= 4; cc++ {
				n := g.reduce([3]int{a, b, cc})
				if g.d < 3 {
					n[2] = 0
				}
				if g.d < 2 {
					n[1] = 0
				}
				if !seen[n] {
					seen[n] = true
					cells = append(cells, n)
				}
			}
		}
	}
	if len(cells) != abs(g.det) {
		t.Fatalf("found %d cells, want %d", len(cells), abs(g.det))
	}
	var atoms []atomMap
	for s := range c.Sites {
		for _, n := range cells {
			atoms = append(atoms, atomMap{s, n})
		}
	}
	if rng != nil {
		rng.Shuffle(len(atoms), func(i, j int) { atoms[i], atoms[j] = atoms[j], atoms[i] })
	}
	fc := springBlocks(c)
	set := &Set{Matrix: m}
	for _, a := range atoms {
		f := make([]float64, g.d)
		for x := range f {
			f[x] = c.Sites[a.site].Frac[x] + float64(a.cell[x])
		}
		p := g.cart(f)
		if rng != nil && !fractional {
			for x := 0; x < g.d; x++ {
				p[x] += noise * (2*rng.Float64() - 1)
			}
		}
		set.Atoms = append(set.Atoms, p[:])
		if fractional {
			fs := make([]float64, g.d)
			for r := range fs {
				for c := 0; c < g.d; c++ {
					fs[r] += f[c] * g.minv[c*g.d+r]
				}
			}
			set.Atoms[len(set.Atoms)-1] = fs
		}
	}
	set.Fractional = fractional
	for _, ai := range atoms {
		for _, aj := range atoms {
			var blk [9]float64
			for k, b := range fc {
				var diff [3]int
				for x := 0; x < 3; x++ {
					diff[x] = aj.cell[x] - ai.cell[x] - k.r[x]
				}
				if k.s == ai.site && k.t == aj.site && g.reduce(diff) == ([3]int{}) {
					for x := range blk {
						blk[x] += b[x]
					}
				}
			}
			set.Phi = append(set.Phi, blk[:]...)
		}
	}
	return set, atoms
}

// diatomic is the diatomic chain of proto/examples (Kittel ch. 4).
func diatomic() *physics.Crystal {
	return &physics.Crystal{
		Lattice: [][3]float64{{5, 0, 0}}, Polarizations: 1,
		Sites:   []physics.Site{{Label: "L", MassAmu: 20, Frac: []float64{0}}, {Label: "H", MassAmu: 50, Frac: []float64{0.5}}},
		Springs: []physics.Spring{{From: 0, To: 1, Cell: []int{0}, KLong: 2}, {From: 1, To: 0, Cell: []int{1}, KLong: 2}},
	}
}

// fcc is the nearest-neighbour fcc crystal of proto/examples (a = 4 Å
// conventional), its twelve springs written out.
func fcc() *physics.Crystal {
	c := &physics.Crystal{
		Lattice: [][3]float64{{0, 2, 2}, {2, 0, 2}, {2, 2, 0}}, Polarizations: 3,
		Sites: []physics.Site{{Label: "M", MassAmu: 60, Frac: []float64{0, 0, 0}}},
	}
	for _, n := range [][]int{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}, {1, -1, 0}, {1, 0, -1}, {0, 1, -1}} {
		c.Springs = append(c.Springs, physics.Spring{From: 0, To: 0, Cell: n, KLong: 1.2, KTrans: 0.1})
	}
	return c
}

// folded returns c's lattice and sites with the set's folded blocks.
func folded(t *testing.T, c *physics.Crystal, s *Set) (*physics.Crystal, Report) {
	t.Helper()
	b, rep, err := Fold(context.Background(), c, s)
	if err != nil {
		t.Fatal(err)
	}
	return &physics.Crystal{Lattice: c.Lattice, Polarizations: c.Polarizations, Sites: c.Sites, Blocks: b}, rep
}

// sameFrequencies compares the compiled models at seeded random q.
func sameFrequencies(t *testing.T, want, got *physics.Crystal, tol float64) {
	t.Helper()
	ctx := context.Background()
	mw, err := physics.Compile(ctx, want, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	mg, err := physics.Compile(ctx, got, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(7, 11))
	for x := 0; x < 20; x++ {
		q := [3]float64{rng.Float64() - 0.5, rng.Float64() - 0.5, rng.Float64() - 0.5}
		fw, fg := mw.FrequenciesTHz(q), mg.FrequenciesTHz(q)
		for i := range fw {
			if math.Abs(fw[i]-fg[i]) > tol {
				t.Fatalf("q=%v mode %d: folded %.15g THz, springs %.15g THz", q, i, fg[i], fw[i])
			}
		}
	}
}

// TestFoldBackSprings: a spring model written out as a supercell big
// enough for its longest spring folds back to the same frequencies at
// arbitrary q (the direct method, Parlinski, Li & Kawazoe, PRL 78, 4063
// (1997)): diatomic chain (Kittel ch. 4), fcc, and a non-diagonal fcc
// supercell, shuffled and with 1e-4 Å noise.
func TestFoldBackSprings(t *testing.T) {
	cases := []struct {
		name  string
		c     *physics.Crystal
		m     []int
		rng   *rand.Rand
		noise float64
	}{
		{"diatomic", diatomic(), []int{3}, nil, 0},
		{"fcc-333", fcc(), []int{3, 0, 0, 0, 3, 0, 0, 0, 3}, nil, 0},
		{"fcc-nondiagonal-shuffled-noisy", fcc(), []int{3, 1, 0, 0, 3, 0, 0, -1, 3}, rand.New(rand.NewPCG(1, 2)), 1e-4},
		{"diatomic-shuffled", diatomic(), []int{4}, rand.New(rand.NewPCG(3, 4)), 1e-4},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			s, _ := supercell(t, tc.c, tc.m, tc.rng, tc.noise)
			got, rep := folded(t, tc.c, s)
			if rep.SumRuleAfter > 1e-12 || rep.PermutationAfter > 1e-12 {
				t.Errorf("report %+v: violations left", rep)
			}
			sameFrequencies(t, tc.c, got, 1e-10)
		})
	}
}

// TestCommensurate: at the supercell's commensurate q the folded set's
// Fourier transform Σ_R Φ(s,0;t,R) e^{2πi q·R} equals the supercell's own,
// (1/|det M|) Σ_{i∈s, j∈t} Φ_sc(i,j) e^{2πi q·(n_j − n_i)}, even when the
// supercell is too small and images are shared (Parlinski, Li & Kawazoe,
// PRL 78, 4063 (1997)).
func TestCommensurate(t *testing.T) {
	c := fcc()
	m := []int{2, 0, 0, 0, 2, 0, 0, 0, 2}
	s, atoms := supercell(t, c, m, nil, 0)
	blocks, rep, err := Fold(context.Background(), c, s)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Multiplicities == 0 {
		t.Fatal("a 2×2×2 fcc supercell should share images")
	}
	n := len(atoms)
	for _, q := range [][3]float64{{0, 0, 0}, {0.5, 0, 0}, {0.5, 0.5, 0}, {0.5, 0.5, 0.5}, {0, 0.5, 0.5}} {
		var ft, sc [9]complex128
		for _, b := range blocks {
			add := func(r []int, phi [9]float64) {
				ph := cmplx.Exp(complex(0, 2*math.Pi*(q[0]*float64(r[0])+q[1]*float64(r[1])+q[2]*float64(r[2]))))
				for a := range phi {
					ft[a] += ph * complex(phi[a], 0)
				}
			}
			var phi [9]float64
			copy(phi[:], b.Phi)
			add(b.Cell, phi)
			if !(b.From == b.To && b.Cell[0] == 0 && b.Cell[1] == 0 && b.Cell[2] == 0) {
				add([]int{-b.Cell[0], -b.Cell[1], -b.Cell[2]}, transpose(phi))
			}
		}
		for i, ai := range atoms {
			for j, aj := range atoms {
				ph := cmplx.Exp(complex(0, 2*math.Pi*(q[0]*float64(aj.cell[0]-ai.cell[0])+q[1]*float64(aj.cell[1]-ai.cell[1])+q[2]*float64(aj.cell[2]-ai.cell[2]))))
				for a := 0; a < 9; a++ {
					sc[a] += ph * complex(s.Phi[9*(i*n+j)+a]/float64(n), 0)
				}
			}
		}
		for a := range ft {
			if cmplx.Abs(ft[a]-sc[a]) > 1e-12 {
				t.Errorf("q=%v element %d: folded %v, supercell %v", q, a, ft[a], sc[a])
			}
		}
	}
}

// TestBrokenSumRule: a supercell set whose sum rule is broken on purpose
// (every on-site block off by a non-symmetric error) is repaired: the
// acoustic modes at Γ are ≤ 1e-6 THz and the report shows before/after.
func TestBrokenSumRule(t *testing.T) {
	c := fcc()
	s, atoms := supercell(t, c, []int{3, 0, 0, 0, 3, 0, 0, 0, 3}, nil, 0)
	n := len(atoms)
	for i := 0; i < n; i++ {
		for a := 0; a < 9; a++ {
			s.Phi[9*(i*n+i)+a] += 0.01 * float64(a+1)
		}
	}
	got, rep := folded(t, c, s)
	if rep.SumRuleBefore < 0.05 || rep.SumRuleAfter > 1e-12 {
		t.Fatalf("report %+v: want a large violation before and none after", rep)
	}
	m, err := physics.Compile(context.Background(), got, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	for i, f := range m.FrequenciesTHz([3]float64{}) {
		if math.Abs(f) > 1e-6 {
			t.Errorf("Γ mode %d: %g THz, want acoustic ≤ 1e-6", i, f)
		}
	}
}

// TestUnmappable: every atom that maps onto no site, and the bad shapes,
// are listed at once with field paths.
func TestUnmappable(t *testing.T) {
	c := diatomic()
	s, _ := supercell(t, c, []int{3}, nil, 0)
	s.Atoms[1] = []float64{s.Atoms[1][0] + 0.3, 0, 0}
	s.Atoms[4] = []float64{s.Atoms[4][0] - 0.01, 0, 0}
	_, _, err := Fold(context.Background(), c, s)
	var ve *physics.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("err = %v, want a ValidationError", err)
	}
	msg := err.Error()
	for _, f := range []string{"supercell_fc.atoms[1]", "supercell_fc.atoms[4]"} {
		if !strings.Contains(msg, f) {
			t.Errorf("%q does not name %s", msg, f)
		}
	}
	s.Matrix = []int{0}
	if _, _, err := Fold(context.Background(), c, s); err == nil || !strings.Contains(err.Error(), "supercell_fc.matrix") {
		t.Errorf("singular matrix: err = %v", err)
	}
}

// TestRowsOnly: the n×N form (one image of each site against every atom,
// picked by PrimitiveAtoms) folds back like the N×N form.
func TestRowsOnly(t *testing.T) {
	c := diatomic()
	s, atoms := supercell(t, c, []int{3}, rand.New(rand.NewPCG(5, 6)), 0)
	n := len(atoms)
	var rows []float64
	for site := range c.Sites {
		for i, a := range atoms {
			if a.site == site && a.cell == ([3]int{1}) {
				s.PrimitiveAtoms = append(s.PrimitiveAtoms, i)
				rows = append(rows, s.Phi[9*i*n:9*(i+1)*n]...)
			}
		}
	}
	s.Phi = rows
	got, _ := folded(t, c, s)
	sameFrequencies(t, c, got, 1e-10)
}

// TestFractionalPositions: atoms given fractional in the vectors of a
// non-diagonal supercell map and fold back like Cartesian ones.
func TestFractionalPositions(t *testing.T) {
	c := fcc()
	s, _ := supercellAs(t, c, []int{3, 1, 0, 0, 3, 0, 0, -1, 3}, rand.New(rand.NewPCG(9, 9)), 0, true)
	got, _ := folded(t, c, s)
	sameFrequencies(t, c, got, 1e-10)
}

// TestPermutationImposed: a set with Φ(i,j) ≠ Φ(j,i)ᵀ (one off-diagonal
// element of every block of a pair changed on one side) is averaged: the
// report shows the violation before and none after.
func TestPermutationImposed(t *testing.T) {
	c := fcc()
	s, atoms := supercell(t, c, []int{3, 0, 0, 0, 3, 0, 0, 0, 3}, nil, 0)
	n := len(atoms)
	s.Phi[9*(0*n+1)+1] += 0.02 // Φ_xy(0,1) only, not Φ_yx(1,0)
	_, rep, err := Fold(context.Background(), c, s)
	if err != nil {
		t.Fatal(err)
	}
	// The change lands on one of 27 images of site 0, weighted 1/27, on
	// Φ_xy(0,0;0,R) and not on its partner's transpose.
	if want := 0.02 / 27; math.Abs(rep.PermutationBefore-want) > 1e-12 || rep.PermutationAfter > 1e-15 {
		t.Fatalf("report %+v: want %g before and none after", rep, want)
	}
}

// TestDuplicateAndWrongImage: two atoms on one place and a primitive
// atom that is the image of another site are named.
func TestDuplicateAndWrongImage(t *testing.T) {
	c := diatomic()
	s, atoms := supercell(t, c, []int{3}, nil, 0)
	s.Atoms[2] = append([]float64(nil), s.Atoms[0]...)
	_, _, err := Fold(context.Background(), c, s)
	if err == nil || !strings.Contains(err.Error(), "supercell_fc.atoms[2]") || !strings.Contains(err.Error(), "atoms[0]") {
		t.Errorf("duplicate: err = %v", err)
	}
	s, atoms = supercell(t, c, []int{3}, nil, 0)
	n := len(atoms)
	s.Phi = s.Phi[:9*2*n]
	s.PrimitiveAtoms = []int{0, 1} // atoms 0 and 1 are both images of site 0
	_, _, err = Fold(context.Background(), c, s)
	if err == nil || !strings.Contains(err.Error(), "supercell_fc.primitive_atoms[1]") {
		t.Errorf("wrong image: err = %v", err)
	}
}

// TestFoldCancelled: a cancelled context stops the fold with its error.
func TestFoldCancelled(t *testing.T) {
	c := diatomic()
	s, _ := supercell(t, c, []int{3}, nil, 0)
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, _, err := Fold(ctx, c, s); !errors.Is(err, context.Canceled) {
		t.Fatalf("err = %v, want context.Canceled", err)
	}
}

// reorder returns the N×N set s with its atoms listed in the order perm
// (atom x of the result is atom perm[x] of s), blocks moved along.
func reorder(s *Set, perm []int) *Set {
	out := &Set{Matrix: s.Matrix, Fractional: s.Fractional, TolA: s.TolA}
	n := len(s.Atoms)
	for _, i := range perm {
		out.Atoms = append(out.Atoms, s.Atoms[i])
	}
	for _, i := range perm {
		for _, j := range perm {
			out.Phi = append(out.Phi, s.Phi[9*(i*n+j):9*(i*n+j)+9]...)
		}
	}
	return out
}

// rowsOf returns the n×N form of the N×N set s: the rows of the atoms in
// the cell cell.
func rowsOf(s *Set, atoms []atomMap, cell [3]int) *Set {
	out := &Set{Matrix: s.Matrix, Atoms: s.Atoms, Fractional: s.Fractional, TolA: s.TolA}
	n := len(atoms)
	for site := 0; ; site++ {
		found := false
		for i, a := range atoms {
			if a.site == site && a.cell == cell {
				out.PrimitiveAtoms = append(out.PrimitiveAtoms, i)
				out.Phi = append(out.Phi, s.Phi[9*i*n:9*(i+1)*n]...)
				found = true
			}
		}
		if !found {
			return out
		}
	}
}

// hashOf is the model hash of c's primitive cell with the set folded.
func hashOf(t *testing.T, c *physics.Crystal, s *Set) string {
	t.Helper()
	got, _ := folded(t, c, s)
	m, err := physics.Compile(context.Background(), got, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return m.Hash()
}

// TestSpellingsFoldAlike: the same data spelled as N×N or n×N blocks, with
// the atoms shuffled and 1e-4 Å noise, or fractional in a non-diagonal
// supercell, fold to the same bits (one model hash), and so does a set
// whose rows differ (noise on every Φ) listed in another order. The
// constants are chosen so that the sums do not come out exact by luck
// (1/3, 1/7): averaging x/27 over 27 rows does not return x's bits.
func TestSpellingsFoldAlike(t *testing.T) {
	c := fcc()
	for i := range c.Springs {
		c.Springs[i].KLong = 1.0/3 + 0.0123*float64(i)
		c.Springs[i].KTrans = 0.1 / 7
	}
	m := []int{3, 1, 0, 0, 3, 0, 0, -1, 3}
	plain, atoms := supercell(t, c, m, nil, 0)
	noisy, _ := supercell(t, c, m, rand.New(rand.NewPCG(1, 2)), 1e-4)
	frac, _ := supercellAs(t, c, m, rand.New(rand.NewPCG(1, 3)), 0, true)
	want := hashOf(t, c, plain)
	for name, s := range map[string]*Set{
		"shuffled, 1e-4 Å noise":   noisy,
		"fractional, shuffled":     frac,
		"n×N rows of cell 0":       rowsOf(plain, atoms, [3]int{}),
		"n×N rows of another cell": rowsOf(plain, atoms, atoms[len(atoms)-1].cell),
	} {
		if got := hashOf(t, c, s); got != want {
			t.Errorf("%s: hash %s, N×N in order %s", name, got, want)
		}
	}
	rng := rand.New(rand.NewPCG(4, 4))
	for x := range plain.Phi {
		plain.Phi[x] += 1e-3 * (2*rng.Float64() - 1)
	}
	perm := rng.Perm(len(plain.Atoms))
	if a, b := hashOf(t, c, plain), hashOf(t, c, reorder(plain, perm)); a != b {
		t.Errorf("rows that differ: hash %s in order, %s shuffled", a, b)
	}
}

// TestFoldBackClosedForm: the nearest-neighbour fcc crystal with central
// springs only (K = 1.2 eV/Å², M = 60 amu), written out as a non-diagonal
// supercell with shuffled atoms and folded back, has the closed-form
// frequencies of that model at X = (2π/a)(1,0,0) and L = (π/a)(1,1,1):
// ω²M/K = 8, 4, 4 and 8, 2, 2 (Ashcroft & Mermin, Solid State Physics,
// ch. 22, nearest-neighbour fcc; Kittel, Introduction to Solid State
// Physics, ch. 4, for the spring law). In the fractional reciprocal
// coordinates of the primitive vectors (0,2,2), (2,0,2), (2,2,0) (a = 4 Å)
// X is (0, ½, ½) and L is (½, ½, ½) (q_k = q·a_k/2π). ν = √(ω²)·ν₁ with
// ν₁ = physics.NuUnitTHz, the THz of 1 eV/Å²/amu.
func TestFoldBackClosedForm(t *testing.T) {
	c := fcc()
	for i := range c.Springs {
		c.Springs[i].KTrans = 0
	}
	const k, m = 1.2, 60.0
	s, _ := supercell(t, c, []int{3, 1, 0, 0, 3, 0, 0, -1, 3}, rand.New(rand.NewPCG(2, 9)), 1e-4)
	got, _ := folded(t, c, s)
	mod, err := physics.Compile(context.Background(), got, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name  string
		q     [3]float64
		ratio []float64 // ω²M/K, ascending
	}{
		{"X", [3]float64{0, 0.5, 0.5}, []float64{4, 4, 8}},
		{"L", [3]float64{0.5, 0.5, 0.5}, []float64{2, 2, 8}},
	} {
		f := mod.FrequenciesTHz(tc.q)
		for i, r := range tc.ratio {
			want := math.Sqrt(r*k/m) * physics.NuUnitTHz
			if math.Abs(f[i]-want) > 1e-10 {
				t.Errorf("%s mode %d: %.15g THz, closed form %.15g", tc.name, i, f[i], want)
			}
		}
	}
}
