package server

import (
	"context"
	"fmt"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/fcimport"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// maxSupercellSites caps the primitive sites of a model given as a
// supercell set: the sum-rule correction solves a dense 9n×9n system by
// SVD (n³ work), about 0.1 s at 64 sites. The supercell's atoms count
// against the server's max sites (its N² blocks are a model of N sites).
const maxSupercellSites = 64

// foldSupercell replaces c's interactions by the blocks folded from the
// crystal's supercell force-constant set, if it has one. A model with the
// set and springs, shells or blocks too is refused (they would not
// combine meaningfully). maxSites 0 means no cap.
func foldSupercell(ctx context.Context, cr *modegridv1.Crystal, c *physics.Crystal, maxSites int) error {
	fc := cr.GetSupercellFc()
	if fc == nil {
		return nil
	}
	var vs violations
	if len(cr.GetSprings())+len(cr.GetShells())+len(cr.GetBlocks()) > 0 {
		vs.Add("supercell_fc", "a model has either a supercell force-constant set or springs/shells/blocks, not both")
	}
	if maxSites > 0 && len(fc.GetAtoms()) > maxSites {
		vs.Add("supercell_fc.atoms", "%d atoms exceed the server's max sites %d", len(fc.GetAtoms()), maxSites)
	}
	if len(cr.GetSites()) > maxSupercellSites {
		vs.Add("sites", "%d sites exceed the cap of %d for a model given as a supercell set", len(cr.GetSites()), maxSupercellSites)
	}
	if err := vs.Err(); err != nil {
		return err
	}
	blocks, _, err := fcimport.Fold(ctx, c, setFromProto(fc))
	if err != nil {
		return fmt.Errorf("folding the supercell force constants: %w", err)
	}
	c.Blocks = blocks
	return nil
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
