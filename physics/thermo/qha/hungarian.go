package qha

import "math"

// hungarian solves the square assignment problem min Σ_k cost[k][π(k)] by
// the Hungarian method with potentials, O(n³) (Kuhn 1955; Munkres, J. Soc.
// Ind. Appl. Math. 5, 32 (1957); the shortest-augmenting-path form with
// dual potentials, common practice). Scratch is kept for reuse.
type hungarian struct {
	n          int
	u, v, minv []float64
	p, way     []int
	used       []bool
}

func newHungarian(n int) *hungarian {
	return &hungarian{n: n, u: make([]float64, n+1), v: make([]float64, n+1), minv: make([]float64, n+1),
		p: make([]int, n+1), way: make([]int, n+1), used: make([]bool, n+1)}
}

// solve writes the optimal assignment of rows to columns of the n×n cost
// matrix (row-major) into match (row k ↦ column match[k]).
func (h *hungarian) solve(cost []float64, match []int) {
	n := h.n
	for i := range h.u {
		h.u[i], h.v[i], h.p[i], h.way[i] = 0, 0, 0, 0
	}
	for i := 1; i <= n; i++ {
		h.p[0] = i
		j0 := 0
		for j := range h.minv {
			h.minv[j], h.used[j] = math.Inf(1), false
		}
		for {
			h.used[j0] = true
			i0, delta, j1 := h.p[j0], math.Inf(1), 0
			for j := 1; j <= n; j++ {
				if h.used[j] {
					continue
				}
				cur := cost[(i0-1)*n+j-1] - h.u[i0] - h.v[j]
				if cur < h.minv[j] {
					h.minv[j], h.way[j] = cur, j0
				}
				if h.minv[j] < delta {
					delta, j1 = h.minv[j], j
				}
			}
			for j := 0; j <= n; j++ {
				if h.used[j] {
					h.u[h.p[j]] += delta
					h.v[j] -= delta
				} else {
					h.minv[j] -= delta
				}
			}
			j0 = j1
			if h.p[j0] == 0 {
				break
			}
		}
		for j0 != 0 {
			j1 := h.way[j0]
			h.p[j0] = h.p[j1]
			j0 = j1
		}
	}
	for j := 1; j <= n; j++ {
		if h.p[j] > 0 {
			match[h.p[j]-1] = j - 1
		}
	}
}
