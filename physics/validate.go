// Validation of a Crystal: every violation at once, each with its field
// path (proto snake_case names) and the bad value; the size limits.

package physics

import (
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

func (l Limits) withDefaults() Limits {
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

// Violations accumulates Violation values, so that a check can report
// every problem at once; the zero value is ready to use. Packages built on
// the core (spectra, thermo) validate their options with it too.
type Violations struct{ List []Violation }

// Add records a violation of field, its description formatted as by
// fmt.Sprintf.
func (vs *Violations) Add(field, format string, args ...any) {
	vs.List = append(vs.List, Violation{Field: field, Description: fmt.Sprintf(format, args...)})
}

// Err is nil when nothing was recorded, else a *ValidationError listing
// every violation in the order added.
func (vs *Violations) Err() error {
	if len(vs.List) == 0 {
		return nil
	}
	return &ValidationError{Violations: vs.List}
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
	validate(c, lim.withDefaults(), &vs)
	return vs.Err()
}

func validate(c *Crystal, lim Limits, vs *Violations) {
	d := len(c.Lattice)
	switch {
	case d == 0:
		vs.Add("lattice", "must have 1 to 3 vectors, got none")
	case d > 3:
		vs.Add("lattice", "must have 1 to 3 vectors, got %d", d)
	}
	latticeOK := d >= 1 && d <= 3
	for i, v := range c.Lattice {
		for k, x := range v {
			if !finite(x) {
				vs.Add(fmt.Sprintf("lattice[%d].%c", i, "xyz"[k]), "must be finite, got %v", x)
				latticeOK = false
			} else if math.Abs(x) > MaxLengthA {
				vs.Add(fmt.Sprintf("lattice[%d].%c", i, "xyz"[k]), "must be within ±%g Å, got %v", MaxLengthA, x)
				latticeOK = false
			}
		}
	}
	if latticeOK {
		for i, v := range c.Lattice {
			if l := lattice.Norm(v); l < LatticeTolA {
				vs.Add(fmt.Sprintf("lattice[%d]", i), "length %.3g Å is below %.0e Å", l, LatticeTolA)
				latticeOK = false
			}
		}
	}
	if latticeOK {
		m := lattice.GramMeasure(c.Lattice)
		prod := 1.0
		for _, v := range c.Lattice {
			prod *= lattice.Norm(v)
		}
		what := [...]string{"", "length", "area", "volume"}[d]
		switch {
		case m < LatticeTolA:
			vs.Add("lattice", "degenerate: cell %s %.3g is below %.0e (vectors are linearly dependent)", what, m, LatticeTolA)
			latticeOK = false
		case m < DegenerateLatticeRel*prod:
			vs.Add("lattice", "degenerate: cell %s %.3g is %.2g of the product of the vector lengths, below %.0e (vectors nearly linearly dependent)", what, m, m/prod, DegenerateLatticeRel)
			latticeOK = false
		}
	}
	if c.Polarizations < 0 || c.Polarizations > 3 {
		vs.Add("polarizations", "must be 1, 2 or 3 (0 means 3), got %d", c.Polarizations)
	}
	if c.ForceUnit != EVPerA2 && c.ForceUnit != NPerM {
		vs.Add("force_unit", "unknown unit %d", c.ForceUnit)
	}

	n := len(c.Sites)
	if n == 0 {
		vs.Add("sites", "must have at least one site, got none")
	}
	if n > lim.MaxSites {
		vs.Add("sites", "has %d sites, more than the limit of %d", n, lim.MaxSites)
	}
	posOK := make([]bool, n)
	for i, s := range c.Sites {
		f := fmt.Sprintf("sites[%d]", i)
		if !finite(s.MassAmu) {
			vs.Add(f+".mass_amu", "must be finite, got %v", s.MassAmu)
		} else if s.MassAmu == 0 {
			// proto3 JSON cannot tell a missing mass from 0.
			vs.Add(f+".mass_amu", "is required (missing or 0): the site's mass in amu, > 0")
		} else if s.MassAmu < 0 {
			vs.Add(f+".mass_amu", "must be > 0, got %v", s.MassAmu)
		} else if s.MassAmu < MinMassAmu || s.MassAmu > MaxMassAmu {
			vs.Add(f+".mass_amu", "must be in [%g, %g] amu, got %v", MinMassAmu, MaxMassAmu, s.MassAmu)
		}
		if d >= 1 && d <= 3 && len(s.Frac) != d {
			vs.Add(f+".frac", "must have %d numbers (one per lattice vector), got %d", d, len(s.Frac))
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
		posOK[i] = ok && latticeOK
	}
	if latticeOK {
		for i := 0; i < n; i++ {
			for j := i + 1; j < n; j++ {
				if !posOK[i] || !posOK[j] {
					continue
				}
				if dist := siteSeparation(c, i, j); dist < CoincidenceTolA {
					vs.Add(fmt.Sprintf("sites[%d].frac", j), "on the same point as sites[%d] (%.3g Å apart)", i, dist)
				}
			}
		}
	}

	total := len(c.Springs) + len(c.Blocks)
	type bondKey struct {
		i, j int
		n    [3]int
	}
	seen := map[bondKey]int{}
	checkPair := func(f string, from, to int, cell []int, allowSelf bool) (bondKey, bool) {
		ok := true
		if from < 0 || from >= n {
			vs.Add(f+".from_site", "site index %d out of range [0, %d)", from, n)
			ok = false
		}
		if to < 0 || to >= n {
			vs.Add(f+".to_site", "site index %d out of range [0, %d)", to, n)
			ok = false
		}
		var key bondKey
		if d >= 1 && d <= 3 && len(cell) != d {
			vs.Add(f+".cell", "must have %d integers (one per lattice vector), got %d", d, len(cell))
			return key, false
		}
		zero := true
		for k, x := range cell {
			if x > lim.MaxCellOffset || x < -lim.MaxCellOffset {
				vs.Add(fmt.Sprintf("%s.cell[%d]", f, k), "offset %d exceeds the limit of ±%d", x, lim.MaxCellOffset)
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
	canonical := func(k bondKey) bondKey {
		// A bond and its reverse (j, i, −n) are the same bond.
		r := bondKey{i: k.j, j: k.i, n: [3]int{-k.n[0], -k.n[1], -k.n[2]}}
		if r.i < k.i || (r.i == k.i && lessCell(r.n, k.n)) {
			return r
		}
		return k
	}
	maxForce, forceUnit := MaxForceEVPerA2, "eV/Å²"
	if c.ForceUnit == NPerM {
		maxForce, forceUnit = MaxForceEVPerA2*EVPerA2InNPerM, "N/m"
	}
	checkForce := func(field string, v float64) {
		if !finite(v) {
			vs.Add(field, "must be finite, got %v", v)
		} else if math.Abs(v) > maxForce {
			vs.Add(field, "must be within ±%g %s, got %v", maxForce, forceUnit, v)
		}
	}
	for idx, s := range c.Springs {
		f := fmt.Sprintf("springs[%d]", idx)
		checkForce(f+".k_long", s.KLong)
		checkForce(f+".k_trans", s.KTrans)
		key, ok := checkPair(f, s.From, s.To, s.Cell, false)
		if !ok {
			continue
		}
		if posOK[s.From] && posOK[s.To] {
			// A spring needs a direction: its two ends must be apart.
			var r [3]float64
			for k := range c.Lattice {
				df := c.Sites[s.To].Frac[k] + float64(s.Cell[k]) - c.Sites[s.From].Frac[k]
				for a := 0; a < 3; a++ {
					r[a] += df * c.Lattice[k][a]
				}
			}
			if l := lattice.Norm(r); l < CoincidenceTolA {
				vs.Add(f, "bond length %.3g Å is below %.0e Å: a spring needs two separate ends", l, CoincidenceTolA)
				continue
			}
		}
		ck := canonical(key)
		if prev, dup := seen[ck]; dup {
			vs.Add(f, "duplicate bond: the same bond as springs[%d] (a bond and its reverse are one bond)", prev)
			continue
		}
		seen[ck] = idx
	}
	seenBlocks := map[bondKey]int{}
	for idx, b := range c.Blocks {
		f := fmt.Sprintf("blocks[%d]", idx)
		if len(b.Phi) != 9 {
			vs.Add(f+".phi", "must have 9 numbers (3×3 row-major), got %d", len(b.Phi))
		}
		for k, x := range b.Phi {
			checkForce(fmt.Sprintf("%s.phi[%d]", f, k), x)
		}
		key, ok := checkPair(f, b.From, b.To, b.Cell, true)
		if !ok {
			continue
		}
		ck := canonical(key)
		if prev, dup := seenBlocks[ck]; dup {
			vs.Add(f, "duplicate block: the same site pair and cell as blocks[%d] (a block's transpose is implied for the reverse pair)", prev)
			continue
		}
		seenBlocks[ck] = idx
	}
	labels := map[string]bool{}
	for _, s := range c.Sites {
		labels[s.Label] = true
	}
	type shellKey struct {
		a, b  string
		shell int
	}
	seenShells := map[shellKey]int{}
	for idx, s := range c.Shells {
		f := fmt.Sprintf("shells[%d]", idx)
		// A shell between A and B is the same set of bonds as between B
		// and A.
		sk := shellKey{s.FromLabel, s.ToLabel, s.Shell}
		if sk.b < sk.a {
			sk.a, sk.b = sk.b, sk.a
		}
		if prev, dup := seenShells[sk]; dup {
			vs.Add(f, "duplicate shell: shell %d between %q and %q is already shells[%d]", s.Shell, s.FromLabel, s.ToLabel, prev)
		} else {
			seenShells[sk] = idx
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
		checkForce(f+".k_long", s.KLong)
		checkForce(f+".k_trans", s.KTrans)
	}
	if total > lim.MaxInteractions {
		vs.Add("springs", "springs and blocks number %d, more than the limit of %d interactions", total, lim.MaxInteractions)
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
