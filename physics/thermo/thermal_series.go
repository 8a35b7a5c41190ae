package thermo

import (
	"context"
	"math"

	"github.com/materials-lab/modegrid/physics/internal/parallel"
)

// The exact mode sum Σ_i w_i f(hν_i/kT) costs one exponential and one
// logarithm per mode and temperature: 6.6·10⁸ of each for a 48³ grid of a
// two-site crystal at 1 000 temperatures. modeTree gets the same sums, to
// rounding, at a few hundred short series per temperature.
//
// The modes are grouped by frequency into a binary tree whose nodes store
// the moments m_k = Σ w δᵏ of the scaled offsets δ = (ν − c)/H ∈ [−1, 1]
// from the node's centre c (H its half-width). Every f needed is a
// function of n(x) = 1/(eˣ − 1), whose Taylor coefficients about x_c follow
// from the Riccati equation n′ = −n − n²: with b_k = a_k Xᵏ (X = κH, κ =
// h/kT),
//
//	(k+1) b_{k+1} = −X (b_k + Σ_{j≤k} b_j b_{k−j}),
//
// so Σ w f(κν) = Σ_k (coefficient)_k · m_k over a node. n has poles at x = 0
// and x = 2πi·m, so the series converges at least as fast as (H/c)ᵏ, and
// keeping X ≤ ½ bounds the cancellation between terms (the growth of e^(−x)
// across the node). A node with H ≤ c/8 and X ≤ ½ is summed by
// treeTerms+1 terms with a truncation error below 1e-15 of its value
// (Cauchy's estimate on a circle of radius 4X); other nodes are split, and
// leaves that still fail are summed mode by mode. Nodes whose lowest x
// lies more than treeSkipX above the lowest x of all modes are skipped:
// their share of any sum is below e^(−treeSkipX) times the number of modes
// and the frequency range, far below rounding.

const (
	treeTerms     = 26
	treeMaxX      = 0.5
	treeMaxR      = 0.125
	treeSkipX     = 80.0
	treeMaxLeaves = 4096
	treeMoments   = treeTerms + 3 // the heat capacity needs m up to K+2
)

// treeNode is one node of a modeTree: the frequency range its modes
// actually span (THz) and how many it holds.
type treeNode struct {
	lo, hi float64
	count  int
}

// modeTree is the frequency tree of a modeSet; levels[0] are the leaves,
// the last level the root. nu and ch are the set's modes reordered by leaf,
// leaf l holding modes start[l] … start[l+1]−1.
type modeTree struct {
	nc     int
	levels [][]treeNode
	mom    [][]float64 // per level: [(node·nc + channel)·treeMoments + k]
	nu, ch []float64
	start  []int
	numin  float64
}

// seriesScratch is per-goroutine workspace for modeTree.eval.
type seriesScratch struct {
	b, d  [treeTerms + 1]float64
	stack [][2]int
}

// binomial[k][j] = C(k, j) for k < treeMoments.
var binomial = func() [treeMoments][treeMoments]float64 {
	var c [treeMoments][treeMoments]float64
	for k := 0; k < treeMoments; k++ {
		c[k][0] = 1
		for j := 1; j <= k; j++ {
			c[k][j] = c[k-1][j-1] + c[k-1][j]
		}
	}
	return c
}()

// modePoll is the number of modes between two polls of the context in the
// linear passes over every mode of a grid (millions on a large one).
const modePoll = 1 << 14

// newModeTree builds the tree of set (which must hold at least one mode),
// the leaves' moments on all cores.
func newModeTree(ctx context.Context, set *modeSet) (*modeTree, error) {
	t := &modeTree{nc: set.nc, numin: math.Inf(1)}
	numax := 0.0
	for _, f := range set.nu {
		t.numin, numax = min(t.numin, f), max(numax, f)
	}
	nleaf := 1
	for nleaf < treeMaxLeaves && nleaf*32 < len(set.nu) {
		nleaf *= 2
	}
	bins := leafBins{n: nleaf, perTHz: float64(nleaf) / numax}
	if err := t.sortIntoLeaves(ctx, set, bins); err != nil {
		return nil, err
	}
	leaves, mom, err := t.leafMoments(ctx, nleaf)
	if err != nil {
		return nil, err
	}
	t.levels = append(t.levels, leaves)
	t.mom = append(t.mom, mom)
	for len(t.levels[len(t.levels)-1]) > 1 {
		nodes, pm := t.parentLevel(t.levels[len(t.levels)-1], t.mom[len(t.mom)-1])
		t.levels = append(t.levels, nodes)
		t.mom = append(t.mom, pm)
	}
	return t, nil
}

// leafBins maps a frequency to its leaf: n equal bins from 0 to the
// highest mode, the highest mode itself in the last.
type leafBins struct {
	n      int
	perTHz float64
}

// of is the leaf of frequency f (THz).
func (b leafBins) of(f float64) int { return min(b.n-1, int(f*b.perTHz)) }

// sortIntoLeaves fills t.start, t.nu and t.ch: the modes of set in a
// counting sort by leaf (stable, so the order within a leaf is the set's).
func (t *modeTree) sortIntoLeaves(ctx context.Context, set *modeSet, bins leafBins) error {
	nc, nleaf := t.nc, bins.n
	t.start = make([]int, nleaf+1)
	for i, f := range set.nu {
		if i%modePoll == 0 && ctx.Err() != nil {
			return ctx.Err()
		}
		t.start[bins.of(f)+1]++
	}
	for l := 0; l < nleaf; l++ {
		t.start[l+1] += t.start[l]
	}
	t.nu = make([]float64, len(set.nu))
	t.ch = make([]float64, len(set.ch))
	fill := append([]int(nil), t.start[:nleaf]...)
	for i, f := range set.nu {
		if i%modePoll == 0 && ctx.Err() != nil {
			return ctx.Err()
		}
		l := bins.of(f)
		j := fill[l]
		fill[l]++
		t.nu[j] = f
		copy(t.ch[j*nc:(j+1)*nc], set.ch[i*nc:(i+1)*nc])
	}
	return nil
}

// leafMoments returns the leaves (the range their modes span) and their
// moments, [(leaf·nc + channel)·treeMoments + k], computed on all cores.
func (t *modeTree) leafMoments(ctx context.Context, nleaf int) ([]treeNode, []float64, error) {
	nc := t.nc
	leaves := make([]treeNode, nleaf)
	mom := make([]float64, nleaf*nc*treeMoments)
	err := parallel.Slices(ctx, nleaf, 16, parallel.SliceCount(nleaf, 16), func(_, lo, hi int) {
		for l := lo; l < hi; l++ {
			leaves[l] = t.leafMoment(l, mom[l*nc*treeMoments:(l+1)*nc*treeMoments])
		}
	})
	if err != nil {
		return nil, nil, err
	}
	return leaves, mom, nil
}

// leafMoment returns leaf l's node and adds its moments to lm (nc rows of
// treeMoments, zero on entry).
func (t *modeTree) leafMoment(l int, lm []float64) treeNode {
	a, b := t.start[l], t.start[l+1]
	nd := treeNode{lo: math.Inf(1), hi: math.Inf(-1), count: b - a}
	for _, f := range t.nu[a:b] {
		nd.lo, nd.hi = min(nd.lo, f), max(nd.hi, f)
	}
	if nd.count == 0 {
		return nd
	}
	c, h := (nd.lo+nd.hi)/2, (nd.hi-nd.lo)/2
	inv := 0.0
	if h > 0 {
		inv = 1 / h
	}
	i := a
	if t.nc == 1 {
		i = t.addMomentsBy4(lm[:treeMoments], a, b, c, inv)
	}
	t.addMoments(lm, i, b, c, inv)
	return nd
}

// addMomentsBy4 adds to row the moments of single-channel modes a, a+1, …
// four at a time (four independent chains of multiplications keep the
// pipeline full) and returns the first mode left over (fewer than four).
func (t *modeTree) addMomentsBy4(row []float64, a, b int, c, inv float64) int {
	i := a
	for ; i+4 <= b; i += 4 {
		d0, d1, d2, d3 := (t.nu[i]-c)*inv, (t.nu[i+1]-c)*inv, (t.nu[i+2]-c)*inv, (t.nu[i+3]-c)*inv
		p0, p1, p2, p3 := t.ch[i], t.ch[i+1], t.ch[i+2], t.ch[i+3]
		for k := range row {
			row[k] += (p0 + p1) + (p2 + p3)
			p0, p1, p2, p3 = p0*d0, p1*d1, p2*d2, p3*d3
		}
	}
	return i
}

// addMoments adds to lm the moments of modes a … b−1 one by one, every
// channel, about centre c with inverse half-width inv.
func (t *modeTree) addMoments(lm []float64, a, b int, c, inv float64) {
	nc := t.nc
	var pow [treeMoments]float64
	for i := a; i < b; i++ {
		delta := (t.nu[i] - c) * inv
		pow[0] = 1
		for k := 1; k < treeMoments; k++ {
			pow[k] = pow[k-1] * delta
		}
		for ch, w := range t.ch[i*nc : (i+1)*nc] {
			row := lm[ch*treeMoments : (ch+1)*treeMoments]
			for k, p := range pow {
				row[k] += w * p
			}
		}
	}
}

// parentLevel returns the level above kids (with moments kmom): pairs of
// children merged, their ranges joined and their moments shifted to the
// parent's centre and scale.
func (t *modeTree) parentLevel(kids []treeNode, kmom []float64) ([]treeNode, []float64) {
	nc := t.nc
	nodes := make([]treeNode, (len(kids)+1)/2)
	pm := make([]float64, len(nodes)*nc*treeMoments)
	for i := range nodes {
		nd := treeNode{lo: math.Inf(1), hi: math.Inf(-1)}
		for _, kid := range kids[2*i : min(2*i+2, len(kids))] {
			if kid.count > 0 {
				nd.lo, nd.hi = math.Min(nd.lo, kid.lo), math.Max(nd.hi, kid.hi)
				nd.count += kid.count
			}
		}
		nodes[i] = nd
		if nd.count == 0 {
			continue
		}
		for ki := 2 * i; ki < min(2*i+2, len(kids)); ki++ {
			if kids[ki].count == 0 {
				continue
			}
			t.shiftMoments(nd, kids[ki], kmom[ki*nc*treeMoments:(ki+1)*nc*treeMoments], pm[i*nc*treeMoments:(i+1)*nc*treeMoments])
		}
	}
	return nodes, pm
}

// shiftMoments adds to dst (the parent's nc rows of moments) the moments
// src of one child, re-expressed about the parent's centre and scale:
// with δ_parent = a + b δ_kid, m_k = Σ_j C(k, j) a^(k−j) b^j m_j(kid).
func (t *modeTree) shiftMoments(parent, kid treeNode, src, dst []float64) {
	cp, hp := (parent.lo+parent.hi)/2, (parent.hi-parent.lo)/2
	a, b := 0.0, 0.0
	if hp > 0 {
		a = ((kid.lo+kid.hi)/2 - cp) / hp
		b = (kid.hi - kid.lo) / 2 / hp
	}
	var apow, bpow [treeMoments]float64
	apow[0], bpow[0] = 1, 1
	for k := 1; k < treeMoments; k++ {
		apow[k], bpow[k] = apow[k-1]*a, bpow[k-1]*b
	}
	for ch := 0; ch < t.nc; ch++ {
		s := src[ch*treeMoments : (ch+1)*treeMoments]
		d := dst[ch*treeMoments : (ch+1)*treeMoments]
		for k := range d {
			sum := 0.0
			for j := 0; j <= k; j++ {
				sum += binomial[k][j] * apow[k-j] * bpow[j] * s[j]
			}
			d[k] += sum
		}
	}
}

// eval adds the sums of directSums at κ = h/kT over all modes to out.
func (t *modeTree) eval(kappa float64, out []float64, sc *seriesScratch) {
	xref := kappa * t.numin
	top := len(t.levels) - 1
	sc.stack = append(sc.stack[:0], [2]int{top, 0})
	for len(sc.stack) > 0 {
		ref := sc.stack[len(sc.stack)-1]
		sc.stack = sc.stack[:len(sc.stack)-1]
		lv, i := ref[0], ref[1]
		nd := t.levels[lv][i]
		if nd.count == 0 || kappa*nd.lo-xref > treeSkipX {
			continue
		}
		c, h := (nd.lo+nd.hi)/2, (nd.hi-nd.lo)/2
		switch {
		case h <= treeMaxR*c && kappa*h <= treeMaxX:
			t.series(lv, i, kappa, c, h, out, sc)
		case lv == 0:
			a, b := t.start[i], t.start[i+1]
			directSums(kappa, t.nu[a:b], t.ch[a*t.nc:b*t.nc], t.nc, out)
		default:
			for ki := 2 * i; ki < min(2*i+2, len(t.levels[lv-1])); ki++ {
				sc.stack = append(sc.stack, [2]int{lv - 1, ki})
			}
		}
	}
}

// series adds the Taylor-series sums of node (lv, i) with centre c and
// half-width h.
func (t *modeTree) series(lv, i int, kappa, c, h float64, out []float64, sc *seriesScratch) {
	xc, bigX := kappa*c, kappa*h
	if xc > 745 {
		return
	}
	b, d := &sc.b, &sc.d
	b[0] = 1 / math.Expm1(xc)
	for k := 0; k <= treeTerms; k++ {
		q := 0.0
		for j := 0; j < (k+1)/2; j++ {
			q += b[j] * b[k-j]
		}
		q *= 2
		if k%2 == 0 {
			q += b[k/2] * b[k/2]
		}
		d[k] = -(b[k] + q) // Taylor coefficients of n′, scaled like b
		if k < treeTerms {
			b[k+1] = bigX * d[k] / float64(k+1)
		}
	}
	var l0 float64
	if xc > math.Ln2 {
		l0 = math.Log1p(-math.Exp(-xc))
	} else {
		l0 = math.Log(-math.Expm1(-xc))
	}
	base := (i * t.nc) * treeMoments
	m := t.mom[lv][base : base+treeMoments]
	var un, lg, cv float64
	for k := 0; k <= treeTerms; k++ {
		un += b[k] * (c*m[k] + h*m[k+1])
		cv += d[k] * (c*c*m[k] + 2*c*h*m[k+1] + h*h*m[k+2])
		if k > 0 {
			lg += b[k-1] * m[k] / float64(k)
		}
	}
	out[0] += un
	out[1] += l0*m[0] + bigX*lg
	out[2] -= kappa * kappa * cv
	for ch := 1; ch < t.nc; ch++ {
		mc := t.mom[lv][base+ch*treeMoments : base+(ch+1)*treeMoments]
		s := 0.0
		for k := 0; k <= treeTerms; k++ {
			s += b[k] * mc[k]
		}
		out[2+ch] += s
	}
}
