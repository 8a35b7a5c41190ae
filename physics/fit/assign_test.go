package fit

import (
	"math"
	"math/rand/v2"
	"testing"
)

// bruteAssign is the least total cost over every injective map of rows
// to columns (exhaustive: the reference for small problems).
func bruteAssign(cost [][]float64) float64 {
	k, m := len(cost), len(cost[0])
	best := math.Inf(1)
	used := make([]bool, m)
	var rec func(r int, sum float64)
	rec = func(r int, sum float64) {
		if r == k {
			best = math.Min(best, sum)
			return
		}
		for c := 0; c < m; c++ {
			if !used[c] {
				used[c] = true
				rec(r+1, sum+cost[r][c])
				used[c] = false
			}
		}
	}
	rec(0, 0)
	return best
}

// TestHungarianAgainstBruteForce: on 300 seeded random problems of up to
// 5 rows and 7 columns the Hungarian method's assignment is injective and
// as cheap as the exhaustive search's.
func TestHungarianAgainstBruteForce(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 13))
	for trial := range 300 {
		k := 1 + rng.IntN(5)
		m := k + rng.IntN(3)
		cost := make([][]float64, k)
		for r := range cost {
			cost[r] = make([]float64, m)
			for c := range cost[r] {
				cost[r][c] = math.Floor(rng.Float64() * 10) // ties on purpose
			}
		}
		got := hungarian(cost)
		seen := map[int]bool{}
		var sum float64
		for r, c := range got {
			if seen[c] {
				t.Fatalf("trial %d: column %d taken twice: %v", trial, c, got)
			}
			seen[c] = true
			sum += cost[r][c]
		}
		if want := bruteAssign(cost); sum != want {
			t.Errorf("trial %d: cost %v, exhaustive %v (%v)", trial, sum, want, cost)
		}
	}
}

// TestAssignTerminatesOnExtremeCosts: costs that overflow (a datum far
// from every branch in units of a tiny σ) or are not numbers are bounded,
// and the assignment still ends with distinct branches (a fuzzed input
// once made it loop forever).
func TestAssignTerminatesOnExtremeCosts(t *testing.T) {
	vals := []float64{1, 2, 3}
	items := []item{{obs: 1e300, sigma: 1e-300}, {obs: 2, sigma: 1e-300}, {obs: math.NaN(), sigma: 1}}
	got := assign(items, vals, nil, nil)
	if got[0] == got[1] || got[1] == got[2] || got[0] == got[2] || got[1] != 1 {
		t.Errorf("assignment %v; want distinct branches, the second datum on branch 2", got)
	}
	// Every branch excluded or taken: the assignment still ends.
	if got := assign([]item{{obs: 2.1, sigma: 1}, {obs: 1, sigma: 1, branch: 2}}, vals[:2], nil, []bool{true, false}); got[0] != 1 {
		t.Errorf("with every open branch labelled: %v; want the datum on the shared branch 2", got)
	}
	if got := assign([]item{{obs: 1.2, sigma: 1}}, vals, nil, []bool{true, true, true}); got[0] != 0 {
		t.Errorf("with every branch excluded: %v; want the nearest, branch 1", got)
	}
}
