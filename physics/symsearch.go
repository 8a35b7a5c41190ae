// The symmetry search's inner loops: site mappings through a grid of
// fractional positions, and the force-constant test with early rejection.
//
// The search finds exactly what the direct search (every site against
// every site, every candidate tested on whole dynamical matrices) finds —
// the same operations, translations, permutations and order — in about
// O(sites) per candidate translation instead of O(sites²), and rejects a
// wrong candidate from one block row of D instead of three whole matrices:
//
//   - sites are binned by their fractional coordinates in bins at least as
//     wide as the tolerance allows a match to be off along each axis, so
//     every site within the tolerance of an image lies in the image's bin
//     or a neighbouring one; among those the same test as before decides,
//     and the lowest-numbered free site that passes is taken, as before;
//   - a candidate is first compared on the block row of one site at the
//     first probe, built from that site's terms alone; it is rejected there
//     only when some element misses by more than the tolerance plus a
//     bound on the rounding in which the quick row can differ from the
//     full matrices (so the full test would have rejected it too);
//   - the full test assembles D(Sq) as before and builds U D(q) U† row by
//     row, skipping the rotation's entries that are rounding noise; an
//     element within that rounding bound of the tolerance is recomputed
//     the original way, so every decision is the original one.
//
// The two shortcuts (rowRejects, termsAccept) read D(q) off the compiled
// force-constant terms. A term added to D(q) beyond them (a non-analytic
// long-range part) must enter both, or both must be skipped for models
// that carry one, or they would decide on another matrix than the full
// test's: firstInvariant skips both for a model with a long-range term.

package physics

import (
	"context"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"sort"

	"github.com/materials-lab/modegrid/physics/eigen"
	"github.com/materials-lab/modegrid/physics/lattice"
)

// symProbes is the number of random q-points at which force-constant
// invariance is tested.
const symProbes = 3

// rotNoise is the size below which an entry of a Cartesian rotation
// counts as rounding noise of an exact zero in the quick evaluation of
// C D Cᵀ (cartesianRotation leaves about 1e-16 there); the error this
// makes is part of the slack of the comparisons.
const rotNoise = 1e-14

// symSearch is the state of one symmetry search: the probes and D at
// each, the tolerances, the site bins, and buffers reused by every
// candidate.
type symSearch struct {
	m      *Model
	tolA   float64
	probes [symProbes][3]float64
	dq     [symProbes][]complex128 // D(q) at each probe, full Hermitian
	dmax   float64                 // largest |D_ab| at the probes
	fcTol  float64                 // tolerance on each element (fcTol)
	sites  *siteBins
	termLo []int // m.terms[termLo[i]:termLo[i+1]] are the terms of site i

	// termsAccept's marks of the terms hit and deviations per site row.
	hit []bool
	dev []float64

	// Per candidate, reused.
	rx    [][3]float64 // R x_i
	perm  []int
	shift [][3]int
	used  []bool
	ph    []complex128 // e^{−2πi q'·S_i}
	row   []complex128 // one block row of D(q'): p × ModeCount()
	got   []complex128 // D(q') whole, allocated on first use
	table phaseTable
}

// newSymSearch computes D at the probes (the same probes as always: a
// fixed seed) and sets up the bins and buffers.
func (m *Model) newSymSearch(ctx context.Context, tolA float64) (*symSearch, error) {
	s := &symSearch{m: m, tolA: tolA}
	rng := rand.New(rand.NewPCG(0x5eed, 0x0dd5))
	for k := range s.probes {
		for a := 0; a < m.dim; a++ {
			s.probes[k][a] = rng.Float64() - 0.5
		}
	}
	for k, q := range s.probes {
		var err error
		if s.dq[k], err = m.dynamicalMatrixCtx(ctx, q); err != nil {
			return nil, err
		}
		for _, z := range s.dq[k] {
			s.dmax = math.Max(s.dmax, cmplx.Abs(z))
		}
	}
	s.fcTol = m.fcTol(tolA, s.dmax)
	s.sites = m.newSiteBins(tolA)
	s.termLo = make([]int, m.nsites+1)
	for _, t := range m.terms {
		s.termLo[t.i+1]++
	}
	for i := 0; i < m.nsites; i++ {
		s.termLo[i+1] += s.termLo[i]
	}
	ns, nm := m.nsites, m.ModeCount()
	s.rx = make([][3]float64, ns)
	s.perm = make([]int, ns)
	s.shift = make([][3]int, ns)
	s.used = make([]bool, ns)
	s.ph = make([]complex128, ns)
	s.row = make([]complex128, m.p*nm)
	s.hit = make([]bool, len(m.terms))
	s.dev = make([]float64, ns)
	return s, ctx.Err()
}

// firstInvariant returns the first candidate operation of rotation r (in
// the order of siteMappings: translations x_j − R x_0 for j = 0, 1, …)
// that maps every site onto a site of the same mass and leaves the force
// constants invariant, and whether there is one. It polls ctx per
// candidate and per block row of the full test.
func (s *symSearch) firstInvariant(ctx context.Context, r [3][3]int, cart [3][3]float64) (SymOp, bool, error) {
	m := s.m
	d, ns := m.dim, m.nsites
	for i := 0; i < ns; i++ {
		s.rx[i] = [3]float64{}
		for a := 0; a < d; a++ {
			for b := 0; b < d; b++ {
				s.rx[i][a] += float64(r[a][b]) * m.frac[i][b]
			}
		}
	}
	op := SymOp{Rot: r, Cart: cart, Perm: s.perm, Shift: s.shift, QRot: lattice.InvTransposeInt(r)}
	rot := newRotation(cart, m.p, m.ModeCount())
	for j0 := 0; j0 < ns; j0++ {
		if m.massAmu[j0] != m.massAmu[0] {
			continue
		}
		if err := ctx.Err(); err != nil {
			return SymOp{}, false, err
		}
		var t [3]float64
		for a := 0; a < d; a++ {
			t[a] = m.frac[j0][a] - s.rx[0][a]
			t[a] -= math.Floor(t[a])
		}
		if !s.mapSites(t) {
			continue
		}
		op.Trans = t
		// The shortcuts read D(q) off the force-constant terms alone: a
		// model with a long-range term is decided on whole matrices.
		quick := m.longRange == nil
		if quick && s.rowRejects(&op, &rot) {
			continue
		}
		ok := quick && s.termsAccept(&op, &cart, &rot)
		if !ok {
			var err error
			if ok, err = s.invariant(ctx, &op, &rot); err != nil {
				return SymOp{}, false, err
			}
		}
		if ok {
			op.Perm = append([]int(nil), s.perm...)
			op.Shift = append([][3]int(nil), s.shift...)
			return op, true, nil
		}
	}
	return SymOp{}, false, nil
}

// siteBins sorts the sites into a periodic grid of bins over fractional
// coordinates (CSR layout: the sites of bin b are sites[start[b]:start[b+1]],
// ascending). Along axis k a bin is at least tolA·|b_k|/2π wide (plus a
// margin for rounding): a site within tolA (Cartesian) of a point is
// within that much of it along every fractional axis, since Δf_k =
// b_k·Δr/2π, so it lies in the point's bin or a neighbouring one.
type siteBins struct {
	nb    [3]int     // bins per axis (1 beyond d)
	w     [3]float64 // how far (fractional) a match may be along each axis
	start []int32
	sites []int32
}

// maxBinsPerSite bounds the number of bins to a small multiple of the
// sites: finer bins would only add empty ones to visit.
const maxBinsPerSite = 4

func (m *Model) newSiteBins(tolA float64) *siteBins {
	d, ns := m.dim, m.nsites
	g := &siteBins{nb: [3]int{1, 1, 1}}
	perAxis := math.Pow(float64(maxBinsPerSite*ns), 1/float64(d))
	for k := 0; k < d; k++ {
		g.w[k] = 1.01*tolA*lattice.Norm(m.recip[k])/(2*math.Pi) + 1e-12
		g.nb[k] = max(1, int(math.Min(1/g.w[k], perAxis)))
	}
	count := make([]int32, g.nb[0]*g.nb[1]*g.nb[2]+1)
	bins := make([]int, ns)
	for i := 0; i < ns; i++ {
		var f [3]float64
		copy(f[:], m.frac[i])
		bins[i] = g.index(g.bin(wrap(f, d), d))
		count[bins[i]+1]++
	}
	for b := 1; b < len(count); b++ {
		count[b] += count[b-1]
	}
	g.start = append([]int32(nil), count...)
	g.sites = make([]int32, ns)
	for i, b := range bins { // ascending i: each bin's list stays sorted
		g.sites[count[b]] = int32(i)
		count[b]++
	}
	return g
}

// wrap returns f (d numbers used) wrapped into [0, 1).
func wrap(f [3]float64, d int) [3]float64 {
	for k := 0; k < d; k++ {
		f[k] -= math.Floor(f[k])
	}
	return f
}

// bin returns the bin coordinates of a wrapped fractional position x.
func (g *siteBins) bin(x [3]float64, d int) [3]int {
	var b [3]int
	for k := 0; k < d; k++ {
		b[k] = min(int(x[k]*float64(g.nb[k])), g.nb[k]-1)
	}
	return b
}

func (g *siteBins) index(b [3]int) int { return (b[0]*g.nb[1]+b[1])*g.nb[2] + b[2] }

// near returns the bins along axis k that can hold a site matching a
// point at wrapped coordinate x in bin b: b, and b−1 or b+1
// (periodically) when x lies within the match distance of that side, or
// every bin once when there are fewer than three.
func (g *siteBins) near(k, b int, x float64) (out [3]int, n int) {
	nb := g.nb[k]
	if nb < 3 {
		for y := 0; y < nb; y++ {
			out[y] = y
		}
		return out, nb
	}
	out[0], n = b, 1
	if x-float64(b)/float64(nb) < g.w[k] {
		out[n], n = (b+nb-1)%nb, n+1
	}
	if float64(b+1)/float64(nb)-x < g.w[k] {
		out[n], n = (b+1)%nb, n+1
	}
	return out, n
}

// mapSites builds the site mapping of the candidate (R, t) into s.perm and
// s.shift, as the direct search does: site by site in order, the
// lowest-numbered site not yet taken, of the same mass, within tolA of
// R x_i + t modulo the lattice. It reports false when a site has none.
func (s *symSearch) mapSites(t [3]float64) bool {
	m, g := s.m, s.sites
	d := m.dim
	clear(s.used)
	for i := 0; i < m.nsites; i++ {
		var x [3]float64
		for a := 0; a < d; a++ {
			x[a] = s.rx[i][a] + t[a]
		}
		x = wrap(x, d)
		b := g.bin(x, d)
		n0, c0 := g.near(0, b[0], x[0])
		n1, c1 := g.near(1, b[1], x[1])
		n2, c2 := g.near(2, b[2], x[2])
		best := -1
		var bestCell [3]int
		for _, x0 := range n0[:c0] {
			for _, x1 := range n1[:c1] {
				for _, x2 := range n2[:c2] {
					bi := g.index([3]int{x0, x1, x2})
					for _, j32 := range g.sites[g.start[bi]:g.start[bi+1]] {
						j := int(j32)
						if (best >= 0 && j > best) || s.used[j] || m.massAmu[j] != m.massAmu[i] {
							continue
						}
						if cell, ok := m.siteImage(s.rx[i], t, j, s.tolA); ok {
							best, bestCell = j, cell
						}
					}
				}
			}
		}
		if best < 0 {
			return false
		}
		s.perm[i], s.shift[i], s.used[best] = best, bestCell, true
	}
	return true
}

// siteImage reports whether R x_i + t (rxi + t) lies within tolA
// (Cartesian) of site j modulo the lattice, and the cell it lands in:
// R x_i + t = x_j + cell.
func (m *Model) siteImage(rxi, t [3]float64, j int, tolA float64) ([3]int, bool) {
	var diff, cell [3]float64
	for a := 0; a < m.dim; a++ {
		diff[a] = rxi[a] + t[a] - m.frac[j][a]
		cell[a] = math.Round(diff[a])
		diff[a] -= cell[a]
	}
	if lattice.Norm(m.cart(diff[:m.dim])) >= tolA {
		return [3]int{}, false
	}
	return [3]int{int(cell[0]), int(cell[1]), int(cell[2])}, true
}

// rotation is a Cartesian rotation C prepared for C X Cᵀ on p×p blocks
// of a matrix of order n: for each element (a, b) of the result, the
// products C_ac C_be whose factors are both not rounding noise (|C| ≥
// rotNoise), with the offset c·n + e of X_ce from the block's corner.
type rotation struct {
	p     int
	terms [9][]rotTerm
	cmax  float64 // largest |C_ac|, a, c < p
}

type rotTerm struct {
	w   float64
	off int
}

func newRotation(c [3][3]float64, p, n int) rotation {
	r := rotation{p: p}
	for a := 0; a < p; a++ {
		for x := 0; x < p; x++ {
			r.cmax = math.Max(r.cmax, math.Abs(c[a][x]))
		}
	}
	for a := 0; a < p; a++ {
		for b := 0; b < p; b++ {
			for x := 0; x < p; x++ {
				for e := 0; e < p; e++ {
					if math.Abs(c[a][x]) >= rotNoise && math.Abs(c[b][e]) >= rotNoise {
						r.terms[a*p+b] = append(r.terms[a*p+b], rotTerm{c[a][x] * c[b][e], x*n + e})
					}
				}
			}
		}
	}
	return r
}

// slack bounds, for the element comparisons of one operation, how far the
// quick evaluation of (U D U†)_ab − D(q')_ab can be from the original one:
// the entries dropped as noise (p² products with a factor below rotNoise,
// each at most rotNoise·cmax·dmax), the rounding of two sums of p² products
// of size cmax²·dmax each, the rounding of the difference (elements of D
// at most Λ, the Gershgorin bound) and of its modulus squared (relative
// 3ε, so about 2ε on the modulus). withRow adds
// what a block row summed from the terms (in term order, diagonal blocks
// unfolded) can differ from the assembled one (cell order, folded): a
// sum of at most one contribution per cell, each of a row's terms, whose
// moduli add up to at most Λ.
func (s *symSearch) slack(rot *rotation, withRow bool) float64 {
	m := s.m
	p2 := float64(rot.p * rot.p)
	w := p2 * rot.cmax * rot.cmax * s.dmax // bound on |(C D Cᵀ)_ab|
	sl := p2*rotNoise*rot.cmax*s.dmax + 8*(p2+2)*eigen.Epsilon*w + 4*eigen.Epsilon*(m.lambdaScale+w) + 4*eigen.Epsilon*s.fcTol
	if withRow {
		sl += 8 * float64(len(m.cells)+4) * eigen.Epsilon * m.lambdaScale
	}
	return sl
}

// phases fills s.ph with e^{−2πi q'·S_i}, q' = QRot q, exactly as the
// original rotation of D does, and returns q'.
func (s *symSearch) phases(op *SymOp, q [3]float64) [3]float64 {
	qp := op.applyQ(q)
	for i := range s.ph {
		var arg float64
		for a := 0; a < 3; a++ {
			arg += qp[a] * float64(op.Shift[i][a])
		}
		s.ph[i] = cmplx.Rect(1, -2*math.Pi*arg)
	}
	return qp
}

// rotatedBlock returns the block (π i, π j) of U D(q) U† in the quick
// evaluation: C D_ij Cᵀ f over the kept products of C, f = ph_i ph_j*.
func (s *symSearch) rotatedBlock(rot *rotation, dm []complex128, i, j int, f complex128) [9]complex128 {
	p, nm := rot.p, s.m.ModeCount()
	blk := dm[i*p*nm+j*p:]
	var x [9]complex128
	for ab := 0; ab < p*p; ab++ {
		var re, im float64
		for _, t := range rot.terms[ab] {
			z := blk[t.off]
			re += t.w * real(z)
			im += t.w * imag(z)
		}
		x[ab] = complex(re, im) * f
	}
	return x
}

// exactElement is element (a, b) of block (π i, π j) of U D(q) U†
// computed as the original rotation of D does, operation for operation.
func exactElement(op *SymOp, p, nm int, dm []complex128, i, j, a, b int, f complex128) complex128 {
	var s complex128
	for c := 0; c < p; c++ {
		for e := 0; e < p; e++ {
			s += complex(op.Cart[a][c]*op.Cart[b][e], 0) * dm[(i*p+c)*nm+j*p+e]
		}
	}
	return s * f
}

// blockMisses compares block (π i, π j) of U D(q) U† with the same block
// of D(q'), got (p×p at stride p), and reports whether some element differs by
// more than the tolerance. Differences within sl of the tolerance are
// decided on the exactly recomputed element; with exact false, those count
// as no miss (the caller wants only certain misses).
func (s *symSearch) blockMisses(op *SymOp, rot *rotation, dm []complex128, i, j int, got *[9]complex128, sl float64, exact bool) bool {
	p, nm := rot.p, s.m.ModeCount()
	f := s.ph[i] * cmplx.Conj(s.ph[j])
	want := s.rotatedBlock(rot, dm, i, j, f)
	lo, hi := math.Max(s.fcTol-sl, 0), s.fcTol+sl
	for a := 0; a < p; a++ {
		for b := 0; b < p; b++ {
			g := got[a*p+b]
			z := g - want[a*p+b]
			d2 := real(z)*real(z) + imag(z)*imag(z)
			switch {
			case d2 <= lo*lo:
			case d2 > hi*hi:
				return true
			case exact && cmplx.Abs(g-exactElement(op, p, nm, dm, i, j, a, b, f)) > s.fcTol:
				return true
			}
		}
	}
	return false
}

// hermitianBlock returns the p×p block at rows r0…, columns c0… of the
// Hermitian matrix whose lower triangle a holds (order n), exactly as
// fillUpper would complete it: blocks of sites, so r0 = c0 or the block
// lies wholly on one side of the diagonal.
func hermitianBlock(a []complex128, n, r0, c0, p int) [9]complex128 {
	var out [9]complex128
	for x := 0; x < p; x++ {
		for y := 0; y < p; y++ {
			r, c := r0+x, c0+y
			switch {
			case r > c:
				out[x*p+y] = a[r*n+c]
			case r < c:
				z := a[c*n+r]
				out[x*p+y] = complex(real(z), -imag(z))
			default:
				out[x*p+y] = complex(real(a[r*n+r]), 0)
			}
		}
	}
	return out
}

// rowRejects reports whether the candidate certainly fails the test of
// invariant at the first probe: the block row of site π(0) of D(Sq),
// summed from that site's terms, differs from the one of U D(q) U† by more
// than the tolerance plus the slack of both quick evaluations.
func (s *symSearch) rowRejects(op *SymOp, rot *rotation) bool {
	m := s.m
	p, nm := m.p, m.ModeCount()
	qp := s.phases(op, s.probes[0])
	r := op.Perm[0]
	clear(s.row)
	s.table.fill(qp, m.reach)
	for _, t := range m.terms[s.termLo[r]:s.termLo[r+1]] {
		ph := s.table.phase(t.n, m.reach)
		for a := 0; a < p; a++ {
			for b := 0; b < p; b++ {
				s.row[a*nm+t.j*p+b] += complex(t.phi[3*a+b], 0) * ph
			}
		}
	}
	sl := s.slack(rot, true)
	for j := 0; j < m.nsites; j++ {
		c0 := op.Perm[j] * p
		var got [9]complex128
		for a := 0; a < p; a++ {
			copy(got[a*p:(a+1)*p], s.row[a*nm+c0:])
		}
		if s.blockMisses(op, rot, s.dq[0], 0, j, &got, sl, false) {
			return true
		}
	}
	return false
}

// termsAccept reports whether the candidate certainly passes the test of
// invariant, from the force constants alone: each term Φ(i; n j) goes to
// the term Φ(π i; n' π j), n' = R n + S_j − S_i, which must be C Φ Cᵀ. The
// phases of the two match at every q (q'·R n = q·n), so an element of
// D(Sq) − U D(q) U† in the row of site I is a sum of the deviations of
// the terms landing in that row (a term with no image, or an image hit by
// none, deviating by all of itself), plus the rounding of both matrices.
// When the largest such row sum is within the tolerance, every element
// at every probe is. It costs O(terms) instead of three whole matrices.
func (s *symSearch) termsAccept(op *SymOp, cart *[3][3]float64, rot *rotation) bool {
	m := s.m
	p := m.p
	clear(s.hit)
	clear(s.dev)
	for _, t := range m.terms {
		I, J := op.Perm[t.i], op.Perm[t.j]
		var n [3]int
		for a := 0; a < m.dim; a++ {
			for b := 0; b < m.dim; b++ {
				n[a] += op.Rot[a][b] * t.n[b]
			}
			n[a] += op.Shift[t.j][a] - op.Shift[t.i][a]
		}
		u := s.findTerm(I, J, n)
		var dev float64
		for a := 0; a < p; a++ {
			for b := 0; b < p; b++ {
				var x float64
				for c := 0; c < p; c++ {
					for e := 0; e < p; e++ {
						x += cart[a][c] * t.phi[3*c+e] * cart[b][e]
					}
				}
				if u >= 0 {
					x -= m.terms[u].phi[3*a+b]
				}
				dev = math.Max(dev, math.Abs(x))
			}
		}
		if u >= 0 {
			s.hit[u] = true
		}
		s.dev[I] += dev
	}
	for u, t := range m.terms {
		if !s.hit[u] {
			for x := range t.phi {
				s.dev[t.i] += math.Abs(t.phi[x]) // a bound of its largest element
			}
		}
	}
	worst := 0.0
	for _, d := range s.dev {
		worst = math.Max(worst, d)
	}
	return worst+s.rounding(rot) <= s.fcTol
}

// findTerm returns the index in m.terms of the term (i, j, n), or −1.
func (s *symSearch) findTerm(i, j int, n [3]int) int {
	ts := s.m.terms
	lo, hi := s.termLo[i], s.termLo[i+1]
	k := lo + sort.Search(hi-lo, func(x int) bool {
		t := &ts[lo+x]
		return t.j > j || (t.j == j && !lessCell(t.n, n))
	})
	if k < hi && ts[k].j == j && ts[k].n == n {
		return k
	}
	return -1
}

// rounding bounds the rounding in the elements of D(Sq) − U D(q) U† as the
// test of invariant computes them, for termsAccept: each element of D is
// a sum of at most one contribution per cell with phases from products of
// per-axis powers (relative error about (3·reach + 4)ε), contributions of
// moduli summing to at most Λ; U D Cᵀ multiplies that error by at most
// p²·cmax² and adds its own rounding of p² products. Doubled for safety.
func (s *symSearch) rounding(rot *rotation) float64 {
	m := s.m
	reach := float64(max(m.reach[0], m.reach[1], m.reach[2]))
	p2c := float64(m.p*m.p) * rot.cmax * rot.cmax
	perD := float64(len(m.cells)) + 3*reach + 4
	return 2 * eigen.Epsilon * m.lambdaScale * (2*perD*(1+p2c) + 4*(float64(m.p*m.p)+2)*p2c + 4)
}

// invariant reports D(Sq) = U D(q) U† at every probe within the
// tolerance, element by element as the original test decides it: D(Sq)
// assembled as always (its upper triangle read as fillUpper would write
// it), U D(q) U† built block row by block row and compared at once, so a
// failing candidate stops at its first bad row. It
// polls ctx per block row and returns ctx.Err() when ctx ends first.
func (s *symSearch) invariant(ctx context.Context, op *SymOp, rot *rotation) (bool, error) {
	m := s.m
	p, nm := m.p, m.ModeCount()
	sl := s.slack(rot, false)
	if s.got == nil {
		s.got = make([]complex128, nm*nm)
	}
	for k, q := range s.probes {
		qp := s.phases(op, q)
		if !m.assemble(qp, s.got, &s.table, stopFunc(ctx)) {
			return false, ctx.Err()
		}
		for i := 0; i < m.nsites; i++ {
			if err := ctx.Err(); err != nil {
				return false, err
			}
			r0 := op.Perm[i] * p
			for j := 0; j < m.nsites; j++ {
				got := hermitianBlock(s.got, nm, r0, op.Perm[j]*p, p)
				if s.blockMisses(op, rot, s.dq[k], i, j, &got, sl, true) {
					return false, nil
				}
			}
		}
	}
	return true, nil
}
