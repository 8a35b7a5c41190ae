package thermo

import (
	"unsafe"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// Cost estimate of ComputeThermal, for admission control (the conventions
// of physics.Cost: memory allocated and an operation count).

// ThermalCost estimates ComputeThermal on grid modes of size s (not
// included: add GridModesCost, with eigenvectors for msd) at temps
// temperatures. Memory, from thermal.go, msd.go and thermal_series.go: the
// mode set (8 B of frequency and 8·nc B of channels per mode, nc = 1 or,
// with msd, 1 + sites·p(p+1)/2; every mode counted), its copy sorted into
// the frequency tree with the leaves' moments and the upper levels when
// the tree is worth building; for the DOS-integral route a tetrahedron DOS
// of dosRouteBins samples and its pseudo-modes; the sums per temperature;
// the result points (and per-site tensors with msd, and the solution at Γ
// of the divergence check). Work: the sums over
// every mode and channel at every temperature (an upper bound: the tree
// replaces most of them by series).
func ThermalCost(s physics.GridSize, temps int, msd bool, route ThermalRoute, reduced bool) physics.Cost {
	modes := int64(s.Points) * int64(s.Modes())
	nc := int64(1)
	if msd {
		nc += int64(s.Sites * s.P * (s.P + 1) / 2)
	}
	T := int64(temps)
	c := physics.Cost{Bytes: 1024 + modes*8*(1+nc) + 8*(nc-1)}
	tree := func(count, ncs int64) int64 {
		if !(count >= 4096 && T >= 4 && count*T > 1<<20) {
			return 0
		}
		nleaf := int64(1)
		for nleaf < treeMaxLeaves && nleaf*32 < count {
			nleaf *= 2
		}
		node := int64(unsafe.Sizeof(treeNode{}))
		return count*8*(1+ncs) + 16*(nleaf+1) + 2*nleaf*(node+8*ncs*treeMoments) + 4096
	}
	c.Bytes += tree(modes, nc)
	sums := 2 + nc
	if route == DOSIntegral {
		d := spectra.DOSCost(s, spectra.DOSOptions{}, dosRouteBins, reduced)
		c = c.Plus(d)
		c.Bytes += 2*8*dosRouteBins*2 + tree(dosRouteBins, 1)
		if msd {
			sums += 3
		}
	}
	c.Bytes += T * (24 + 8*sums) * 2
	// Per point, the θ_D status reason; per site and point, the divergence
	// reason of low-dimensional displacements (short strings, 128 B each).
	c.Bytes += T*(int64(unsafe.Sizeof(ThermalPoint{}))+reasonBytes) + elasticThetaBytes
	if msd {
		c.Bytes += T * int64(s.Sites) * (int64(unsafe.Sizeof(SiteMSD{})) + reasonBytes)
		if s.Dim < 3 {
			// The divergence check diagonalises D(Γ) once (msd.go,
			// msdDivergenceOf; in 3D it is skipped): a workspace without
			// eigenvectors and the frequencies.
			c = c.Plus(s.SolveCost())
		}
	}
	c.Flops += float64(modes) * (20 + 2*float64(nc)) // collecting the modes
	c.Flops += float64(T) * float64(modes) * (40 + 2*float64(nc))
	return c
}

// reasonBytes bounds one explanatory string of a thermal result (a θ_D
// status reason, a divergence reason).
const reasonBytes = 128

// elasticThetaBytes bounds what the elastic Debye temperature of a thermal
// result allocates once the model's long-wave limit is known: 512
// directions, each a few p-vectors and a 3p × p factor, about 256 B
// (elastic.go; measured 130–150 kB in all). The
// long-wave limit itself is computed once per model (at most
// maxLongWaveEntries of 8 B) and is part of the model's memory, not of a
// request's.
const elasticThetaBytes = 192 << 10
