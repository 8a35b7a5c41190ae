package spectra

import (
	"context"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/parallel"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// This file holds the linear simplex (tetrahedron) method: how a regular
// q-point grid is cut into simplices, and the exact state count and corner
// weights of a band whose frequency is linear inside one simplex.
//
// Sources: O. Jepsen & O. K. Andersen, Solid State Commun. 9, 1763 (1971)
// and G. Lehmann & M. Taut, Phys. Status Solidi B 54, 469 (1972) for the
// linear tetrahedron method; P. E. Blöchl, O. Jepsen & O. K. Andersen,
// Phys. Rev. B 49, 16223 (1994), Appendix B, for the state count n(ε) and the
// corner integration weights w_j(ε) (used here without the curvature
// correction, which only matters for integrals against the occupation, not
// for the density of states). The triangle (2D) and segment (1D) cases are
// the same construction one dimension down: the occupied part of a simplex
// is itself a simplex (or the complement of one), whose measure and
// barycentric centroid give n and w_j.

// The functions below take the corner frequencies of one simplex sorted
// ascending (e[0] ≤ e[1] ≤ …) and its zone weight v.
//
// simplexCount returns n(x): the states of the simplex below x, for a band
// linear inside it. simplexCorners writes the corner weights w_j(x) = the
// integral over the occupied part of the barycentric coordinate of corner j,
// so Σ_j w_j = n and a quantity known at the corners (a site weight) is
// integrated with the same linear interpolation as the frequency.
//
// Each piece is only evaluated for e[k] ≤ x < e[k+1], so the divisors in it
// are never zero, whatever degeneracies the corners have.

// segmentCount is n(x) of a 1D segment.
func segmentCount(e *[4]float64, v, x float64) float64 {
	switch {
	case x <= e[0]:
		return 0
	case x >= e[1]:
		return v
	}
	return v * (x - e[0]) / (e[1] - e[0])
}

// segmentCorners writes the corner weights of a 1D segment: the occupied
// part [e0, x] is a segment of length fraction t whose centroid has
// barycentric coordinates (1 − t/2, t/2).
func segmentCorners(e *[4]float64, v, x float64, w *[4]float64) {
	switch {
	case x <= e[0]:
		w[0], w[1] = 0, 0
		return
	case x >= e[1]:
		w[0], w[1] = v/2, v/2
		return
	}
	t := (x - e[0]) / (e[1] - e[0])
	w[0] = v * t * (2 - t) / 2
	w[1] = v * t * t / 2
}

// triangleCount is n(x) of a 2D triangle.
func triangleCount(e *[4]float64, v, x float64) float64 {
	switch {
	case x <= e[0]:
		return 0
	case x >= e[2]:
		return v
	case x < e[1]:
		t := x - e[0]
		return v * t * t / ((e[1] - e[0]) * (e[2] - e[0]))
	}
	s := e[2] - x
	return v - v*s*s/((e[2]-e[0])*(e[2]-e[1]))
}

// triangleCorners writes the corner weights of a 2D triangle. Below e1 the
// occupied part is the triangle (corner 0, t₁ along edge 0–1, t₂ along
// 0–2); above e1 the empty part is the triangle at corner 2.
func triangleCorners(e *[4]float64, v, x float64, w *[4]float64) {
	switch {
	case x <= e[0]:
		w[0], w[1], w[2] = 0, 0, 0
	case x >= e[2]:
		w[0], w[1], w[2] = v/3, v/3, v/3
	case x < e[1]:
		t1 := (x - e[0]) / (e[1] - e[0])
		t2 := (x - e[0]) / (e[2] - e[0])
		a := v * t1 * t2 / 3
		w[0] = a * (3 - t1 - t2)
		w[1] = a * t1
		w[2] = a * t2
	default:
		s0 := (e[2] - x) / (e[2] - e[0])
		s1 := (e[2] - x) / (e[2] - e[1])
		a := v * s0 * s1 / 3
		w[0] = v/3 - a*s0
		w[1] = v/3 - a*s1
		w[2] = v/3 - a*(3-s0-s1)
	}
}

// tetraCount is n(x) of a 3D tetrahedron (Blöchl, Jepsen & Andersen 1994,
// Appendix B).
func tetraCount(e *[4]float64, v, x float64) float64 {
	switch {
	case x <= e[0]:
		return 0
	case x >= e[3]:
		return v
	case x < e[1]:
		t := x - e[0]
		return v * t * t * t / ((e[1] - e[0]) * (e[2] - e[0]) * (e[3] - e[0]))
	case x < e[2]:
		e21, e31, e41 := e[1]-e[0], e[2]-e[0], e[3]-e[0]
		e32, e42 := e[2]-e[1], e[3]-e[1]
		t := x - e[1]
		return v / (e31 * e41) * (e21*e21 + 3*e21*t + 3*t*t - (e31+e42)/(e32*e42)*t*t*t)
	}
	s := e[3] - x
	return v - v*s*s*s/((e[3]-e[0])*(e[3]-e[1])*(e[3]-e[2]))
}

// tetraCorners writes the corner weights of a 3D tetrahedron (Blöchl,
// Jepsen & Andersen 1994, Appendix B, without the correction term).
func tetraCorners(e *[4]float64, v, x float64, w *[4]float64) {
	switch {
	case x <= e[0]:
		*w = [4]float64{}
	case x >= e[3]:
		*w = [4]float64{v / 4, v / 4, v / 4, v / 4}
	case x < e[1]:
		t1 := (x - e[0]) / (e[1] - e[0])
		t2 := (x - e[0]) / (e[2] - e[0])
		t3 := (x - e[0]) / (e[3] - e[0])
		c := v * t1 * t2 * t3 / 4
		*w = [4]float64{c * (4 - t1 - t2 - t3), c * t1, c * t2, c * t3}
	case x < e[2]:
		e31, e41 := e[2]-e[0], e[3]-e[0]
		e32, e42 := e[2]-e[1], e[3]-e[1]
		d1, d2, d3, d4 := x-e[0], x-e[1], e[2]-x, e[3]-x
		c1 := v / 4 * d1 * d1 / (e41 * e31)
		c2 := v / 4 * d1 * d2 * d3 / (e41 * e32 * e31)
		c3 := v / 4 * d2 * d2 * d4 / (e42 * e32 * e41)
		w[0] = c1 + (c1+c2)*d3/e31 + (c1+c2+c3)*d4/e41
		w[1] = c1 + c2 + c3 + (c2+c3)*d3/e32 + c3*d4/e42
		w[2] = (c1+c2)*d1/e31 + (c2+c3)*d2/e32
		w[3] = (c1+c2+c3)*d1/e41 + c3*d2/e42
	default:
		s1 := (e[3] - x) / (e[3] - e[0])
		s2 := (e[3] - x) / (e[3] - e[1])
		s3 := (e[3] - x) / (e[3] - e[2])
		c := v * s1 * s2 * s3 / 4
		*w = [4]float64{v/4 - c*s1, v/4 - c*s2, v/4 - c*s3, v/4 - c*(4-s1-s2-s3)}
	}
}

// sortValues sorts the first n (2, 3 or 4) values of e ascending with a
// branch-free min/max network (the order of a simplex's corner
// frequencies is unpredictable, so branches would mispredict half the
// time).
func sortValues(e *[4]float64, n int) {
	switch n {
	case 2:
		e[0], e[1] = min(e[0], e[1]), max(e[0], e[1])
	case 3:
		a, b, c := e[0], e[1], e[2]
		a, b = min(a, b), max(a, b)
		b, c = min(b, c), max(b, c)
		a, b = min(a, b), max(a, b)
		e[0], e[1], e[2] = a, b, c
	default:
		a, b, c, d := e[0], e[1], e[2], e[3]
		a, b = min(a, b), max(a, b)
		c, d = min(c, d), max(c, d)
		a, c = min(a, c), max(a, c)
		b, d = min(b, d), max(b, d)
		b, c = min(b, c), max(b, c)
		e[0], e[1], e[2], e[3] = a, b, c, d
	}
}

// sort4 sorts the first n (2, 3 or 4) values of e ascending, carrying the
// corner identities in id along.
func sort4(e *[4]float64, id *[4]uint8, n int) {
	cs := func(i, j int) {
		if e[j] < e[i] {
			e[i], e[j] = e[j], e[i]
			id[i], id[j] = id[j], id[i]
		}
	}
	switch n {
	case 2:
		cs(0, 1)
	case 3:
		cs(0, 1)
		cs(1, 2)
		cs(0, 1)
	default:
		cs(0, 1)
		cs(2, 3)
		cs(0, 2)
		cs(1, 3)
		cs(1, 2)
	}
}

// cumGrid is a set of equally spaced abscissae x_j = x0 + j·dx, j < n, at
// which cumulative state counts N(x_j) are accumulated. The abscissae are
// computed from an anchor x_a = x0 + a·dx that is represented exactly, so
// that a mode exactly on the anchor (a zero mode on a window starting at 0)
// falls on the same side whatever rounding produced dx.
type cumGrid struct {
	x0, dx float64
	n      int
	inv    float64 // 1/dx, set by newCumGrid
	anchor float64 // x_a, exact
	a      float64 // anchor index
}

func newCumGrid(x0, dx float64, n int) cumGrid {
	return cumGrid{x0: x0, dx: dx, n: n, inv: 1 / dx, anchor: x0}
}

// newAnchoredCumGrid is newCumGrid with x_a = anchor exactly (x0 =
// anchor − a·dx).
func newAnchoredCumGrid(anchor, dx float64, a, n int) cumGrid {
	return cumGrid{x0: anchor - float64(a)*dx, dx: dx, n: n, inv: 1 / dx, anchor: anchor, a: float64(a)}
}

// scaled is the grid with every abscissa times p, a power of two (exact).
func (s cumGrid) scaled(p float64) cumGrid {
	return cumGrid{x0: s.x0 * p, dx: s.dx * p, n: s.n, inv: s.inv / p, anchor: s.anchor * p, a: s.a}
}

func (s cumGrid) at(j int) float64 { return s.anchor + (float64(j)-s.a)*s.dx }

// from is the smallest j with x_j ≥ e, in [0, n]. (Integer truncation
// instead of math.Ceil: this runs four times per simplex and band.)
func (s cumGrid) from(e float64) int {
	f := (e-s.anchor)*s.inv + s.a
	switch {
	case !(f > 0): // also NaN
		return 0
	case f >= float64(s.n):
		return s.n
	}
	j := int(f)
	if float64(j) < f {
		j++
	}
	return j
}

// above is the smallest j with x_j > e, in [0, n].
func (s cumGrid) above(e float64) int {
	f := (e-s.anchor)*s.inv + s.a
	switch {
	case !(f >= 0):
		return 0
	case f >= float64(s.n-1):
		return s.n
	}
	return int(f) + 1
}

// cumAcc accumulates N(x_j) on a cumGrid: N(x_j) = val[j] + Σ_{i≤j} step[i].
// Pieces of the spectrum that lie wholly below x_j enter through step, so
// each contribution costs only the abscissae it actually spans. With ns > 0
// it also accumulates per-site counts, point-major: sval[j*ns+s]. cut, when
// hasCut, is a frequency below which states are dropped: cutTot and cutSite
// collect N(cut) for the final subtraction.
type cumAcc struct {
	g           cumGrid
	val, step   []float64
	ns          int
	sval, sstep []float64
	hasCut      bool
	cut         float64
	cutTot      float64
	cutSite     []float64

	// scratch for one simplex-band (no per-simplex allocation)
	sw [4][]float64
}

func newCumAcc(g cumGrid, ns int, hasCut bool, cut float64) *cumAcc {
	a := &cumAcc{g: g, val: make([]float64, g.n), step: make([]float64, g.n+1), ns: ns, hasCut: hasCut, cut: cut}
	if ns > 0 {
		a.sval = make([]float64, g.n*ns)
		a.sstep = make([]float64, (g.n+1)*ns)
		a.cutSite = make([]float64, ns)
		for c := range a.sw {
			a.sw[c] = make([]float64, ns)
		}
	}
	return a
}

// merge adds b into a.
func (a *cumAcc) merge(b *cumAcc) {
	for j, x := range b.val {
		a.val[j] += x
	}
	for j, x := range b.step {
		a.step[j] += x
	}
	for j, x := range b.sval {
		a.sval[j] += x
	}
	for j, x := range b.sstep {
		a.sstep[j] += x
	}
	a.cutTot += b.cutTot
	for s, x := range b.cutSite {
		a.cutSite[s] += x
	}
}

// totals resolves the accumulated counts: N(x_j) for every j and, with
// sites, Ns(x_j) point-major. States below the cut are removed: N is 0 for
// x_j < cut and N(x_j) − N(cut) above it.
func (a *cumAcc) totals() (tot, site []float64) {
	tot = make([]float64, a.g.n)
	run := 0.0
	for j := range tot {
		run += a.step[j]
		tot[j] = a.val[j] + run
	}
	if a.ns > 0 {
		site = make([]float64, a.g.n*a.ns)
		runs := make([]float64, a.ns)
		for j := 0; j < a.g.n; j++ {
			for s := 0; s < a.ns; s++ {
				runs[s] += a.sstep[j*a.ns+s]
				site[j*a.ns+s] = a.sval[j*a.ns+s] + runs[s]
			}
		}
	}
	if a.hasCut {
		for j := range tot {
			below := a.g.at(j) < a.cut
			if below {
				tot[j] = 0
			} else {
				tot[j] -= a.cutTot
			}
			for s := 0; s < a.ns; s++ {
				if below {
					site[j*a.ns+s] = 0
				} else {
					site[j*a.ns+s] -= a.cutSite[s]
				}
			}
		}
	}
	return tot, site
}

// addSimplex adds one band of one simplex with sorted corner frequencies e
// (d+1 of them) and zone weight v to the total count.
func (a *cumAcc) addSimplex(dim int, e *[4]float64, v float64) {
	g := a.g
	val := a.val
	last := e[dim]
	if a.hasCut && e[0] < a.cut {
		a.cutTot += simplexCount(dim, e, v, a.cut)
	}
	j0 := g.from(e[0])
	jEnd := g.from(last)
	a.step[jEnd] += v
	if jEnd == j0 {
		return
	}
	switch dim {
	case 1:
		c := v / (e[1] - e[0])
		for j := j0; j < jEnd; j++ {
			val[j] += c * (g.at(j) - e[0])
		}
	case 2:
		j1 := g.from(e[1])
		if j1 > j0 {
			c := v / ((e[1] - e[0]) * (e[2] - e[0]))
			for j := j0; j < j1; j++ {
				t := g.at(j) - e[0]
				val[j] += c * t * t
			}
		}
		if jEnd > j1 {
			c := v / ((e[2] - e[0]) * (e[2] - e[1]))
			for j := j1; j < jEnd; j++ {
				s := e[2] - g.at(j)
				val[j] += v - c*s*s
			}
		}
	default:
		j1, j2 := g.from(e[1]), g.from(e[2])
		if j1 > j0 {
			c := v / ((e[1] - e[0]) * (e[2] - e[0]) * (e[3] - e[0]))
			for j := j0; j < j1; j++ {
				t := g.at(j) - e[0]
				val[j] += c * t * t * t
			}
		}
		if j2 > j1 {
			e21, e31, e41 := e[1]-e[0], e[2]-e[0], e[3]-e[0]
			e32, e42 := e[2]-e[1], e[3]-e[1]
			f := v / (e31 * e41)
			p0, p1, p2 := f*e21*e21, 3*f*e21, 3*f
			p3 := -f * (e31 + e42) / (e32 * e42)
			for j := j1; j < j2; j++ {
				t := g.at(j) - e[1]
				val[j] += p0 + t*(p1+t*(p2+t*p3))
			}
		}
		if jEnd > j2 {
			c := v / ((e[3] - e[0]) * (e[3] - e[1]) * (e[3] - e[2]))
			for j := j2; j < jEnd; j++ {
				s := e[3] - g.at(j)
				val[j] += v - c*s*s*s
			}
		}
	}
}

// addSimplexSites adds one band of one simplex to the per-site counts and
// to the total: a.sw[c] holds the site weights of corner c (in sorted
// order), each summing to 1.
func (a *cumAcc) addSimplexSites(dim int, e *[4]float64, v float64) {
	g := a.g
	ns := a.ns
	nc := dim + 1
	var w [4]float64
	if a.hasCut && e[0] < a.cut {
		simplexCorners(dim, e, v, a.cut, &w)
		for c := 0; c < nc; c++ {
			a.cutTot += w[c]
			for s, x := range a.sw[c] {
				a.cutSite[s] += w[c] * x
			}
		}
	}
	j0 := g.from(e[0])
	jEnd := g.from(e[dim])
	share := v / float64(nc)
	a.step[jEnd] += v
	row := a.sstep[jEnd*ns : jEnd*ns+ns]
	for c := 0; c < nc; c++ {
		for s, x := range a.sw[c] {
			row[s] += share * x
		}
	}
	for j := j0; j < jEnd; j++ {
		simplexCorners(dim, e, v, g.at(j), &w)
		out := a.sval[j*ns : j*ns+ns]
		for c := 0; c < nc; c++ {
			a.val[j] += w[c]
			for s, x := range a.sw[c] {
				out[s] += w[c] * x
			}
		}
	}
}

// addTetraSites is addSimplexSites for tetrahedra with the corner weights
// of tetraCorners evaluated from reciprocals prepared once per tetrahedron
// (the same formulas; TestTetraSitesFast checks them against each other).
func (a *cumAcc) addTetraSites(e *[4]float64, v float64) {
	g := a.g
	ns := a.ns
	if a.hasCut && e[0] < a.cut {
		var w [4]float64
		tetraCorners(e, v, a.cut, &w)
		a.addCornerWeights(&w, a.cutSite)
		a.cutTot += w[0] + w[1] + w[2] + w[3]
	}
	j0, j1, j2, j3 := g.from(e[0]), g.from(e[1]), g.from(e[2]), g.from(e[3])
	q := v / 4
	a.step[j3] += v
	row := a.sstep[j3*ns : j3*ns+ns]
	for c := 0; c < 4; c++ {
		for s, x := range a.sw[c] {
			row[s] += q * x
		}
	}
	if j3 == j0 {
		return
	}
	var w [4]float64
	if j1 > j0 {
		i10, i20, i30 := 1/(e[1]-e[0]), 1/(e[2]-e[0]), 1/(e[3]-e[0])
		for j := j0; j < j1; j++ {
			d := g.at(j) - e[0]
			t1, t2, t3 := d*i10, d*i20, d*i30
			c := q * t1 * t2 * t3
			w = [4]float64{c * (4 - t1 - t2 - t3), c * t1, c * t2, c * t3}
			a.val[j] += 4 * c
			a.addCornerWeights(&w, a.sval[j*ns:j*ns+ns])
		}
	}
	if j2 > j1 {
		e31, e41, e32, e42 := e[2]-e[0], e[3]-e[0], e[2]-e[1], e[3]-e[1]
		i31, i41, i32, i42 := 1/e31, 1/e41, 1/e32, 1/e42
		k1, k2, k3 := q*i41*i31, q*i41*i32*i31, q*i42*i32*i41
		for j := j1; j < j2; j++ {
			x := g.at(j)
			d1, d2, d3, d4 := x-e[0], x-e[1], e[2]-x, e[3]-x
			c1, c2, c3 := k1*d1*d1, k2*d1*d2*d3, k3*d2*d2*d4
			c12, c123, c23 := c1+c2, c1+c2+c3, c2+c3
			w = [4]float64{
				c1 + c12*d3*i31 + c123*d4*i41,
				c123 + c23*d3*i32 + c3*d4*i42,
				c12*d1*i31 + c23*d2*i32,
				c123*d1*i41 + c3*d2*i42,
			}
			a.val[j] += w[0] + w[1] + w[2] + w[3]
			a.addCornerWeights(&w, a.sval[j*ns:j*ns+ns])
		}
	}
	if j3 > j2 {
		i30, i31, i32 := 1/(e[3]-e[0]), 1/(e[3]-e[1]), 1/(e[3]-e[2])
		for j := j2; j < j3; j++ {
			d := e[3] - g.at(j)
			s1, s2, s3 := d*i30, d*i31, d*i32
			c := q * s1 * s2 * s3
			w = [4]float64{q - c*s1, q - c*s2, q - c*s3, q - c*(4-s1-s2-s3)}
			a.val[j] += 4*q - 4*c
			a.addCornerWeights(&w, a.sval[j*ns:j*ns+ns])
		}
	}
}

// addCornerWeights adds Σ_c w[c]·sw[c][s] to out[s].
func (a *cumAcc) addCornerWeights(w *[4]float64, out []float64) {
	s0, s1, s2, s3 := a.sw[0], a.sw[1], a.sw[2], a.sw[3]
	for s := range out {
		out[s] += w[0]*s0[s] + w[1]*s1[s] + w[2]*s2[s] + w[3]*s3[s]
	}
}

func simplexCount(dim int, e *[4]float64, v, x float64) float64 {
	switch dim {
	case 1:
		return segmentCount(e, v, x)
	case 2:
		return triangleCount(e, v, x)
	}
	return tetraCount(e, v, x)
}

func simplexCorners(dim int, e *[4]float64, v, x float64, w *[4]float64) {
	switch dim {
	case 1:
		segmentCorners(e, v, x, w)
	case 2:
		triangleCorners(e, v, x, w)
	default:
		tetraCorners(e, v, x, w)
	}
}

// tetraAccumulate runs the linear simplex method over every cell of the
// grid of g (frequencies times scale), spread over all cores with one
// accumulator per worker, and returns the merged accumulator. With sites it
// also integrates the site weights of g (which sum to 1 over the sites of
// a mode, to rounding; ComputeDOS takes the total as the sum of the sites).
func tetraAccumulate(ctx context.Context, g *physics.GridModes, set mesh.Simplices, scale float64, grid cumGrid, sites, hasCut bool, cut float64) (*cumAcc, error) {
	msh := g.Spec.Mesh
	for k := range msh {
		msh[k] = max(msh[k], 1)
	}
	ncell := msh[0] * msh[1] * msh[2]
	nm, ns := g.NModes, g.NSites
	dim := set.Dim
	ncorner := 1 << dim
	accNS := 0
	if sites {
		accNS = ns
	}
	workers := parallel.SliceCount(ncell, tetraChunk)
	accs := make([]*cumAcc, workers)
	for w := range accs {
		accs[w] = newCumAcc(grid, accNS, hasCut, cut)
	}
	err := parallel.Slices(ctx, ncell, tetraChunk, workers, func(worker, lo, hi int) {
		a := accs[worker]
		var idx [8]int
		var e [4]float64
		var id [4]uint8
		freq := g.FreqTHz
		for ci := lo; ci < hi; ci++ {
			ca, cb, cc := ci/(msh[1]*msh[2]), ci/msh[2]%msh[1], ci%msh[2]
			for bits := 0; bits < ncorner; bits++ {
				idx[bits] = mesh.CornerIndex(msh, ca, cb, cc, uint8(bits))
			}
			for _, corners := range set.Corners {
				if !sites {
					var base [4]int
					for c := 0; c <= dim; c++ {
						base[c] = idx[corners[c]] * nm
					}
					for k := 0; k < nm; k++ {
						for c := 0; c <= dim; c++ {
							e[c] = freq[base[c]+k] * scale
						}
						sortValues(&e, dim+1)
						a.addSimplex(dim, &e, set.Weight)
					}
					continue
				}
				for k := 0; k < nm; k++ {
					for c := 0; c <= dim; c++ {
						e[c] = freq[idx[corners[c]]*nm+k] * scale
						id[c] = uint8(c)
					}
					sort4(&e, &id, dim+1)
					for c := 0; c <= dim; c++ {
						p := (idx[corners[id[c]]]*nm + k) * ns
						a.sw[c] = g.SiteWeight[p : p+ns]
					}
					if dim == 3 {
						a.addTetraSites(&e, set.Weight)
					} else {
						a.addSimplexSites(dim, &e, set.Weight)
					}
				}
			}
		}
	})
	if err != nil {
		return nil, err
	}
	for _, b := range accs[1:] {
		accs[0].merge(b)
	}
	return accs[0], nil
}

// tetraChunk is how many grid cells a worker takes at a time.
const tetraChunk = 256
