package server

import (
	"context"
	"fmt"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/fcimport"
	"github.com/materials-lab/modegrid/physics/polar"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// maxSupercellSites caps the primitive sites of a model given as a
// supercell set: first-principles cells of up to 200 atoms and some
// room. The fold's cost grows as n² (image search) and n·N (blocks), its
// sum-rule correction as two n×n SVDs (n³, milliseconds at 256 sites);
// admission counts all of it (foldCost). The supercell's atoms have a cap
// of their own (supercellAtomsPerSite).
const maxSupercellSites = 256

// supercellAtomsPerSite scales the server's max sites into the cap on a
// set's supercell atoms: the atoms are not sites of the folded model (it
// has the primitive cell's), they size the input and the fold, which the
// message and upload caps and the fold's admission (foldCost) bound; so a
// 2×2×2 supercell of a cell as large as the largest model is taken (a
// 200-atom cell's set has 1 600 atoms).
const supercellAtomsPerSite = 8

// foldSupercell returns c with its interactions replaced by the blocks
// folded from the crystal's supercell force-constant set, if it has one
// (c itself otherwise). With opt.Symmetrize the lattice and sites are made
// exactly symmetric and the blocks averaged over the space group (the
// model is then already symmetric: compileEntry does not symmetrise it
// again). A model with the set and springs, shells or blocks too is
// refused (they would not combine meaningfully). maxSites 0 means no cap.
// The returned report (nil without a set) says what the fold found and
// corrected; CheckModel answers it. For a polar crystal the dipole–dipole
// part is taken out of the set before the fold (and the compiled model
// adds it back at every q), with the charges made neutral first when
// enforce is set, as the model will use them.
func foldSupercell(ctx context.Context, cr *modegridv1.Crystal, c *physics.Crystal, maxSites int, opt fcimport.Options, enforce bool) (*physics.Crystal, *modegridv1.SupercellFold, error) {
	fc := cr.GetSupercellFc()
	if fc == nil {
		return c, nil, nil
	}
	var vs violations
	if len(cr.GetSprings())+len(cr.GetShells())+len(cr.GetBlocks()) > 0 {
		vs.Add("supercell_fc", "a model has either a supercell force-constant set or springs/shells/blocks, not both")
	}
	if maxSites > 0 && len(fc.GetAtoms()) > supercellAtomsPerSite*maxSites {
		vs.Add("supercell_fc.atoms", "%d atoms exceed the cap of %d (%d × the server's max sites %d)", len(fc.GetAtoms()), supercellAtomsPerSite*maxSites, supercellAtomsPerSite, maxSites)
	}
	if len(cr.GetSites()) > maxSupercellSites {
		vs.Add("sites", "%d sites exceed the cap of %d for a model given as a supercell set", len(cr.GetSites()), maxSupercellSites)
	}
	if err := vs.Err(); err != nil {
		return nil, nil, err
	}
	set := setFromProto(fc)
	if len(c.EpsilonInf) > 0 {
		var err error
		if set.LongRange, err = polar.SupercellPart(ctx, c, set.Matrix, enforce); err != nil {
			return nil, nil, err
		}
	}
	out, rep, err := fcimport.FoldModel(ctx, c, set, opt)
	if err != nil {
		return nil, nil, fmt.Errorf("folding the supercell force constants: %w", err)
	}
	return out, foldReport(fc, rep, c.ForceUnit), nil
}

// foldReport is the wire form of the fold's report. Every supercell atom
// is mapped when Fold succeeds (an unmapped atom is a violation). Sizes
// are converted from the crystal's force unit to eV/Å².
func foldReport(fc *modegridv1.SupercellForceConstants, r fcimport.Report, unit physics.ForceUnit) *modegridv1.SupercellFold {
	tol := fc.GetToleranceA()
	if tol == 0 {
		tol = fcimport.DefaultTolA
	}
	ev := func(x float64) float64 {
		if unit == physics.NPerM {
			return x / physics.EVPerA2InNPerM
		}
		return x
	}
	return &modegridv1.SupercellFold{
		AtomsMapped:              uint32(len(fc.GetAtoms())),
		ToleranceA:               tol,
		SharedImagePairs:         uint32(r.Multiplicities),
		PermutationBeforeEvPerA2: ev(r.PermutationBefore),
		PermutationAfterEvPerA2:  ev(r.PermutationAfter),
		SumRuleBeforeEvPerA2:     ev(r.SumRuleBefore),
		SumRuleAfterEvPerA2:      ev(r.SumRuleAfter),
		Operations:               uint32(r.Operations),
		InvarianceBeforeEvPerA2:  ev(r.InvarianceBefore),
		InvarianceAfterEvPerA2:   ev(r.InvarianceAfter),
	}
}

// setFromProto converts the wire set to fcimport's; Fold validates it.
func setFromProto(fc *modegridv1.SupercellForceConstants) *fcimport.Set {
	s := &fcimport.Set{
		Matrix:     ints(fc.GetMatrix()),
		Fractional: fc.GetFractional(),
		Phi:        fc.GetPhi(),
		TolA:       fc.GetToleranceA(),
	}
	for _, a := range fc.GetAtoms() {
		s.Atoms = append(s.Atoms, a.GetPosition())
	}
	for _, p := range fc.GetPrimitiveAtoms() {
		s.PrimitiveAtoms = append(s.PrimitiveAtoms, int(p))
	}
	return s
}
