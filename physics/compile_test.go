// Tests of compilation: neighbour shells and interaction counts.

package physics_test

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// TestShellBondCounts: the neighbour search finds the coordination shells
// of the standard structures — fcc 12 nearest neighbours at a/√2, sc 6 at
// a, bcc 8 at √3a/2 and 6 at a, rock salt 6 unlike neighbours at a/2 and
// 12 like ones at a/√2 (Kittel, Introduction to Solid State Physics,
// ch. 1) — and reports each bond once: half the neighbours for like
// labels, all of them for unlike.
func TestShellBondCounts(t *testing.T) {
	bcc := &physics.Crystal{Lattice: [][3]float64{{-1.5, 1.5, 1.5}, {1.5, -1.5, 1.5}, {1.5, 1.5, -1.5}},
		Sites: []physics.Site{{Label: "A", MassAmu: 1, Frac: []float64{0, 0, 0}}},
		Shells: []physics.Shell{{FromLabel: "A", ToLabel: "A", Shell: 1, KLong: 1},
			{FromLabel: "A", ToLabel: "A", Shell: 2, KLong: 1}}}
	sc := &physics.Crystal{Lattice: [][3]float64{{2, 0, 0}, {0, 2, 0}, {0, 0, 2}},
		Sites:  []physics.Site{{Label: "A", MassAmu: 1, Frac: []float64{0, 0, 0}}},
		Shells: []physics.Shell{{FromLabel: "A", ToLabel: "A", Shell: 1, KLong: 1}, {FromLabel: "A", ToLabel: "A", Shell: 3, KLong: 1}}}
	cube := testmodels.Supercell(t, testmodels.Load(t, "rocksalt-like"), testmodels.ConventionalCell)
	cases := []struct {
		name  string
		c     *physics.Crystal
		bonds []int
		distA []float64
	}{
		{"fcc (a = 4 Å)", testmodels.Load(t, "fcc"), []int{6}, []float64{4 / math.Sqrt2}},
		{"sc (a = 2 Å): 6 at a, 8 at √3a", sc, []int{3, 4}, []float64{2, 2 * math.Sqrt(3)}},
		{"bcc (a = 3 Å)", bcc, []int{4, 3}, []float64{1.5 * math.Sqrt(3), 3}},
		{"rock salt (a = 5.6 Å)", testmodels.Load(t, "rocksalt-like"), []int{6, 6, 6}, []float64{2.8, 5.6 / math.Sqrt2, 5.6 / math.Sqrt2}},
		{"rock salt conventional cell (4 P, 4 Q)", cube, []int{24, 24, 24}, []float64{2.8, 5.6 / math.Sqrt2, 5.6 / math.Sqrt2}},
		{"square net: 4 at a, 4 at √2a", testmodels.Load(t, "square-net"), []int{2, 2}, []float64{3, 3 * math.Sqrt2}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m := testmodels.Compile(t, tc.c)
			sh := m.Shells()
			total := len(tc.c.Springs) + len(tc.c.Blocks)
			for k, want := range tc.bonds {
				if sh[k].Bonds != want || math.Abs(sh[k].DistanceA-tc.distA[k]) > 1e-9 {
					t.Errorf("shell %d: %d bonds at %.9g Å; want %d at %.9g", k, sh[k].Bonds, sh[k].DistanceA, want, tc.distA[k])
				}
				total += want
			}
			if m.Interactions() != total {
				t.Errorf("Interactions = %d; want %d", m.Interactions(), total)
			}
		})
	}
}

// TestRandomModelsNeverPanic: random crystals, valid or not (NaN, zero
// masses, wild indices and offsets, random lattices of 1–4 vectors), give a
// model or a *ValidationError, never a panic; valid ones give finite
// frequencies, a lattice type or "", and a path through Γ.
func TestRandomModelsNeverPanic(t *testing.T) {
	rng := rand.New(rand.NewPCG(61, 7))
	// rare returns bad with probability 1/12, else good.
	rare := func(good, bad float64) float64 {
		if rng.IntN(12) == 0 {
			return bad
		}
		return good
	}
	rareInt := func(good, bad int) int { return int(rare(float64(good), float64(bad))) }
	valid := 0
	for iter := 0; iter < 400; iter++ {
		d := 1 + rng.IntN(3)
		if rng.IntN(20) == 0 {
			d = 4
		}
		c := &physics.Crystal{Polarizations: rareInt(rng.IntN(4), 5)}
		for k := 0; k < d; k++ {
			var v [3]float64
			for a := range v {
				v[a] = rng.NormFloat64() * 3
			}
			v[k%3] += 4
			c.Lattice = append(c.Lattice, v)
		}
		ns := rareInt(1+rng.IntN(3), 0)
		for i := 0; i < ns; i++ {
			s := physics.Site{Label: string(rune('A' + i%2)), MassAmu: rare(1+30*rng.Float64(), []float64{0, -1, math.NaN()}[rng.IntN(3)])}
			fl := d
			if rng.IntN(40) == 0 {
				fl++
			}
			for k := 0; k < fl; k++ {
				s.Frac = append(s.Frac, rng.Float64())
			}
			c.Sites = append(c.Sites, s)
		}
		cell := func() []int {
			n := make([]int, d)
			for k := range n {
				n[k] = rng.IntN(5) - 2
			}
			return n
		}
		for k := rng.IntN(4); k > 0; k-- {
			c.Springs = append(c.Springs, physics.Spring{From: rareInt(rng.IntN(max(ns, 1)), -1), To: rareInt(rng.IntN(max(ns, 1)), ns), Cell: cell(),
				KLong: rare(rng.Float64()*2-0.3, math.Inf(1)), KTrans: rng.Float64()})
		}
		for k := rng.IntN(3); k > 0; k-- {
			c.Shells = append(c.Shells, physics.Shell{FromLabel: "A", ToLabel: string(rune('A' + rareInt(0, 2))), Shell: rareInt(1+rng.IntN(3), 0), KLong: 1})
		}
		for k := rng.IntN(3); k > 0; k-- {
			phi := make([]float64, rareInt(9, 8))
			for a := range phi {
				phi[a] = rng.NormFloat64()
			}
			c.Blocks = append(c.Blocks, physics.Block{From: rng.IntN(max(ns, 1)), To: rareInt(rng.IntN(max(ns, 1)), ns+3), Cell: cell(), Phi: phi})
		}
		m, err := physics.Compile(context.Background(), c, physics.Options{EnforceSumRule: rng.IntN(2) == 0, Limits: physics.Limits{MaxCellOffset: 3}})
		if err != nil {
			violationsOf(t, err) // must be a *ValidationError
			continue
		}
		valid++
		for _, q := range randomQs(rng, 2) {
			for k := m.Dim(); k < 3; k++ {
				q[k] = 0
			}
			pm := m.Point(q, physics.ModeOptions{Eigenvectors: true, Velocities: true})
			for _, f := range pm.FreqTHz {
				if math.IsNaN(f) || math.IsInf(f, 0) {
					t.Fatalf("model %d: non-finite frequency %v", iter, pm.FreqTHz)
				}
			}
		}
		_ = m.LatticeType()
		if _, err := m.Dispersion(testCtx(t), []physics.PathCorner{{Label: "G"}, {Q: [3]float64{0.5}, HasQ: true}}, physics.PathOptions{Points: 5, FollowModes: true}); err != nil {
			t.Fatalf("model %d: path: %v", iter, err)
		}
	}
	if valid < 40 {
		t.Errorf("only %d of 400 random models were valid; the test needs more", valid)
	}
}
