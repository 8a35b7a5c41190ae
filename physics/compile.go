// Compile: from a validated Crystal to a Model — raw force constants from
// springs, neighbour shells and blocks, the acoustic-sum-rule self terms,
// mass weighting, the packed blocks of D(q) and the canonical hash.

package physics

import (
	"context"
	"fmt"
	"math"
	"sort"

	"github.com/materials-lab/modegrid/physics/lattice"
)

// Options controls how a Crystal is compiled into a Model.
type Options struct {
	// EnforceSumRule rebuilds the on-site blocks of explicit force constants
	// from the acoustic sum rule, replacing any given by the caller.
	EnforceSumRule bool
	// Limits bounds the model size; the zero value means the defaults.
	Limits Limits
	// SymTolA is the symmetry tolerance, Å: how far the model may be from
	// exactly symmetric for its symmetry operations to be found (see
	// DefaultSymTolA, which 0 means). It is part of the model's identity:
	// a model compiled with another tolerance has another hash, since the
	// operations found (and so grid reductions) may differ.
	SymTolA float64
	// EnforceChargeNeutrality imposes Σ_sites Z* = 0 on the Born effective
	// charges by the smallest correction (longrange.go, setPolar).
	EnforceChargeNeutrality bool
	// LongRange builds the long-range term of a crystal with Born charges
	// (physics/polar.Builder); Compile refuses such a crystal without it
	// (ErrNoLongRangeBuilder). Unused for crystals without charges.
	LongRange LongRangeBuilder
}

// symTol returns the symmetry tolerance, resolving 0 to the default.
func (o Options) symTol() float64 {
	if o.SymTolA == 0 {
		return DefaultSymTolA
	}
	return o.SymTolA
}

// validateSymTol adds a violation when a given symmetry tolerance is not a
// finite length in [MinSymTolA, MaxSymTolA] Å (0 means the default).
func validateSymTol(tolA float64, vs *Violations) {
	if tolA == 0 {
		return
	}
	if !(tolA >= MinSymTolA && tolA <= MaxSymTolA) { // also NaN
		vs.Add("symmetry_tolerance_a", "must be 0 (the default, %g Å) or between %g and %g Å, got %v", DefaultSymTolA, MinSymTolA, MaxSymTolA, tolA)
	}
}

// ShellInfo reports what the neighbour search found for one Shell.
type ShellInfo struct {
	Bonds     int     // bonds produced
	DistanceA float64 // shell distance, Å
}

// ShellTolA is the distance tolerance (Å) within which two neighbour
// distances belong to the same shell.
const ShellTolA = 1e-4

// term is one directed force-constant block between site i in cell 0 and
// site j in cell n, already divided by sqrt(m_i m_j): eV/Å²/amu, row-major
// 3×3 (only the top-left p×p part is used).
type term struct {
	i, j int
	n    [3]int
	phi  [9]float64
}

// Model is a compiled, validated force-constant model, ready for the
// dynamical matrix at any q. A Model is immutable and safe for concurrent
// use.
type Model struct {
	dim, p, nsites int
	lattice        [3][3]float64 // rows are lattice vectors a_k, Å (unused rows 0)
	recip          [3][3]float64 // rows are reciprocal vectors b_k, Å⁻¹ (2π included)
	pos            [][3]float64  // Cartesian site positions, Å
	frac           [][]float64
	massAmu        []float64
	labels         []string
	terms          []term // directed, summed per (i, j, n) in canonical order, non-zero, sorted

	// The lower triangle of D(q) as blocks grouped by cell offset (dynmat.go).
	cells  []dmCell
	blocks []dmBlock
	reach  [3]int // largest |n_k| of any cell
	// The blocks stacked by cell for the batched assembly (dynbatch.go);
	// nil when each D(q) is assembled alone (the faster path for it).
	stack *dmStack

	hash string // canonical SHA-256, hex (hash.go)

	// lambdaScale bounds every eigenvalue of D(q) at any q (Gershgorin:
	// the largest row sum of |Φ|/sqrt(m_i m_j) over all terms), eV/Å²/amu;
	// the scale of the velocity tolerances.
	lambdaScale float64

	shells           []ShellInfo
	interactions     int
	sumRuleViolation float64 // eV/Å², before enforcement

	latticeType string                // LatticeType (lattice.Detect), found by Compile
	standard    map[string][3]float64 // StandardPoints

	sym     lazy[[]SymOp] // computed on first use by Symmetry (symmetry.go)
	symTolA float64       // symmetry tolerance, Å (Options.SymTolA resolved)

	// The springs in factored form and whether explicit blocks exist: the
	// long-wavelength limit (elastic.go) uses them for accuracy.
	springs   []springBond
	hasBlocks bool
	lw        lazy[*longWave] // computed on first use by longWaveLimit

	// Born charges and ε∞ (nil without), and the long-range term they
	// imply, built by Options.LongRange (longrange.go).
	polar     *polarData
	longRange LongRange
}

// Compile validates c and builds its force constants. A model that fails
// validation returns a *ValidationError listing every violation.
//
// The compiled numbers do not depend on how the model was spelled: every
// force-constant block is summed from its contributions in a canonical
// order (sumParts), a spring is built in one orientation of its bond, and
// negative zeros become +0, so equivalent descriptions compile to
// bit-identical models (which Hash relies on).
//
// The neighbour search of shells grows with the sites and the shell
// radius (over a second at 512 sites); Compile polls ctx in it and in
// every loop over sites, interactions and blocks, and returns ctx.Err()
// when ctx ends first. Validation is not interrupted: it is linear in the
// input except for one pass over site pairs (milliseconds at MaxSites).
func Compile(ctx context.Context, c *Crystal, opt Options) (*Model, error) {
	if c == nil {
		return nil, Validate(nil, opt.Limits)
	}
	lim := opt.Limits.WithDefaults()
	var vs Violations
	validate(c, lim, &vs)
	validateSymTol(opt.SymTolA, &vs)
	if len(vs.list) > 0 {
		return nil, vs.Err()
	}
	m := newModel(c)
	m.symTolA = opt.symTol()
	m.setPolar(c, opt.EnforceChargeNeutrality)
	toEV := func(k float64) float64 { return k } // force constants to eV/Å²
	if c.ForceUnit == NPerM {
		// One division (a single rounding), so that a value converted to
		// N/m and back lands on the same eV/Å² number whenever it can.
		toEV = func(k float64) float64 { return k / EVPerA2InNPerM }
	}
	parts := fcParts{}
	if err := m.addSprings(ctx, parts, c, toEV, lim, &vs); err != nil {
		return nil, err
	}
	if vs.Len() > 0 {
		return nil, vs.Err()
	}
	if err := m.addBlocks(ctx, parts, c.Blocks, toEV, opt.EnforceSumRule); err != nil {
		return nil, err
	}
	raw, err := m.rawTerms(ctx, parts) // eV/Å², for the hash
	if err != nil {
		return nil, err
	}
	m.setTerms(raw)
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	if err := m.buildLongRange(ctx, opt); err != nil {
		return nil, err
	}
	m.hash = m.canonicalHash(raw)
	m.latticeType, m.standard = lattice.Detect(m.lattice, m.dim)
	return m, nil
}

// addSprings adds the explicit springs of c and the bonds of its neighbour
// shells to parts, and counts the interactions. A shell whose search fails
// and an interaction count over the limit are added to vs; it returns
// ctx.Err() if ctx ends first.
func (m *Model) addSprings(ctx context.Context, parts fcParts, c *Crystal, toEV func(float64) float64, lim Limits, vs *Violations) error {
	for x, s := range c.Springs {
		if x%pollEvery == 0 && ctx.Err() != nil {
			return ctx.Err()
		}
		m.addSpring(parts, s.From, s.To, cellOf(s.Cell), toEV(s.KLong), toEV(s.KTrans))
	}
	m.interactions = len(c.Springs) + len(c.Blocks)
	m.hasBlocks = len(c.Blocks) > 0
	m.shells = make([]ShellInfo, len(c.Shells))
	for idx, sh := range c.Shells {
		bonds, dist, err := m.findShell(ctx, sh, lim)
		if ctx.Err() != nil {
			return ctx.Err()
		}
		if err != nil {
			vs.Add(fmt.Sprintf("shells[%d]", idx), "%v", err)
			continue
		}
		m.shells[idx] = ShellInfo{Bonds: len(bonds), DistanceA: dist}
		m.interactions += len(bonds)
		for x, b := range bonds {
			if x%pollEvery == 0 && ctx.Err() != nil {
				return ctx.Err()
			}
			m.addSpring(parts, b.i, b.j, b.n, toEV(sh.KLong), toEV(sh.KTrans))
		}
	}
	if m.interactions > lim.MaxInteractions {
		vs.Add("shells", "springs, shell bonds and blocks number %d, more than the limit of %d interactions", m.interactions, lim.MaxInteractions)
	}
	return nil
}

// setTerms mass-weights the raw force constants (eV/Å²) into m.terms,
// packs the blocks of D(q), and sets lambdaScale, the Gershgorin bound on
// every eigenvalue: the largest row sum of |Φ|/sqrt(m_i m_j).
func (m *Model) setTerms(raw []term) {
	for _, t := range raw {
		w := 1 / math.Sqrt(m.massAmu[t.i]*m.massAmu[t.j])
		for a := range t.phi {
			t.phi[a] = posZero(t.phi[a] * w)
		}
		m.terms = append(m.terms, t)
	}
	m.buildBlocks()
	m.buildStack(false)
	rows := make([]float64, m.ModeCount())
	for _, t := range m.terms {
		for a := 0; a < m.p; a++ {
			for b := 0; b < m.p; b++ {
				rows[t.i*m.p+a] += math.Abs(t.phi[3*a+b])
			}
		}
	}
	for _, r := range rows {
		m.lambdaScale = math.Max(m.lambdaScale, r)
	}
}

// newModel copies the geometry of a validated crystal into a Model, with
// negative zeros made +0 (so that −0 and 0 compile alike).
func newModel(c *Crystal) *Model {
	m := &Model{dim: len(c.Lattice), p: c.P(), nsites: len(c.Sites)}
	for k, v := range c.Lattice {
		for a := range v {
			m.lattice[k][a] = posZero(v[a])
		}
	}
	m.recip = lattice.Reciprocal(m.lattice, m.dim)
	for _, s := range c.Sites {
		frac := make([]float64, len(s.Frac))
		for k, f := range s.Frac {
			frac[k] = posZero(f)
		}
		m.pos = append(m.pos, m.cart(frac))
		m.frac = append(m.frac, frac)
		m.massAmu = append(m.massAmu, s.MassAmu)
		m.labels = append(m.labels, s.Label)
	}
	return m
}

// fcKey names the directed force-constant block Φ(0i; nj): site i in cell
// 0, site j in cell n.
type fcKey struct {
	i, j int
	n    [3]int
}

// fcParts collects the contributions (raw 3×3 blocks, eV/Å²) to every
// force-constant block, to be summed by sumParts once all are in.
type fcParts map[fcKey][][9]float64

func (f fcParts) add(k fcKey, phi [9]float64) { f[k] = append(f[k], phi) }

// addPair adds phi to the off-site block k and its transpose to the
// reverse block (j, i, −n), as Φ(0j; −n i) = Φ(0i; nj)ᵀ requires. Every
// contribution to one enters the other transposed, so the canonical sums
// are exact transposes of each other.
func (f fcParts) addPair(k fcKey, phi [9]float64) {
	f.add(k, phi)
	f.add(fcKey{k.j, k.i, neg3(k.n)}, transpose9(phi))
}

// sumParts adds the contributions component by component in ascending
// order of value (negative zeros made +0 first), so that the sum is the
// same float64 whatever order the springs, shells and blocks came in. The
// result has no negative zero.
func sumParts(parts [][9]float64) [9]float64 {
	var out [9]float64
	col := make([]float64, len(parts))
	for a := range out {
		for x, p := range parts {
			col[x] = posZero(p[a])
		}
		sort.Float64s(col)
		s := 0.0
		for _, v := range col {
			s += v
		}
		out[a] = posZero(s)
	}
	return out
}

// posZero returns x with −0 made +0.
func posZero(x float64) float64 {
	if x == 0 {
		return 0
	}
	return x
}

// addSpring adds a spring of constants kl, kt (eV/Å²) on the bond from
// site i in cell 0 to site j in cell n: the pair blocks and, by the
// acoustic sum rule, the on-site blocks of both ends. The bond is taken in
// one orientation (i < j, or for i = j the larger of ±n), so that a bond
// and its own reverse give bit-identical blocks; a spring block is exactly
// symmetric (e_a e_b = e_b e_a in floating point).
func (m *Model) addSpring(f fcParts, i, j int, n [3]int, kl, kt float64) {
	if j < i || (i == j && lessCell(n, neg3(n))) {
		i, j, n = j, i, neg3(n)
	}
	r := lattice.Sub(lattice.Add(m.pos[j], m.latticeVec(n)), m.pos[i])
	l := lattice.Norm(r)
	e := [3]float64{r[0] / l, r[1] / l, r[2] / l}
	var phi, self [9]float64
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			ee := e[a] * e[b]
			id := 0.0
			if a == b {
				id = 1
			}
			phi[3*a+b] = -(kl*ee + kt*(id-ee))
			self[3*a+b] = -phi[3*a+b]
		}
	}
	f.addPair(fcKey{i, j, n}, phi)
	f.add(fcKey{i: i, j: i}, self)
	f.add(fcKey{i: j, j: j}, self)
	m.springs = append(m.springs, springBond{i: i, j: j, bond: r, kLong: kl, kTrans: kt})
}

// addBlocks adds the explicit blocks (eV/Å² after toEV): off-site blocks
// with their implied transposes, and per site the on-site block — the
// caller's (symmetric part) or, when none is given or enforce is set, the
// acoustic-sum-rule value from the off-site blocks. It records the largest
// sum-rule violation of the given on-site blocks. It returns ctx.Err() if
// ctx ends first.
func (m *Model) addBlocks(ctx context.Context, f fcParts, blocks []Block, toEV func(float64) float64, enforce bool) error {
	onSite := make([][][9]float64, m.nsites) // symmetric parts of given on-site blocks
	off := make([][][9]float64, m.nsites)    // off-site blocks leaving each site
	for x, b := range blocks {
		if x%pollEvery == 0 && ctx.Err() != nil {
			return ctx.Err()
		}
		var phi [9]float64
		for a := range phi {
			phi[a] = toEV(b.Phi[a])
		}
		n := cellOf(b.Cell)
		if b.From == b.To && n == ([3]int{}) {
			onSite[b.From] = append(onSite[b.From], symmetrize9(phi))
			continue
		}
		f.addPair(fcKey{b.From, b.To, n}, phi)
		off[b.From] = append(off[b.From], phi)
		off[b.To] = append(off[b.To], transpose9(phi))
	}
	for i := 0; i < m.nsites; i++ {
		if i%pollEvery == 0 && ctx.Err() != nil {
			return ctx.Err()
		}
		if len(off[i]) == 0 && len(onSite[i]) == 0 {
			continue
		}
		offSum := sumParts(off[i])
		asr := symmetrize9(offSum)
		for a := range asr {
			asr[a] = -asr[a]
		}
		if len(onSite[i]) > 0 {
			given := sumParts(onSite[i])
			// Violation: the largest |Σ_{j,n} Φ_αβ(0i; nj)| over the
			// p×p components the model uses, i.e. the force along α on
			// site i when the whole crystal moves rigidly by a unit step
			// along β (zero under the acoustic sum rule).
			for a := 0; a < m.p; a++ {
				for b := 0; b < m.p; b++ {
					row := given[3*a+b] + offSum[3*a+b]
					m.sumRuleViolation = math.Max(m.sumRuleViolation, math.Abs(row))
				}
			}
			if !enforce {
				asr = given
			}
		}
		f.add(fcKey{i: i, j: i}, asr)
	}
	return nil
}

// rawTerms sums the contributions of every block (sumParts) and returns the
// blocks that are not zero, sorted by (i, j, n), in eV/Å², with only the
// p×p components the model uses (the others 0). It returns ctx.Err() if
// ctx ends first.
func (m *Model) rawTerms(ctx context.Context, f fcParts) ([]term, error) {
	keys := make([]fcKey, 0, len(f))
	for k := range f {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(a, b int) bool {
		ka, kb := keys[a], keys[b]
		if ka.i != kb.i {
			return ka.i < kb.i
		}
		if ka.j != kb.j {
			return ka.j < kb.j
		}
		return lessCell(ka.n, kb.n)
	})
	raw := make([]term, 0, len(keys))
	for x, k := range keys {
		if x%pollEvery == 0 && ctx.Err() != nil {
			return nil, ctx.Err()
		}
		sum := sumParts(f[k])
		t := term{i: k.i, j: k.j, n: k.n}
		nonzero := false
		for a := 0; a < m.p; a++ {
			for b := 0; b < m.p; b++ {
				t.phi[3*a+b] = sum[3*a+b]
				nonzero = nonzero || sum[3*a+b] != 0
			}
		}
		if nonzero {
			raw = append(raw, t)
		}
	}
	return raw, nil
}

// shellBond is a bond found by the neighbour search: site i in cell 0 to
// site j in cell n.
type shellBond struct {
	i, j int
	n    [3]int
}

// findShell finds every bond between sites labelled sh.FromLabel and
// sh.ToLabel at the sh.Shell-th smallest distance, within ShellTolA. Each
// bond is returned once (for equal labels, (i, j, n) and (j, i, −n) are the
// same bond). The search radius grows until the shell is complete or the
// cell-offset limit is reached. It returns ctx.Err() if ctx ends first.
func (m *Model) findShell(ctx context.Context, sh Shell, lim Limits) ([]shellBond, float64, error) {
	from, to := m.sitesLabelled(sh.FromLabel), m.sitesLabelled(sh.ToLabel)
	maxLen := 0.0
	for k := 0; k < m.dim; k++ {
		maxLen = math.Max(maxLen, lattice.Norm(m.lattice[k]))
	}
	radius := 1.5 * maxLen * float64(sh.Shell)
	for {
		reach, capped := m.searchReach(radius, lim.MaxCellOffset)
		cells := 1
		for k := 0; k < m.dim; k++ {
			cells *= 2*reach[k] + 1
		}
		if work := float64(cells) * float64(len(from)) * float64(len(to)); work > ShellSearchBudget {
			return nil, 0, fmt.Errorf("the search for shell %d between %q and %q would compare %.3g site pairs, more than the limit of %.0e: ask for a nearer shell or give the bonds as springs", sh.Shell, sh.FromLabel, sh.ToLabel, work, float64(ShellSearchBudget))
		}
		shellD, err := m.nearestDistances(ctx, from, to, reach, radius, sh.Shell+1)
		if err != nil {
			return nil, 0, err
		}
		// The shell is only known complete if a farther distance exists
		// inside the radius (so nothing between was missed). When the
		// cell-offset limit capped the search, only distances up to
		// min_k (reach_k − 1)·2π/|b_k| are known complete.
		complete := radius
		if capped {
			for k := 0; k < m.dim; k++ {
				complete = math.Min(complete, float64(reach[k]-1)*2*math.Pi/lattice.Norm(m.recip[k]))
			}
		}
		var within []float64
		for _, d := range shellD {
			if d+ShellTolA <= complete {
				within = append(within, d)
			}
		}
		if len(within) > sh.Shell || (capped && len(within) >= sh.Shell) {
			target := within[sh.Shell-1]
			bonds, err := m.bondsAt(ctx, from, to, reach, target, sh.FromLabel == sh.ToLabel, lim.MaxInteractions)
			if err != nil {
				return nil, 0, err
			}
			return bonds, target, nil
		}
		if capped {
			return nil, 0, fmt.Errorf("found no neighbours in shell %d between %q and %q: only %d shell(s) lie within reach of the cell-offset limit of ±%d", sh.Shell, sh.FromLabel, sh.ToLabel, len(within), lim.MaxCellOffset)
		}
		radius *= 2
	}
}

// sitesLabelled lists the sites with the given label, in site order.
func (m *Model) sitesLabelled(label string) []int {
	var out []int
	for i, l := range m.labels {
		if l == label {
			out = append(out, i)
		}
	}
	return out
}

// searchReach returns the cells needed along each lattice vector so that
// every point within radius (Å) is found — the spacing of lattice planes
// is 2π/|b_k| — each capped at maxOffset, and whether any cap applied.
func (m *Model) searchReach(radius float64, maxOffset int) (reach [3]int, capped bool) {
	for k := 0; k < m.dim; k++ {
		r := int(math.Ceil(radius*lattice.Norm(m.recip[k])/(2*math.Pi))) + 1
		if r > maxOffset {
			r = maxOffset
			capped = true
		}
		reach[k] = r
	}
	return reach, capped
}

// nearestDistances returns the keep smallest distinct pair distances (Å)
// within radius, ascending, two distances within ShellTolA counting as
// one (the smaller kept). It holds only a short sorted list, never every
// candidate pair.
func (m *Model) nearestDistances(ctx context.Context, from, to []int, reach [3]int, radius float64, keep int) ([]float64, error) {
	shellD := make([]float64, 0, keep+1)
	err := m.eachPair(ctx, from, to, reach, func(_ shellBond, d float64) {
		if d > radius {
			return
		}
		x := sort.SearchFloat64s(shellD, d)
		if (x < len(shellD) && shellD[x]-d <= ShellTolA) || (x > 0 && d-shellD[x-1] <= ShellTolA) {
			if x < len(shellD) && shellD[x]-d <= ShellTolA && d < shellD[x] {
				shellD[x] = d
			}
			return
		}
		if x >= keep {
			return
		}
		shellD = append(shellD, 0)
		copy(shellD[x+1:], shellD[x:])
		shellD[x] = d
		if len(shellD) > keep {
			shellD = shellD[:keep]
		}
	})
	return shellD, err
}

// bondsAt returns every bond at distance target (within ShellTolA), at
// most maxBonds+1 of them (the caller reports the excess); when same, the
// two labels are one and only one of (i, j, n) and (j, i, −n) is kept.
func (m *Model) bondsAt(ctx context.Context, from, to []int, reach [3]int, target float64, same bool, maxBonds int) ([]shellBond, error) {
	var bonds []shellBond
	err := m.eachPair(ctx, from, to, reach, func(b shellBond, d float64) {
		if math.Abs(d-target) > ShellTolA || len(bonds) > maxBonds {
			return
		}
		if same {
			// Keep one of (i, j, n) and (j, i, −n).
			if b.i > b.j || (b.i == b.j && lessCell(b.n, neg3(b.n))) {
				return
			}
		}
		bonds = append(bonds, b)
	})
	return bonds, err
}

// ShellSearchBudget bounds the site-pair distances one neighbour-shell
// search may evaluate (cells in reach × sites of one label × sites of the
// other), so that no model can make Compile run for minutes.
const ShellSearchBudget = 1e8

// eachPair calls fn with every pair (i in from, cell 0; j in to, cell n),
// |n_k| ≤ reach_k, except a site with itself in cell 0, and its distance.
// It polls ctx before every row (one site i against every j of one cell)
// and returns ctx.Err() when ctx ended.
func (m *Model) eachPair(ctx context.Context, from, to []int, reach [3]int, fn func(b shellBond, d float64)) error {
	var n [3]int
	for n[0] = -reach[0]; n[0] <= reach[0]; n[0]++ {
		for n[1] = -reach[1]; n[1] <= reach[1]; n[1]++ {
			for n[2] = -reach[2]; n[2] <= reach[2]; n[2]++ {
				rn := m.latticeVec(n)
				for _, i := range from {
					if err := ctx.Err(); err != nil {
						return err
					}
					for _, j := range to {
						if i == j && n == ([3]int{}) {
							continue
						}
						fn(shellBond{i, j, n}, lattice.Norm(lattice.Sub(lattice.Add(m.pos[j], rn), m.pos[i])))
					}
				}
			}
		}
	}
	return nil
}

// cart converts fractional coordinates (d numbers) to Cartesian Å.
func (m *Model) cart(frac []float64) [3]float64 {
	var r [3]float64
	for k, f := range frac {
		for a := 0; a < 3; a++ {
			r[a] += f * m.lattice[k][a]
		}
	}
	return r
}

func (m *Model) latticeVec(n [3]int) [3]float64 {
	var r [3]float64
	for k := 0; k < m.dim; k++ {
		for a := 0; a < 3; a++ {
			r[a] += float64(n[k]) * m.lattice[k][a]
		}
	}
	return r
}

func cellOf(c []int) [3]int {
	var n [3]int
	copy(n[:], c)
	return n
}

func neg3(n [3]int) [3]int { return [3]int{-n[0], -n[1], -n[2]} }

func transpose9(p [9]float64) [9]float64 {
	return [9]float64{p[0], p[3], p[6], p[1], p[4], p[7], p[2], p[5], p[8]}
}

func symmetrize9(p [9]float64) [9]float64 {
	t := transpose9(p)
	var s [9]float64
	for a := range p {
		s[a] = (p[a] + t[a]) / 2
	}
	return s
}

// Dim is the dimensionality d of the crystal.
func (m *Model) Dim() int { return m.dim }

// Polarizations is the number of displacement components per site (1, 2
// or 3).
func (m *Model) Polarizations() int { return m.p }

// Sites is the number of sites per cell.
func (m *Model) Sites() int { return m.nsites }

// ModeCount is the number of modes (branches) per q-point: sites ×
// polarizations.
func (m *Model) ModeCount() int { return m.nsites * m.p }

// Labels returns the site labels in site order.
func (m *Model) Labels() []string { return append([]string(nil), m.labels...) }

// MassAmu returns the mass of site i in amu.
func (m *Model) MassAmu(i int) float64 { return m.massAmu[i] }

// Shells reports the neighbour search result per shell of the crystal.
func (m *Model) Shells() []ShellInfo { return append([]ShellInfo(nil), m.shells...) }

// Interactions is the number of pair interactions after expanding shells.
func (m *Model) Interactions() int { return m.interactions }

// SumRuleViolation is the largest row sum of the explicit blocks (eV/Å²)
// before any enforcement; 0 when no on-site block was given.
func (m *Model) SumRuleViolation() float64 { return m.sumRuleViolation }

// Reciprocal returns the reciprocal lattice vectors b_k (Å⁻¹, 2π included).
func (m *Model) Reciprocal() [3][3]float64 { return m.recip }

// Lattice returns the lattice vectors (rows, Å; rows past d are zero).
func (m *Model) Lattice() [3][3]float64 { return m.lattice }

// LatticeType returns the recognised lattice type of the model: "sc",
// "fcc", "bcc", "hexagonal" (3D or 2D), "square", "rectangular",
// "centred-rectangular", "oblique", "1d", or "" when the lattice is none of
// these (a 3D lattice of lower symmetry: only Γ is then built in).
func (m *Model) LatticeType() string { return m.latticeType }

// StandardPoints returns the built-in labelled points for the model's
// lattice type, in fractional reciprocal coordinates of the model's own
// lattice; "G" is Γ and is always present. The map is a fresh copy.
func (m *Model) StandardPoints() map[string][3]float64 {
	out := make(map[string][3]float64, len(m.standard))
	for k, v := range m.standard {
		out[k] = v
	}
	return out
}
