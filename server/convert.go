package server

import (
	"github.com/materials-lab/modegrid/physics"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// crystalFromProto converts the wire model to the physics model. It does no
// validation beyond the shape of the message; physics.Compile validates.
func crystalFromProto(c *modegridv1.Crystal) *physics.Crystal {
	out := &physics.Crystal{
		Name:          c.GetName(),
		Polarizations: int(c.GetPolarizations()),
	}
	switch c.GetForceUnit() {
	case modegridv1.ForceUnit_FORCE_UNIT_UNSPECIFIED, modegridv1.ForceUnit_FORCE_UNIT_EV_PER_A2:
		out.ForceUnit = physics.EVPerA2
	case modegridv1.ForceUnit_FORCE_UNIT_N_PER_M:
		out.ForceUnit = physics.NPerM
	default:
		out.ForceUnit = physics.ForceUnit(c.GetForceUnit())
	}
	for _, v := range c.GetLattice() {
		out.Lattice = append(out.Lattice, [3]float64{v.GetX(), v.GetY(), v.GetZ()})
	}
	for _, s := range c.GetSites() {
		out.Sites = append(out.Sites, physics.Site{Label: s.GetLabel(), MassAmu: s.GetMassAmu(), Frac: s.GetFrac(), BornCharge: s.GetBornCharge()})
	}
	for _, s := range c.GetSprings() {
		out.Springs = append(out.Springs, physics.Spring{From: int(s.GetFromSite()), To: int(s.GetToSite()), Cell: ints(s.GetCell()), KLong: s.GetKLong(), KTrans: s.GetKTrans()})
	}
	for _, s := range c.GetShells() {
		out.Shells = append(out.Shells, physics.Shell{FromLabel: s.GetFromLabel(), ToLabel: s.GetToLabel(), Shell: int(s.GetShell()), KLong: s.GetKLong(), KTrans: s.GetKTrans()})
	}
	out.EpsilonInf = c.GetEpsilonInf()
	for _, b := range c.GetBlocks() {
		out.Blocks = append(out.Blocks, physics.Block{From: int(b.GetFromSite()), To: int(b.GetToSite()), Cell: ints(b.GetCell()), Phi: b.GetPhi()})
	}
	return out
}

func ints(v []int32) []int {
	out := make([]int, len(v))
	for i, x := range v {
		out[i] = int(x)
	}
	return out
}
