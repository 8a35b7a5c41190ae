// Validation of a Crystal: every violation at once, each with its field
// path (proto snake_case names) and the bad value; the size limits.

package physics

import (
	"errors"
	"fmt"
	"math"
	"strings"

	"github.com/materials-lab/modegrid/physics/lattice"
)

// Limits bounds the size of a model. The zero value means the defaults.
type Limits struct {
	MaxSites        int // default 512
	MaxInteractions int // springs + shell bonds + blocks; default 200 000
	MaxCellOffset   int // largest |component| of a cell offset; default 64
}

// Default model limits.
const (
	DefaultMaxSites        = 512
	DefaultMaxInteractions = 200000
	DefaultMaxCellOffset   = 64
)

// WithDefaults returns l with every zero (or negative) limit replaced by its
// default.
func (l Limits) WithDefaults() Limits {
	if l.MaxSites <= 0 {
		l.MaxSites = DefaultMaxSites
	}
	if l.MaxInteractions <= 0 {
		l.MaxInteractions = DefaultMaxInteractions
	}
	if l.MaxCellOffset <= 0 {
		l.MaxCellOffset = DefaultMaxCellOffset
	}
	return l
}

// Ranges of accepted input: far beyond any real crystal, and small enough
// that every product the engine forms (ω² = k/m, |a|², positions) stays
// finite and keeps its digits.
const (
	MaxLengthA      = 1e5  // |lattice component| and lattice-vector length, Å
	MaxFrac         = 1e3  // |fractional coordinate|
	MinMassAmu      = 1e-6 // amu
	MaxMassAmu      = 1e9  // amu
	MaxForceEVPerA2 = 1e6  // |spring constant| or |block element|, eV/Å² (1.6e7 N/m)
	// MinForceEVPerA2 is the smallest magnitude of a force constant that
	// is not 0 (0 switches a term off), eV/Å²: with the heaviest mass it
	// is a frequency of 5e-54 THz, and it keeps every element of a
	// dynamical matrix within 1e-121 of the largest the limits allow, so
	// that their squares stay normal floats. Smaller values (denormals
	// such as 1e-303) changed nothing any result shows but took the
	// eigensolver to the edge of the float range.
	MinForceEVPerA2 = 1e-100
)

// Geometric tolerances used by validation and neighbour search.
const (
	// LatticeTolA is the smallest accepted lattice-vector length (Å), and
	// the smallest accepted area (Å²) or volume (Å³) of the cell.
	LatticeTolA = 1e-6
	// CoincidenceTolA is the distance (Å) below which two sites are on the
	// same point.
	CoincidenceTolA = 1e-6
	// DegenerateLatticeRel is the smallest accepted ratio of the cell's
	// length, area or volume to the product of its vector lengths (the
	// sine of the angle for two vectors): below it the reciprocal vectors
	// lose most of their digits.
	DegenerateLatticeRel = 1e-6
)

// Violation is one validation failure: the field path (proto field names,
// e.g. "sites[2].mass_amu") and what is wrong with it, naming the bad value.
type Violation struct {
	Field       string
	Description string
}

func (v Violation) String() string { return v.Field + ": " + v.Description }

// ValidationError lists every violation found in a model or request.
type ValidationError struct {
	Violations []Violation
}

func (e *ValidationError) Error() string {
	parts := make([]string, len(e.Violations))
	for i, v := range e.Violations {
		parts[i] = v.String()
	}
	return "invalid: " + strings.Join(parts, "; ")
}

// Violations accumulates Violations; the zero value is ready to use. It is
// the one collector of the engine and of the server, which maps the
// engine's field paths (relative to an option struct or a model) onto its
// request's paths with AddErr.
type Violations struct{ list []Violation }

// Add records a violation of field, the description formatted by Sprintf.
func (vs *Violations) Add(field, format string, args ...any) {
	vs.list = append(vs.list, Violation{Field: field, Description: fmt.Sprintf(format, args...)})
}

// AddErr records the violations of a *ValidationError in err with their
// fields joined under prefix (JoinField), or any other non-nil error as
// one violation of field.
func (vs *Violations) AddErr(prefix, field string, err error) {
	var ve *ValidationError
	switch {
	case err == nil:
	case errors.As(err, &ve):
		for _, v := range ve.Violations {
			vs.list = append(vs.list, Violation{Field: JoinField(prefix, v.Field), Description: v.Description})
		}
	default:
		vs.Add(field, "%v", err)
	}
}

// Len is the number of violations recorded.
func (vs *Violations) Len() int { return len(vs.list) }

// List returns the violations recorded, in order.
func (vs *Violations) List() []Violation { return vs.list }

// Err is a *ValidationError listing every violation, or nil if none.
func (vs *Violations) Err() error {
	if len(vs.list) == 0 {
		return nil
	}
	return &ValidationError{Violations: vs.list}
}

// JoinField joins a prefix ("model.crystal") and a field path relative to
// it ("sites[2].mass_amu", or "[3]" for an element of the prefix itself).
func JoinField(prefix, field string) string {
	switch {
	case prefix == "":
		return field
	case field == "":
		return prefix
	case strings.HasPrefix(field, "["):
		return prefix + field
	default:
		return prefix + "." + field
	}
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// Validate checks everything about c that can be checked without the
// neighbour search and returns a *ValidationError listing every violation,
// or nil. Compile runs it and then checks the shells.
// A nil c is an error too (field "model"), not a panic.
func Validate(c *Crystal, lim Limits) error {
	var vs Violations
	if c == nil {
		vs.Add("model", "is required (got a nil crystal)")
		return vs.Err()
	}
	validate(c, lim.WithDefaults(), &vs)
	return vs.Err()
}

// validate appends to vs every violation in c, in a fixed order: lattice,
// polarizations and force unit, sites, springs, blocks, shells, then the
// interaction count. Later checks that need a sound lattice or sound site
// positions skip what an earlier check has already reported.
func validate(c *Crystal, lim Limits, vs *Violations) {
	v := &validator{c: c, lim: lim, vs: vs, d: len(c.Lattice), n: len(c.Sites)}
	v.checkLattice()
	if c.Polarizations < 0 || c.Polarizations > 3 {
		vs.Add("polarizations", "must be 1, 2 or 3 (0 means 3), got %d", c.Polarizations)
	}
	if c.ForceUnit != EVPerA2 && c.ForceUnit != NPerM {
		vs.Add("force_unit", "unknown unit %d", c.ForceUnit)
	}
	v.checkSites()
	v.checkCoincidences()
	v.checkSprings()
	v.checkBlocks()
	v.checkShells()
	v.checkPolar()
	if total := len(c.Springs) + len(c.Blocks); total > lim.MaxInteractions {
		vs.Add("springs", "springs and blocks number %d, more than the limit of %d interactions", total, lim.MaxInteractions)
	}
}

// validator carries what the parts of validate share: the crystal, the
// limits, the violations found so far, and what earlier parts learnt.
type validator struct {
	c    *Crystal
	lim  Limits
	vs   *Violations
	d, n int // lattice vectors, sites

	latticeOK bool   // 1–3 finite, non-degenerate vectors
	posOK     []bool // per site: finite, in-range position on a sound lattice
}

// dimOK reports whether the lattice has an acceptable number of vectors,
// so that per-site and per-bond lengths can be checked against it.
func (v *validator) dimOK() bool { return v.d >= 1 && v.d <= 3 }

// checkLattice checks the number, components, lengths and independence of
// the lattice vectors, and sets latticeOK.
func (v *validator) checkLattice() {
	c, vs, d := v.c, v.vs, v.d
	switch {
	case d == 0:
		vs.Add("lattice", "must have 1 to 3 vectors, got none")
	case d > 3:
		vs.Add("lattice", "must have 1 to 3 vectors, got %d", d)
	}
	v.latticeOK = v.dimOK()
	for i, vec := range c.Lattice {
		for k, x := range vec {
			if !finite(x) {
				vs.Add(fmt.Sprintf("lattice[%d].%c", i, "xyz"[k]), "must be finite, got %v", x)
				v.latticeOK = false
			} else if math.Abs(x) > MaxLengthA {
				vs.Add(fmt.Sprintf("lattice[%d].%c", i, "xyz"[k]), "must be within ±%g Å, got %v", MaxLengthA, x)
				v.latticeOK = false
			}
		}
	}
	if v.latticeOK {
		for i, vec := range c.Lattice {
			if l := lattice.Norm(vec); l < LatticeTolA {
				vs.Add(fmt.Sprintf("lattice[%d]", i), "length %.3g Å is below %.0e Å", l, LatticeTolA)
				v.latticeOK = false
			}
		}
	}
	if v.latticeOK {
		v.checkDegenerate()
	}
}

// checkDegenerate rejects a cell whose length, area or volume is tiny, in
// absolute terms or relative to the product of its vector lengths.
func (v *validator) checkDegenerate() {
	m := lattice.GramMeasure(v.c.Lattice)
	prod := 1.0
	for _, vec := range v.c.Lattice {
		prod *= lattice.Norm(vec)
	}
	what := [...]string{"", "length", "area", "volume"}[v.d]
	switch {
	case m < LatticeTolA:
		v.vs.Add("lattice", "degenerate: cell %s %.3g is below %.0e (vectors are linearly dependent)", what, m, LatticeTolA)
		v.latticeOK = false
	case m < DegenerateLatticeRel*prod:
		v.vs.Add("lattice", "degenerate: cell %s %.3g is %.2g of the product of the vector lengths, below %.0e (vectors nearly linearly dependent)", what, m, m/prod, DegenerateLatticeRel)
		v.latticeOK = false
	}
}

// checkSites checks the site count, each mass and each fractional
// position, and sets posOK.
func (v *validator) checkSites() {
	vs, n := v.vs, v.n
	if n == 0 {
		vs.Add("sites", "must have at least one site, got none")
	}
	if n > v.lim.MaxSites {
		vs.Add("sites", "has %d sites, more than the limit of %d", n, v.lim.MaxSites)
	}
	v.posOK = make([]bool, n)
	for i, s := range v.c.Sites {
		f := fmt.Sprintf("sites[%d]", i)
		checkMass(vs, f+".mass_amu", s.MassAmu)
		if v.dimOK() && len(s.Frac) != v.d {
			vs.Add(f+".frac", "must have %d numbers (one per lattice vector), got %d", v.d, len(s.Frac))
			continue
		}
		ok := true
		for k, x := range s.Frac {
			if !finite(x) {
				vs.Add(fmt.Sprintf("%s.frac[%d]", f, k), "must be finite, got %v", x)
				ok = false
			} else if math.Abs(x) > MaxFrac {
				vs.Add(fmt.Sprintf("%s.frac[%d]", f, k), "must be within ±%g, got %v", MaxFrac, x)
				ok = false
			}
		}
		v.posOK[i] = ok && v.latticeOK
	}
}

// checkMass checks one site mass (amu) at field f.
func checkMass(vs *Violations, f string, m float64) {
	switch {
	case !finite(m):
		vs.Add(f, "must be finite, got %v", m)
	case m == 0:
		// proto3 JSON cannot tell a missing mass from 0.
		vs.Add(f, "is required (missing or 0): the site's mass in amu, > 0")
	case m < 0:
		vs.Add(f, "must be > 0, got %v", m)
	case m < MinMassAmu || m > MaxMassAmu:
		vs.Add(f, "must be in [%g, %g] amu, got %v", MinMassAmu, MaxMassAmu, m)
	}
}

// checkCoincidences reports every pair of sound sites on the same point.
func (v *validator) checkCoincidences() {
	if !v.latticeOK {
		return
	}
	for i := 0; i < v.n; i++ {
		for j := i + 1; j < v.n; j++ {
			if !v.posOK[i] || !v.posOK[j] {
				continue
			}
			if dist := siteSeparation(v.c, i, j); dist < CoincidenceTolA {
				v.vs.Add(fmt.Sprintf("sites[%d].frac", j), "on the same point as sites[%d] (%.3g Å apart)", i, dist)
			}
		}
	}
}

// checkForce checks one force constant (in the crystal's unit) at field.
func (v *validator) checkForce(field string, x float64) {
	if d, bad := ForceViolation(x, v.c.ForceUnit); bad {
		v.vs.Add(field, "%s", d)
	}
}

// ForceViolation says what is wrong with the force constant x (a spring
// constant or a block element) in unit u, if anything: it must be finite,
// within ±MaxForceEVPerA2 and, unless 0, at least MinForceEVPerA2 in
// magnitude (both converted to u; an unknown unit is taken as eV/Å²).
func ForceViolation(x float64, u ForceUnit) (description string, bad bool) {
	lo, hi, name := MinForceEVPerA2, MaxForceEVPerA2, "eV/Å²"
	if u == NPerM {
		lo, hi, name = lo*EVPerA2InNPerM, hi*EVPerA2InNPerM, "N/m"
	}
	switch {
	case !finite(x):
		return fmt.Sprintf("must be finite, got %v", x), true
	case math.Abs(x) > hi:
		return fmt.Sprintf("must be within ±%g %s, got %v", hi, name, x), true
	case x != 0 && math.Abs(x) < lo:
		return fmt.Sprintf("must be 0 or at least %g %s in magnitude, got %v (a force constant that small changes no result; 0 switches the term off)", lo, name, x), true
	}
	return "", false
}

// bondKey names one bond: from site i to site j in the cell offset n.
type bondKey struct {
	i, j int
	n    [3]int
}

// canonical returns the one of k and its reverse (j, i, −n) that sorts
// first: a bond and its reverse are the same bond.
func (k bondKey) canonical() bondKey {
	r := bondKey{i: k.j, j: k.i, n: [3]int{-k.n[0], -k.n[1], -k.n[2]}}
	if r.i < k.i || (r.i == k.i && lessCell(r.n, k.n)) {
		return r
	}
	return k
}

// checkPair checks the site indices and cell offset of a spring or block
// at field f and returns its key; ok is false if any of them is bad (or
// the bond joins a site to itself in its own cell and allowSelf is false).
func (v *validator) checkPair(f string, from, to int, cell []int, allowSelf bool) (key bondKey, ok bool) {
	vs, n := v.vs, v.n
	ok = true
	if from < 0 || from >= n {
		vs.Add(f+".from_site", "site index %d out of range [0, %d)", from, n)
		ok = false
	}
	if to < 0 || to >= n {
		vs.Add(f+".to_site", "site index %d out of range [0, %d)", to, n)
		ok = false
	}
	if v.dimOK() && len(cell) != v.d {
		vs.Add(f+".cell", "must have %d integers (one per lattice vector), got %d", v.d, len(cell))
		return key, false
	}
	zero := true
	for k, x := range cell {
		if x > v.lim.MaxCellOffset || x < -v.lim.MaxCellOffset {
			vs.Add(fmt.Sprintf("%s.cell[%d]", f, k), "offset %d exceeds the limit of ±%d", x, v.lim.MaxCellOffset)
			ok = false
		}
		if x != 0 {
			zero = false
		}
		if k < 3 {
			key.n[k] = x
		}
	}
	if ok && from == to && zero && !allowSelf {
		vs.Add(f, "site %d is bonded to itself in the same cell", from)
		ok = false
	}
	key.i, key.j = from, to
	return key, ok
}

// checkSprings checks every spring: force constants, ends, a non-zero
// length, and no duplicate of an earlier spring.
func (v *validator) checkSprings() {
	seen := map[bondKey]int{}
	for idx, s := range v.c.Springs {
		f := fmt.Sprintf("springs[%d]", idx)
		v.checkForce(f+".k_long", s.KLong)
		v.checkForce(f+".k_trans", s.KTrans)
		key, ok := v.checkPair(f, s.From, s.To, s.Cell, false)
		if !ok {
			continue
		}
		if v.posOK[s.From] && v.posOK[s.To] {
			// A spring needs a direction: its two ends must be apart.
			if l := v.bondLength(s); l < CoincidenceTolA {
				v.vs.Add(f, "bond length %.3g Å is below %.0e Å: a spring needs two separate ends", l, CoincidenceTolA)
				continue
			}
		}
		ck := key.canonical()
		if prev, dup := seen[ck]; dup {
			v.vs.Add(f, "duplicate bond: the same bond as springs[%d] (a bond and its reverse are one bond)", prev)
			continue
		}
		seen[ck] = idx
	}
}

// bondLength is the Cartesian length (Å) of spring s, whose sites and cell
// have been checked.
func (v *validator) bondLength(s Spring) float64 {
	c := v.c
	var r [3]float64
	for k := range c.Lattice {
		df := c.Sites[s.To].Frac[k] + float64(s.Cell[k]) - c.Sites[s.From].Frac[k]
		for a := 0; a < 3; a++ {
			r[a] += df * c.Lattice[k][a]
		}
	}
	return lattice.Norm(r)
}

// checkBlocks checks every force-constant block: nine finite elements,
// its ends, and no duplicate of an earlier block.
func (v *validator) checkBlocks() {
	seen := map[bondKey]int{}
	for idx, b := range v.c.Blocks {
		f := fmt.Sprintf("blocks[%d]", idx)
		if len(b.Phi) != 9 {
			v.vs.Add(f+".phi", "must have 9 numbers (3×3 row-major), got %d", len(b.Phi))
		}
		for k, x := range b.Phi {
			v.checkForce(fmt.Sprintf("%s.phi[%d]", f, k), x)
		}
		key, ok := v.checkPair(f, b.From, b.To, b.Cell, true)
		if !ok {
			continue
		}
		ck := key.canonical()
		if prev, dup := seen[ck]; dup {
			v.vs.Add(f, "duplicate block: the same site pair and cell as blocks[%d] (a block's transpose is implied for the reverse pair)", prev)
			continue
		}
		seen[ck] = idx
	}
}

// checkShells checks every shell rule: no duplicate (in either label
// order), labels that some site carries, a shell number in range, and its
// force constants.
func (v *validator) checkShells() {
	vs := v.vs
	labels := map[string]bool{}
	for _, s := range v.c.Sites {
		labels[s.Label] = true
	}
	type shellKey struct {
		a, b  string
		shell int
	}
	seen := map[shellKey]int{}
	for idx, s := range v.c.Shells {
		f := fmt.Sprintf("shells[%d]", idx)
		// A shell between A and B is the same set of bonds as between B
		// and A.
		sk := shellKey{s.FromLabel, s.ToLabel, s.Shell}
		if sk.b < sk.a {
			sk.a, sk.b = sk.b, sk.a
		}
		if prev, dup := seen[sk]; dup {
			vs.Add(f, "duplicate shell: shell %d between %q and %q is already shells[%d]", s.Shell, s.FromLabel, s.ToLabel, prev)
		} else {
			seen[sk] = idx
		}
		if !labels[s.FromLabel] {
			vs.Add(f+".from_label", "no site has label %q", s.FromLabel)
		}
		if !labels[s.ToLabel] {
			vs.Add(f+".to_label", "no site has label %q", s.ToLabel)
		}
		if s.Shell < 1 {
			vs.Add(f+".shell", "must be ≥ 1 (1 = nearest neighbours), got %d", s.Shell)
		} else if s.Shell > maxShell {
			vs.Add(f+".shell", "must be ≤ %d, got %d", maxShell, s.Shell)
		}
		v.checkForce(f+".k_long", s.KLong)
		v.checkForce(f+".k_trans", s.KTrans)
	}
}

// maxShell is the highest neighbour shell a model may ask for.
const maxShell = 20

func lessCell(a, b [3]int) bool {
	for k := range a {
		if a[k] != b[k] {
			return a[k] < b[k]
		}
	}
	return false
}

// siteSeparation is the Cartesian distance between sites i and j after
// wrapping their fractional difference into [−½, ½).
func siteSeparation(c *Crystal, i, j int) float64 {
	var r [3]float64
	for k := range c.Lattice {
		df := c.Sites[j].Frac[k] - c.Sites[i].Frac[k]
		df -= math.Floor(df + 0.5)
		for a := 0; a < 3; a++ {
			r[a] += df * c.Lattice[k][a]
		}
	}
	return lattice.Norm(r)
}
