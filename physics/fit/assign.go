// Assignment of unlabelled data to model branches.

package fit

import (
	"math"
)

// item is one datum to assign: the measured value, its σ, and the branch
// it was given (1-based; 0: to assign) and its polarisation hint.
type item struct {
	obs, sigma float64
	branch     int
	pol        Polarization
}

// forbidden is the cost added to a pair outside an item's allowed
// branches: it is taken only when nothing else is left.
const forbidden = 1e12

// maxCost bounds a pair's cost (a datum 1e100 σ from a branch is as far
// as any), so that sums over up to MaxData items stay finite.
const maxCost = 1e200

// assign returns the 0-based branch of every item among the model values
// vals (one per branch). Items with a branch keep it. The others are
// matched one to one to the branches not in excluded and not taken by a
// labelled item, by the assignment of least Σ((obs − vals[b])/σ)² (the
// Hungarian method: H. W. Kuhn, Naval Res. Logist. Q. 2, 83 (1955)); when
// there are more items than branches, each branch takes several. A
// single item so takes its nearest branch, and χ² — a minimum over
// assignments of functions continuous in the parameters — stays
// continuous as branches cross. With a polarisation hint an item is
// matched among the branches of that character (long[b] ≥ ½
// longitudinal, < ½ transverse; long is each branch's longitudinal
// fraction) or, when none has it, to the branch nearest in character.
func assign(items []item, vals, long []float64, excluded []bool) []int {
	out := make([]int, len(items))
	taken := make([]bool, len(vals))
	var free []int
	for i, it := range items {
		if it.branch > 0 {
			out[i] = it.branch - 1
			taken[it.branch-1] = true
			continue
		}
		free = append(free, i)
	}
	if len(free) == 0 {
		return out
	}
	var cols []int // branches open to the unlabelled items
	for b := range vals {
		if !taken[b] && (excluded == nil || !excluded[b]) {
			cols = append(cols, b)
		}
	}
	if len(cols) == 0 { // every open branch labelled: share them
		for b := range vals {
			if excluded == nil || !excluded[b] {
				cols = append(cols, b)
			}
		}
	}
	if len(cols) == 0 { // every branch excluded (refused by validation): any
		for b := range vals {
			cols = append(cols, b)
		}
	}
	for len(cols) < len(free) { // more items than branches: each branch several times
		cols = append(cols, cols[:min(len(cols), len(free)-len(cols))]...)
	}
	cost := make([][]float64, len(free))
	for r, i := range free {
		it := items[i]
		allowed := allowedBranches(it.pol, long, excluded, len(vals))
		cost[r] = make([]float64, len(cols))
		for c, b := range cols {
			d := (it.obs - vals[b]) / it.sigma
			cost[r][c] = math.Min(d*d, maxCost) // also NaN → maxCost: the assignment's sums stay finite
			if !(cost[r][c] <= maxCost) {
				cost[r][c] = maxCost
			}
			if !allowed[b] {
				cost[r][c] += forbidden
			}
		}
	}
	for r, c := range hungarian(cost) {
		out[free[r]] = cols[c]
	}
	return out
}

// allowedBranches marks the branches an item of hint pol may take: those
// not excluded and of its character (or the nearest in character when
// none has it); every branch not excluded without a hint.
func allowedBranches(pol Polarization, long []float64, excluded []bool, n int) []bool {
	out := make([]bool, n)
	bestB, bestScore, any := -1, -1.0, false
	for b := 0; b < n; b++ {
		if excluded != nil && excluded[b] {
			continue
		}
		if pol == AnyPolarization || long == nil {
			out[b] = true
			continue
		}
		score := long[b]
		if pol == Transverse {
			score = 1 - long[b]
		}
		if score > 0.5 || (pol == Longitudinal && score == 0.5) {
			out[b], any = true, true
		}
		if score > bestScore {
			bestB, bestScore = b, score
		}
	}
	if pol != AnyPolarization && long != nil && !any && bestB >= 0 {
		out[bestB] = true
	}
	return out
}

// hungarian solves the rectangular assignment problem: for the k × m cost
// matrix (k ≤ m) it returns, per row, the distinct column of a minimum
// total cost (the Hungarian method with potentials, O(k²m); common
// practice, after Kuhn 1955 and J. Munkres, J. SIAM 5, 32 (1957)). Ties
// go to the lower column.
func hungarian(cost [][]float64) []int {
	k := len(cost)
	m := len(cost[0])
	u := make([]float64, k+1)
	v := make([]float64, m+1)
	p := make([]int, m+1) // p[j]: the row (1-based) holding column j; 0 free
	way := make([]int, m+1)
	minv := make([]float64, m+1)
	used := make([]bool, m+1)
	for i := 1; i <= k; i++ {
		p[0] = i
		j0 := 0
		for j := range minv {
			minv[j], used[j] = math.Inf(1), false
		}
		for {
			used[j0] = true
			i0, delta, j1 := p[j0], math.Inf(1), 0
			for j := 1; j <= m; j++ {
				if used[j] {
					continue
				}
				if cur := cost[i0-1][j-1] - u[i0] - v[j]; cur < minv[j] {
					minv[j], way[j] = cur, j0
				}
				if minv[j] < delta {
					delta, j1 = minv[j], j
				}
			}
			for j := 0; j <= m; j++ {
				if used[j] {
					u[p[j]] += delta
					v[j] -= delta
				} else {
					minv[j] -= delta
				}
			}
			if j1 == 0 {
				break // no column left (cannot happen with k ≤ m and finite costs)
			}
			j0 = j1
			if p[j0] == 0 {
				break
			}
		}
		for j0 != 0 {
			j1 := way[j0]
			p[j0] = p[j1]
			j0 = j1
		}
	}
	out := make([]int, k)
	for j := 1; j <= m; j++ {
		if p[j] > 0 {
			out[p[j]-1] = j - 1
		}
	}
	return out
}
