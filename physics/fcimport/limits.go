package fcimport

// The limits of the folded model, checked on the set so that a violation
// names the set's fields (supercell_fc.…), not blocks the caller never
// gave: physics.Validate would otherwise refuse the folded blocks as
// blocks[i].cell[k] or blocks[i].phi[k].

import (
	"fmt"

	"github.com/materials-lab/modegrid/physics"
)

// maxListed bounds the elements named one by one in a violation list; the
// rest are counted.
const maxListed = 8

// checkPhi checks every element of the set's Φ as physics.Validate checks
// a block element (finite, in range, 0 or not absurdly small, in unit u),
// naming the first maxListed bad ones and counting the rest.
func checkPhi(vs *physics.Violations, phi []float64, u physics.ForceUnit) {
	bad := 0
	for i, x := range phi {
		d, isBad := physics.ForceViolation(x, u)
		if !isBad {
			continue
		}
		if bad < maxListed {
			vs.Add(fmt.Sprintf("supercell_fc.phi[%d]", i), "%s", d)
		}
		bad++
	}
	if bad > maxListed {
		vs.Add("supercell_fc.phi", "%d more elements out of range (%d in all; the first %d are listed)", bad-maxListed, bad, maxListed)
	}
}

// reach is the farthest cell offset met along one lattice vector and
// where: the offset, the two atoms (or sites, after the fold) and how many
// pairs lie past the limit.
type reach struct {
	off      int
	from, to int
	beyond   int
}

// noteReach records the offset r of the pair (from, to) along each of
// the d axes in far, counting the offsets past ±limit.
func noteReach(far *[3]reach, r [3]int, d, from, to, limit int) {
	for c := 0; c < d; c++ {
		a := r[c]
		if a > limit || a < -limit {
			far[c].beyond++
		}
		if abs(a) > abs(far[c].off) {
			far[c] = reach{off: a, from: from, to: to, beyond: far[c].beyond}
		}
	}
}

// checkReach checks, before the fold, the two limits of physics.Validate
// that the folded blocks could break although every number of the set is
// sound: a cell offset past lim.MaxCellOffset (the nearest image of a pair
// lies up to about half the supercell away) and more blocks than
// lim.MaxInteractions. It runs the image search the fold needs anyway
// (memoised), over every pair of a row atom and an atom.
func (g *geometry) checkReach(s *Set, maps []atomMap, lim physics.Limits) error {
	lim = lim.WithDefaults()
	var far [3]reach
	keys := map[key]bool{}
	for _, x := range g.rowOrder(s, maps) {
		for j := range s.Atoms {
			_, images := g.images(maps[x.atom], maps[j])
			for _, r := range images {
				k := key{maps[x.atom].site, maps[j].site, r}
				keys[k], keys[key{k.t, k.s, neg(r)}] = true, true
				noteReach(&far, r, g.d, x.atom, j, lim.MaxCellOffset)
			}
		}
	}
	var vs physics.Violations
	for c := 0; c < g.d; c++ {
		if f := far[c]; f.beyond > 0 {
			vs.Add("supercell_fc.matrix", "the supercell is too long along lattice[%d] for a model: the nearest image of atom %d seen from atom %d is %+d cells away along it (%d pairs of the set fold past the limit), beyond the ±%d limit of a model's cell offsets",
				c, f.to, f.from, f.off, f.beyond, lim.MaxCellOffset)
		}
	}
	if n := canonicalCount(keys); n > lim.MaxInteractions {
		vs.Add("supercell_fc.atoms", "the %d atoms fold into %d force-constant blocks, more than the limit of %d interactions", len(s.Atoms), n, lim.MaxInteractions)
	}
	return vs.Err()
}

// canonicalCount is the number of blocks in the canonical half of a set
// with these keys (blocksOf's rule).
func canonicalCount(keys map[key]bool) int {
	n := 0
	for k := range keys {
		if k.s < k.t || (k.s == k.t && !lessZero(k.r)) {
			n++
		}
	}
	return n
}

// flushTiny sets to 0 every folded element that is not 0 but smaller in
// magnitude than physics.MinForceEVPerA2 (in unit u): the residue of a
// cancellation in a mean or in the sum-rule correction, far below their
// rounding, which physics.Validate would refuse although the set's own
// numbers are sound.
func flushTiny(blocks []physics.Block, u physics.ForceUnit) {
	lo := physics.MinForceEVPerA2
	if u == physics.NPerM {
		lo *= physics.EVPerA2InNPerM
	}
	for _, b := range blocks {
		for e, x := range b.Phi {
			if x != 0 && x > -lo && x < lo {
				b.Phi[e] = 0
			}
		}
	}
}

// checkFolded checks the final blocks as physics.Validate will, naming the
// set's fields: the offsets (the group closure of Symmetrize can reach
// farther than the images), their number, and every element (a folded
// element is a mean of the set's, an on-site one the sum-rule correction's
// sum, which can pass the largest accepted), the first maxListed bad ones
// named with their block. flushTiny has run.
func checkFolded(blocks []physics.Block, d int, u physics.ForceUnit, lim physics.Limits) error {
	lim = lim.WithDefaults()
	var vs physics.Violations
	var far [3]reach
	bad := 0
	for _, b := range blocks {
		var r [3]int
		copy(r[:], b.Cell)
		noteReach(&far, r, d, b.From, b.To, lim.MaxCellOffset)
		for e, x := range b.Phi {
			desc, isBad := physics.ForceViolation(x, u)
			if !isBad {
				continue
			}
			if bad < maxListed {
				vs.Add("supercell_fc.phi", "the folded block Φ(site %d, cell 0; site %d, cell %v), element %d: %s", b.From, b.To, b.Cell, e, desc)
			}
			bad++
		}
	}
	if bad > maxListed {
		vs.Add("supercell_fc.phi", "%d more folded elements out of range (%d in all; the first %d are listed)", bad-maxListed, bad, maxListed)
	}
	for c := 0; c < d; c++ {
		if f := far[c]; f.beyond > 0 {
			vs.Add("supercell_fc.matrix", "the folded set reaches cell offset %+d along lattice[%d] (site %d to site %d; %d blocks past the limit), beyond the ±%d limit of a model's cell offsets",
				f.off, c, f.from, f.to, f.beyond, lim.MaxCellOffset)
		}
	}
	if len(blocks) > lim.MaxInteractions {
		vs.Add("supercell_fc.atoms", "the set folds into %d force-constant blocks, more than the limit of %d interactions", len(blocks), lim.MaxInteractions)
	}
	return vs.Err()
}
