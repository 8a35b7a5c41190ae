// Invariances of the dynamical matrix and the spectrum.

package physics_test

import (
	"context"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"sort"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"

	"github.com/materials-lab/modegrid/physics/eigen"
	"github.com/materials-lab/modegrid/physics/lattice"
)

// TestZeroModesAtGamma: every example built from springs has exactly p
// zero modes at Γ (the acoustic sum rule: a rigid translation costs no
// energy; Born & Huang §23, common practice), to 1e-12 of the largest
// zone-boundary eigenvalue, and no others.
func TestZeroModesAtGamma(t *testing.T) {
	for _, name := range testmodels.Names(t) {
		t.Run(name, func(t *testing.T) {
			m := testmodels.Compile(t, testmodels.Load(t, name))
			vals, _ := eigen.Hermitian(m.DynamicalMatrix([3]float64{}, nil), m.ModeCount(), false)
			// Scale: the largest eigenvalue at the zone boundary (at Γ a
			// one-site model has nothing but zeros).
			edge, _ := eigen.Hermitian(m.DynamicalMatrix([3]float64{0.5, 0.5 * float64(min(m.Dim()-1, 1)), 0}, nil), m.ModeCount(), false)
			top := testmodels.MaxAbs(edge)
			zeros := 0
			for _, v := range vals {
				if math.Abs(v) <= 1e-12*top {
					zeros++
				}
			}
			if zeros != m.Polarizations() {
				t.Errorf("%d zero modes at Γ; want p = %d (eigenvalues %v)", zeros, m.Polarizations(), vals)
			}
		})
	}
}

// referenceD is D(q) straight from its definition over the directed terms,
// with one exp per term (doc.go), as an independent check of the packed
// assembly.
func referenceD(m *physics.Model, q [3]float64) []complex128 {
	n, p := m.ModeCount(), m.Polarizations()
	d := make([]complex128, n*n)
	for _, t := range m.Terms() {
		ph := cmplx.Exp(complex(0, 2*math.Pi*(q[0]*float64(t.N[0])+q[1]*float64(t.N[1])+q[2]*float64(t.N[2]))))
		for a := 0; a < p; a++ {
			for b := 0; b < p; b++ {
				d[(t.I*p+a)*n+t.J*p+b] += complex(t.Phi[3*a+b], 0) * ph
			}
		}
	}
	return d
}

// TestDynamicalMatrixHermitian: D(q) equals its definition (to 1e-13 of
// its largest element), is Hermitian, and D(−q) = D(q)* for real force
// constants (time reversal; common practice), on every example and a
// 64-site supercell at random q.
func TestDynamicalMatrixHermitian(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	models := map[string]*physics.Model{}
	for _, name := range testmodels.Names(t) {
		models[name] = testmodels.Compile(t, testmodels.Load(t, name))
	}
	models["64-site cube"] = testmodels.Compile(t, testmodels.Supercell(t, testmodels.Supercell(t, testmodels.Load(t, "rocksalt-like"), testmodels.ConventionalCell), [3][3]int{{2, 0, 0}, {0, 2, 0}, {0, 0, 2}}))
	for name, m := range models {
		t.Run(name, func(t *testing.T) {
			n := m.ModeCount()
			for _, q := range randomQs(rng, 5) {
				for k := m.Dim(); k < 3; k++ {
					q[k] = 0
				}
				d := m.DynamicalMatrix(q, nil)
				ref := referenceD(m, q)
				var scale float64
				for _, z := range ref {
					scale = math.Max(scale, cmplx.Abs(z))
				}
				minus := m.DynamicalMatrix([3]float64{-q[0], -q[1], -q[2]}, nil)
				for i := 0; i < n; i++ {
					for j := 0; j < n; j++ {
						if e := cmplx.Abs(d[i*n+j] - ref[i*n+j]); e > 1e-13*scale {
							t.Fatalf("q=%v D[%d,%d] = %v; definition %v", q, i, j, d[i*n+j], ref[i*n+j])
						}
						if d[i*n+j] != cmplx.Conj(d[j*n+i]) {
							t.Fatalf("q=%v: D[%d,%d] = %v, conj D[%d,%d] = %v", q, i, j, d[i*n+j], j, i, cmplx.Conj(d[j*n+i]))
						}
						if e := cmplx.Abs(minus[i*n+j] - cmplx.Conj(d[i*n+j])); e > 1e-13*scale {
							t.Fatalf("q=%v: D(−q) ≠ D(q)* at [%d,%d]", q, i, j)
						}
					}
				}
			}
		})
	}
}

// TestDynamicalMatrixGrad: the analytic ∂D/∂q_α agrees with central
// differences of D along Cartesian q (step 1e-5 Å⁻¹; error O(h²) ≈ 1e-9
// relative) and is Hermitian.
func TestDynamicalMatrixGrad(t *testing.T) {
	rng := rand.New(rand.NewPCG(6, 1))
	for _, name := range []string{"rocksalt-like", "square-net", "diatomic-chain"} {
		t.Run(name, func(t *testing.T) {
			m := testmodels.Compile(t, testmodels.Load(t, name))
			n := m.ModeCount()
			for _, q := range randomQs(rng, 3) {
				for k := m.Dim(); k < 3; k++ {
					q[k] = 0
				}
				g := m.DynamicalMatrixGrad(q)
				const h = 1e-5
				for a := 0; a < 3; a++ {
					var dq [3]float64 // fractional change for a Cartesian step h along a
					for k := 0; k < m.Dim(); k++ {
						dq[k] = h * m.Lattice()[k][a] / (2 * math.Pi)
					}
					plus := m.DynamicalMatrix([3]float64{q[0] + dq[0], q[1] + dq[1], q[2] + dq[2]}, nil)
					minus := m.DynamicalMatrix([3]float64{q[0] - dq[0], q[1] - dq[1], q[2] - dq[2]}, nil)
					var scale float64
					for _, z := range g[a] {
						scale = math.Max(scale, cmplx.Abs(z))
					}
					for x := 0; x < n*n; x++ {
						fd := (plus[x] - minus[x]) / complex(2*h, 0)
						if cmplx.Abs(fd-g[a][x]) > 1e-7*math.Max(scale, 1e-3) {
							t.Fatalf("q=%v α=%d [%d]: analytic %v, difference %v", q, a, x, g[a][x], fd)
						}
					}
					for i := 0; i < n; i++ {
						for j := 0; j < n; j++ {
							if g[a][i*n+j] != cmplx.Conj(g[a][j*n+i]) {
								t.Fatalf("∂D/∂q_%d not Hermitian at [%d,%d]", a, i, j)
							}
						}
					}
				}
			}
		})
	}
}

// foldedSpectrum returns the sorted union of the primitive spectra at every
// q with M q ≡ Q (mod 1): the primitive wavevectors that fold onto Q of the
// supercell a' = M a (common practice: a supercell's zone folds the
// primitive zone det(M) times).
func foldedSpectrum(m *physics.Model, mt [3][3]int, Q [3]float64, det int) []float64 {
	var mf [3][3]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			mf[i][j] = float64(mt[i][j])
		}
	}
	inv := lattice.Invert(mf, 3)
	seen := map[[3]int64]bool{}
	var out []float64
	for g0 := 0; g0 < det; g0++ {
		for g1 := 0; g1 < det; g1++ {
			for g2 := 0; g2 < det; g2++ {
				g := [3]float64{Q[0] + float64(g0), Q[1] + float64(g1), Q[2] + float64(g2)}
				var q [3]float64
				for k := 0; k < 3; k++ {
					for l := 0; l < 3; l++ {
						q[k] += inv[k][l] * g[l]
					}
				}
				var key [3]int64
				for k := range q {
					w := q[k] - math.Floor(q[k]+1e-9)
					key[k] = int64(math.Round(w * 1e6))
					if key[k] == 1e6 {
						key[k] = 0
					}
				}
				if seen[key] {
					continue
				}
				seen[key] = true
				out = append(out, m.FrequenciesTHz(q)...)
			}
		}
	}
	sort.Float64s(out)
	return out
}

// TestDoubledCellFolding: the same crystal described in a larger cell has,
// at each supercell wavevector, the folded spectrum of the primitive cell
// (common practice; springs are re-expressed between the copies, shells
// re-found by label).
func TestDoubledCellFolding(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 3))
	cases := []struct {
		name string
		c    *physics.Crystal
		m    [3][3]int
		det  int
	}{
		{"chain doubled (springs)", testmodels.Load(t, "chain"), [3][3]int{{2}}, 2},
		{"chain tripled (springs)", testmodels.Load(t, "chain"), [3][3]int{{3}}, 3},
		{"two-site chain doubled (springs and blocks)", twoSiteChain(), [3][3]int{{2}}, 2},
		{"square net 2×1 (shells)", testmodels.Load(t, "square-net"), [3][3]int{{2, 0}, {0, 1}}, 2},
		{"fcc doubled along a₁ (shells)", testmodels.Load(t, "fcc"), [3][3]int{{2, 0, 0}, {0, 1, 0}, {0, 0, 1}}, 2},
		{"rock salt conventional cube (shells)", testmodels.Load(t, "rocksalt-like"), testmodels.ConventionalCell, 4},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			prim := testmodels.Compile(t, tc.c)
			super := testmodels.Compile(t, testmodels.Supercell(t, tc.c, tc.m))
			for _, Q := range randomQs(rng, 3) {
				for k := prim.Dim(); k < 3; k++ {
					Q[k] = 0
				}
				got := super.FrequenciesTHz(Q)
				mt := tc.m
				for k := prim.Dim(); k < 3; k++ {
					mt[k][k] = 1
				}
				want := foldedSpectrum(prim, mt, Q, tc.det)
				if !testmodels.CloseSlices(got, want, 1e-10) {
					t.Fatalf("Q=%v:\n supercell %v\n folded    %v", Q, got, want)
				}
			}
		})
	}
}

// TestRigidRotation: rotating lattice and positions together leaves the
// spectrum at the same fractional q unchanged (to 1e-12), rotates each
// site's eigenvector components and the group velocities by the same
// rotation, and — because those results change — changes the hash.
func TestRigidRotation(t *testing.T) {
	rng := rand.New(rand.NewPCG(10, 10))
	c := testmodels.Load(t, "rocksalt-like")
	r := testmodels.RandomRotation(rng)
	a, b := testmodels.Compile(t, c), testmodels.Compile(t, testmodels.Rotated(c, r))
	if a.Hash() == b.Hash() {
		t.Error("hash unchanged under rotation, but eigenvectors and velocities rotate")
	}
	for _, q := range randomQs(rng, 4) {
		pa := a.Point(q, physics.ModeOptions{Eigenvectors: true, Velocities: true})
		pb := b.Point(q, physics.ModeOptions{Eigenvectors: true, Velocities: true})
		if !testmodels.CloseSlices(pb.FreqTHz, pa.FreqTHz, 1e-12) {
			t.Fatalf("q=%v: rotated %v; original %v", q, pb.FreqTHz, pa.FreqTHz)
		}
		n := a.ModeCount()
		for k := 0; k < n; k++ {
			if (k > 0 && pa.FreqTHz[k]-pa.FreqTHz[k-1] < 1e-6) || (k < n-1 && pa.FreqTHz[k+1]-pa.FreqTHz[k] < 1e-6) {
				continue // degenerate: vectors defined up to a rotation
			}
			// e'_s = R e_s per site: the overlap has modulus 1.
			var dot complex128
			for s := 0; s < a.Sites(); s++ {
				var re, im [3]float64
				for x := 0; x < 3; x++ {
					re[x] = real(pa.Eigvecs[k*n+3*s+x])
					im[x] = imag(pa.Eigvecs[k*n+3*s+x])
				}
				rr, ri := testmodels.Rotate3(r, re), testmodels.Rotate3(r, im)
				for x := 0; x < 3; x++ {
					dot += cmplx.Conj(complex(rr[x], ri[x])) * pb.Eigvecs[k*n+3*s+x]
				}
			}
			if math.Abs(cmplx.Abs(dot)-1) > 1e-9 {
				t.Fatalf("q=%v mode %d: |⟨R e|e′⟩| = %v; want 1", q, k, cmplx.Abs(dot))
			}
			want := testmodels.Rotate3(r, pa.VelKmS[k])
			for x := 0; x < 3; x++ {
				if math.Abs(pb.VelKmS[k][x]-want[x]) > 1e-9 {
					t.Fatalf("q=%v mode %d: velocity %v; want R v = %v", q, k, pb.VelKmS[k], want)
				}
			}
		}
	}
}

// TestSitePermutation: renumbering the sites leaves the spectrum unchanged
// and permutes the eigenvector components; the hash changes because the
// per-site results are reordered.
func TestSitePermutation(t *testing.T) {
	rng := rand.New(rand.NewPCG(12, 1))
	c := testmodels.Supercell(t, testmodels.Load(t, "rocksalt-like"), testmodels.ConventionalCell)
	perm := rng.Perm(len(c.Sites))
	a, b := testmodels.Compile(t, c), testmodels.Compile(t, testmodels.PermutedSites(c, perm))
	if a.Hash() == b.Hash() {
		t.Error("hash unchanged under site permutation, but per-site results are reordered")
	}
	for _, q := range randomQs(rng, 3) {
		fa, va := a.ModesAt(q)
		fb, vb := b.ModesAt(q)
		if !testmodels.CloseSlices(fb, fa, 1e-12) {
			t.Fatalf("q=%v: permuted %v; original %v", q, fb, fa)
		}
		n := a.ModeCount()
		for k := 0; k < n; k++ {
			if (k > 0 && fa[k]-fa[k-1] < 1e-6) || (k < n-1 && fa[k+1]-fa[k] < 1e-6) {
				continue
			}
			var dot complex128
			for s := range perm {
				for x := 0; x < 3; x++ {
					dot += cmplx.Conj(va[k*n+3*s+x]) * vb[k*n+3*perm[s]+x]
				}
			}
			if math.Abs(cmplx.Abs(dot)-1) > 1e-9 {
				t.Fatalf("q=%v mode %d: |overlap| = %v; want 1", q, k, cmplx.Abs(dot))
			}
		}
	}
}

// TestSpringPermutationAndUnits: shuffling springs, shells and blocks and
// switching eV/Å² to N/m (1 eV/Å² = 16.02176634 N/m, CODATA 2018) change
// nothing: spectrum to 1e-12 and hash (these constants convert back to the
// same float64; see TestHashUnitConversion).
func TestSpringPermutationAndUnits(t *testing.T) {
	rng := rand.New(rand.NewPCG(14, 2))
	for _, c := range []*physics.Crystal{twoSiteChain(), testmodels.Load(t, "rocksalt-like"), testmodels.Supercell(t, twoSiteChain(), [3][3]int{{3}})} {
		shuffled := testmodels.Clone(c)
		rng.Shuffle(len(shuffled.Springs), func(i, j int) {
			shuffled.Springs[i], shuffled.Springs[j] = shuffled.Springs[j], shuffled.Springs[i]
		})
		rng.Shuffle(len(shuffled.Shells), func(i, j int) {
			shuffled.Shells[i], shuffled.Shells[j] = shuffled.Shells[j], shuffled.Shells[i]
		})
		rng.Shuffle(len(shuffled.Blocks), func(i, j int) {
			shuffled.Blocks[i], shuffled.Blocks[j] = shuffled.Blocks[j], shuffled.Blocks[i]
		})
		ref := testmodels.Compile(t, c)
		for name, v := range map[string]*physics.Crystal{"shuffled": shuffled, "N/m": testmodels.InNPerM(c), "N/m shuffled": testmodels.InNPerM(shuffled)} {
			m := testmodels.Compile(t, v)
			if m.Hash() != ref.Hash() {
				t.Errorf("%s: hash changed", name)
			}
			for _, q := range randomQs(rng, 3) {
				for k := m.Dim(); k < 3; k++ {
					q[k] = 0
				}
				if got, want := m.FrequenciesTHz(q), ref.FrequenciesTHz(q); !testmodels.CloseSlices(got, want, 1e-12) {
					t.Errorf("%s q=%v: %v; want %v", name, q, got, want)
				}
			}
		}
	}
}

// respell returns another description of the same model as c: springs,
// shells and blocks shuffled, each bond or off-site block given as its own
// reverse at random (Φ(0j; −n i) = Φ(0i; nj)ᵀ), on-site blocks transposed
// (only their symmetric part enters), a zero spring added, zero lattice
// components and positions spelled −0, and one shell replaced by its
// explicit springs.
func respell(t *testing.T, rng *rand.Rand, c *physics.Crystal) *physics.Crystal {
	t.Helper()
	out := testmodels.Clone(c)
	if len(out.Shells) > 0 {
		k := rng.IntN(len(out.Shells))
		sh := out.Shells[k]
		bonds, err := testmodels.Compile(t, c).ShellBonds(context.Background(), sh)
		if err != nil {
			t.Fatal(err)
		}
		out.Shells = append(out.Shells[:k:k], out.Shells[k+1:]...)
		for _, b := range bonds {
			out.Springs = append(out.Springs, physics.Spring{From: b.From, To: b.To, Cell: append([]int(nil), b.N[:len(c.Lattice)]...), KLong: sh.KLong, KTrans: sh.KTrans})
		}
	}
	zero := physics.Spring{From: 0, To: 0, Cell: make([]int, len(c.Lattice))}
	zero.Cell[0] = 2
	out.Springs = append(out.Springs, zero)
	for k := range out.Springs {
		if s := &out.Springs[k]; rng.IntN(2) == 0 {
			s.From, s.To = s.To, s.From
			for x := range s.Cell {
				s.Cell[x] = -s.Cell[x]
			}
		}
	}
	for k := range out.Blocks {
		if b := &out.Blocks[k]; rng.IntN(2) == 0 {
			b.From, b.To = b.To, b.From
			for x := range b.Cell {
				b.Cell[x] = -b.Cell[x] // −0 is 0 for ints: on-site blocks stay on-site
			}
			tr := physics.Transpose9([9]float64(b.Phi))
			b.Phi = tr[:]
		}
	}
	rng.Shuffle(len(out.Springs), func(i, j int) { out.Springs[i], out.Springs[j] = out.Springs[j], out.Springs[i] })
	rng.Shuffle(len(out.Shells), func(i, j int) { out.Shells[i], out.Shells[j] = out.Shells[j], out.Shells[i] })
	rng.Shuffle(len(out.Blocks), func(i, j int) { out.Blocks[i], out.Blocks[j] = out.Blocks[j], out.Blocks[i] })
	negZero := math.Copysign(0, -1)
	for k := range out.Lattice {
		for a := range out.Lattice[k] {
			if out.Lattice[k][a] == 0 {
				out.Lattice[k][a] = negZero
			}
		}
	}
	for i := range out.Sites {
		for k := range out.Sites[i].Frac {
			if out.Sites[i].Frac[k] == 0 {
				out.Sites[i].Frac[k] = negZero
			}
		}
	}
	return out
}

// sameBits reports whether two compiled models hold bit-identical
// force-constant terms (same blocks, same float64 bits).
func sameBits(a, b *physics.Model) bool {
	if len(a.Terms()) != len(b.Terms()) {
		return false
	}
	for k, ta := range a.Terms() {
		tb := b.Terms()[k]
		if ta.I != tb.I || ta.J != tb.J || ta.N != tb.N {
			return false
		}
		for x := range ta.Phi {
			if math.Float64bits(ta.Phi[x]) != math.Float64bits(tb.Phi[x]) {
				return false
			}
		}
	}
	return true
}

// TestRespelledModelsBitIdentical: descriptions of one model in any order
// and orientation compile to bit-identical force constants, the same hash
// and bit-identical frequencies (the hash can be exact only because the
// compiled numbers are).
func TestRespelledModelsBitIdentical(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 7))
	names := []string{"every kind", "two-site chain ×3"}
	models := map[string]*physics.Crystal{"every kind": everyKind(), "two-site chain ×3": testmodels.Supercell(t, twoSiteChain(), [3][3]int{{3}})}
	for _, name := range testmodels.Names(t) {
		names = append(names, name)
		models[name] = testmodels.Load(t, name)
	}
	for _, name := range names {
		c := models[name]
		t.Run(name, func(t *testing.T) {
			ref := testmodels.Compile(t, c)
			for trial := 0; trial < 4; trial++ {
				m := testmodels.Compile(t, respell(t, rng, c))
				if !sameBits(m, ref) {
					t.Fatalf("trial %d: compiled terms differ", trial)
				}
				if m.Hash() != ref.Hash() {
					t.Fatalf("trial %d: hash %s; want %s", trial, m.Hash(), ref.Hash())
				}
				for _, q := range randomQs(rng, 2) {
					for k := m.Dim(); k < 3; k++ {
						q[k] = 0
					}
					got, want := m.FrequenciesTHz(q), ref.FrequenciesTHz(q)
					for x := range want {
						if math.Float64bits(got[x]) != math.Float64bits(want[x]) {
							t.Fatalf("trial %d q=%v: %v; want %v bit for bit", trial, q, got, want)
						}
					}
				}
			}
		})
	}
}

// TestReverseBlocksExact: every compiled block Φ(0i; nj) has its reverse
// Φ(0j; −n i) equal to its transpose bit for bit, and every on-site block
// is symmetric bit for bit, so D(q) is exactly Hermitian.
func TestReverseBlocksExact(t *testing.T) {
	models := map[string]*physics.Crystal{"every kind": everyKind()}
	for _, name := range testmodels.Names(t) {
		models[name] = testmodels.Load(t, name)
	}
	for name, c := range models {
		m := testmodels.Compile(t, c)
		type key struct {
			i, j int
			n    [3]int
		}
		index := map[key]physics.Term{}
		for _, tm := range m.Terms() {
			index[key{tm.I, tm.J, tm.N}] = tm
		}
		for _, tm := range m.Terms() {
			rev, ok := index[key{tm.J, tm.I, physics.Neg3(tm.N)}]
			if !ok {
				t.Errorf("%s: block (%d, %d, %v) has no reverse", name, tm.I, tm.J, tm.N)
				continue
			}
			if physics.Transpose9(rev.Phi) != tm.Phi {
				t.Errorf("%s: block (%d, %d, %v) is not the transpose of its reverse: %v vs %v", name, tm.I, tm.J, tm.N, tm.Phi, physics.Transpose9(rev.Phi))
			}
		}
	}
}
