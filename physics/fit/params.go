// Parameter paths: a number of the model named by its place in the model
// file, resolved against a Crystal through one table of kinds.

package fit

import (
	"fmt"
	"regexp"
	"strconv"

	"github.com/materials-lab/modegrid/physics"
)

// kind is one sort of model number a path can name: the collection of the
// Crystal it lives in, its field (with the protobuf field name users see
// in model files, and the JSON spelling protojson also reads), and how to
// reach it. Every kind listed here is linear in the dynamical matrix: its
// derivative is the dynamical matrix of the unit-parameter model (eval.go).
//
// Adding a kind is one entry of this table. The one kind on which D does
// not depend linearly, a site's Born effective charge
// (sites[i].born_charge[k]), is marked charge: D is quadratic in it, and
// charges.go gives its derivative exactly from models compiled with
// charges only; see the Adding a parameter kind section of doc.go.
type kind struct {
	collection string // "springs"
	field      string // "k_long": the proto field name
	json       string // "kLong": the protojson name, accepted as a spelling
	width      int    // 0: a scalar field; k > 0: the field is a list of k numbers (phi[0..8])
	// charge marks a Born effective charge: D depends on it quadratically
	// (the dipole–dipole term is bilinear in the charges), so its
	// derivative comes from the charge models of charges.go, not from a
	// unit-parameter model; its bound is physics.MaxBornCharge (e), not
	// the force limit.
	charge bool
	count  func(c *physics.Crystal) int
	ref    func(c *physics.Crystal, i, k int) *float64
}

// kinds is the table of parameter kinds.
var kinds = []kind{
	{"springs", "k_long", "kLong", 0, false, func(c *physics.Crystal) int { return len(c.Springs) },
		func(c *physics.Crystal, i, _ int) *float64 { return &c.Springs[i].KLong }},
	{"springs", "k_trans", "kTrans", 0, false, func(c *physics.Crystal) int { return len(c.Springs) },
		func(c *physics.Crystal, i, _ int) *float64 { return &c.Springs[i].KTrans }},
	{"shells", "k_long", "kLong", 0, false, func(c *physics.Crystal) int { return len(c.Shells) },
		func(c *physics.Crystal, i, _ int) *float64 { return &c.Shells[i].KLong }},
	{"shells", "k_trans", "kTrans", 0, false, func(c *physics.Crystal) int { return len(c.Shells) },
		func(c *physics.Crystal, i, _ int) *float64 { return &c.Shells[i].KTrans }},
	{"blocks", "phi", "phi", 9, false, func(c *physics.Crystal) int { return len(c.Blocks) },
		func(c *physics.Crystal, i, k int) *float64 { return &c.Blocks[i].Phi[k] }},
	{"sites", "born_charge", "bornCharge", 9, true, func(c *physics.Crystal) int { return len(c.Sites) },
		func(c *physics.Crystal, i, k int) *float64 { return &c.Sites[i].BornCharge[k] }},
}

// Path is a resolved parameter path: one number of a Crystal.
type Path struct {
	kind *kind
	i, k int // element of the collection, and index within a list field
}

// String is the canonical spelling: proto field names, e.g.
// "springs[0].k_long", "blocks[2].phi[4]".
func (p Path) String() string {
	s := fmt.Sprintf("%s[%d].%s", p.kind.collection, p.i, p.kind.field)
	if p.kind.width > 0 {
		s += fmt.Sprintf("[%d]", p.k)
	}
	return s
}

// Get reads the number p names in c.
func (p Path) Get(c *physics.Crystal) float64 { return *p.kind.ref(c, p.i, p.k) }

// set writes v into the number p names in c (c must own that storage: see
// cloneForces).
func (p Path) set(c *physics.Crystal, v float64) { *p.kind.ref(c, p.i, p.k) = v }

var pathRE = regexp.MustCompile(`^([a-z_]+)\[([0-9]+)\]\.([A-Za-z_]+)(?:\[([0-9]+)\])?$`)

// ParsePath resolves a path such as "springs[0].k_long",
// "shells[1].k_trans" or "blocks[2].phi[4]" (JSON spellings such as
// "springs[0].kLong" are read too) against c. The error says what is wrong
// in the path's own terms.
func ParsePath(c *physics.Crystal, s string) (Path, error) {
	m := pathRE.FindStringSubmatch(s)
	if m == nil {
		return Path{}, fmt.Errorf("%q is not a parameter path: want COLLECTION[i].FIELD or COLLECTION[i].FIELD[k], e.g. springs[0].k_long, shells[1].k_trans, blocks[2].phi[4]", s)
	}
	coll, field := m[1], m[3]
	i, err1 := strconv.Atoi(m[2])
	var known bool
	for x := range kinds {
		kd := &kinds[x]
		if kd.collection != coll {
			continue
		}
		known = true
		if field != kd.field && field != kd.json {
			continue
		}
		return resolve(c, kd, s, i, err1, m[4])
	}
	if !known {
		return Path{}, fmt.Errorf("%q: no parameter of the model lives in %q (parameters: %s)", s, coll, kindList())
	}
	return Path{}, fmt.Errorf("%q: %s has no fitted field %q (parameters: %s)", s, coll, field, kindList())
}

// resolve checks the indices of a path of kind kd.
func resolve(c *physics.Crystal, kd *kind, s string, i int, ierr error, kstr string) (Path, error) {
	n := kd.count(c)
	if ierr != nil || i >= n {
		return Path{}, fmt.Errorf("%q: index %s out of range: the model has %d %s", s, strconvQuote(i, ierr), n, kd.collection)
	}
	if kd.charge && len(c.Sites[i].BornCharge) != kd.width {
		return Path{}, fmt.Errorf("%q: site %d has no Born charge (9 numbers): only a polar model (Born charges and ε∞) has charges to fit", s, i)
	}
	p := Path{kind: kd, i: i}
	switch {
	case kd.width == 0 && kstr != "":
		return Path{}, fmt.Errorf("%q: %s.%s is a single number, not a list", s, kd.collection, kd.field)
	case kd.width > 0 && kstr == "":
		return Path{}, fmt.Errorf("%q: %s.%s is a list of %d numbers: name one, e.g. %s[%d].%s[0]", s, kd.collection, kd.field, kd.width, kd.collection, i, kd.field)
	case kd.width > 0:
		k, err := strconv.Atoi(kstr)
		if err != nil || k >= kd.width {
			return Path{}, fmt.Errorf("%q: element %s out of range [0, %d)", s, kstr, kd.width)
		}
		p.k = k
	}
	return p, nil
}

func strconvQuote(i int, err error) string {
	if err != nil {
		return "(too large)"
	}
	return strconv.Itoa(i)
}

// kindList names every parameter kind, for error messages.
func kindList() string {
	s := ""
	for x, kd := range kinds {
		if x > 0 {
			s += ", "
		}
		s += kd.collection + "[i]." + kd.field
		if kd.width > 0 {
			s += fmt.Sprintf("[0..%d]", kd.width-1)
		}
	}
	return s
}

// cloneForces returns a copy of c that owns its force constants (springs,
// shells, blocks and their phi) and its sites' Born charges; the lattice
// and the rest of the sites are shared, never written.
func cloneForces(c *physics.Crystal) *physics.Crystal {
	out := *c
	out.Sites = append([]physics.Site(nil), c.Sites...)
	for i := range out.Sites {
		if z := out.Sites[i].BornCharge; z != nil {
			out.Sites[i].BornCharge = append([]float64(nil), z...)
		}
	}
	out.Springs = append([]physics.Spring(nil), c.Springs...)
	out.Shells = append([]physics.Shell(nil), c.Shells...)
	out.Blocks = make([]physics.Block, len(c.Blocks))
	for i, b := range c.Blocks {
		b.Phi = append([]float64(nil), b.Phi...)
		out.Blocks[i] = b
	}
	return &out
}

// zeroForces returns a copy of c with every force constant 0: the
// skeleton of a unit-parameter model (the same springs, shells and
// blocks, so the same on-site blocks given or left to the sum rule, and
// the same bonds found by the shells). Its charges are c's; see
// withoutCharges and charges.go.
func zeroForces(c *physics.Crystal) *physics.Crystal {
	out := cloneForces(c)
	for i := range out.Springs {
		out.Springs[i].KLong, out.Springs[i].KTrans = 0, 0
	}
	for i := range out.Shells {
		out.Shells[i].KLong, out.Shells[i].KTrans = 0, 0
	}
	for i := range out.Blocks {
		clear(out.Blocks[i].Phi)
	}
	return out
}

// withoutCharges returns c without polar data (no Born charges, no ε∞):
// the skeleton of the unit-parameter models of the force constants, whose
// D must hold the short-range term only (the dipole–dipole term depends
// on the charges alone, not on any force constant). c must own its sites
// (cloneForces).
func withoutCharges(c *physics.Crystal) *physics.Crystal {
	c.EpsilonInf = nil
	for i := range c.Sites {
		c.Sites[i].BornCharge = nil
	}
	return c
}

// isCharge reports whether p names a Born effective charge.
func (p Path) isCharge() bool { return p.kind.charge }

// paramLimit is the largest |value| of the number p names: the force
// limit for force constants, physics.MaxBornCharge for charges.
func paramLimit(c *physics.Crystal, p Path) float64 {
	if p.isCharge() {
		return physics.MaxBornCharge
	}
	return forceLimit(c)
}
