package transport

import (
	"unsafe"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/parallel"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// Cost estimate of Compute, for admission control (the conventions of
// physics.Cost: memory allocated, an operation count).

// ConductivityCost estimates Compute on a grid of size s (s.Points every
// point, all diagonalised: velocities are not unfolded by symmetry) at
// temps temperatures for series sample geometries, with point defects
// (defects), cumulative curves of bins points, and gammaModes = true when
// a γ per mode is passed in (the caller's array, not counted). Memory,
// from conductivity.go, rates.go and cumulative.go: the point list (32 B a
// point); per mode the frequency, velocity, the two rates, the kept flag
// (8+24+8+8+1 B) and, per series, its boundary rates (8 B); the stream of
// velocities (physics.StreamCost); per series and slice of the sums 72 B per
// temperature, the series' points and the rotations of its symmetrisation; with defects the reduced grid
// modes and a tetrahedron DOS (physics.GridModesCost, spectra.DOSCost);
// with cumulative curves a share of 24 B per mode (allocated at once) and
// four arrays of bins.
// Work: the stream, the defect DOS, and per temperature, series and mode
// about 40 operations (one exponential).
func ConductivityCost(s physics.GridSize, temps, series int, defects bool, bins int) physics.Cost {
	modes := int64(s.Points) * int64(s.Modes())
	T, B := int64(temps), int64(max(series, 1))
	c := physics.Cost{Bytes: 8<<10 + 32*int64(s.Points) + modes*(49+8*B)}
	chunk := int(max(1, min(physics.DefaultChunkPoints, physics.DefaultChunkBytes/(8*int64(s.Modes())+24*int64(s.Modes())+64))))
	c = c.Plus(physics.StreamCost(s, s.Points, chunk, 0, physics.ModeOptions{Velocities: true}))
	// Every streamed chunk is copied out and dropped; counted whole, as
	// the collector may not have run before the sums (an upper bound).
	c.Bytes += int64(s.Points) * (int64(unsafe.Sizeof(physics.PointModes{})) + 32*int64(s.Modes()))
	slices := int64(parallel.MaxSlices) // bounds SliceCount
	c.Bytes += B * (slices*72*T + int64(unsafe.Sizeof(Series{})) + T*int64(unsafe.Sizeof(KappaPoint{})) + 48*72)
	if defects {
		c = c.Plus(physics.GridModesCost(s, physics.GridOptions{}))
		c = c.Plus(spectra.DOSCost(s, spectra.DOSOptions{}, spectra.DefaultDOSBins+2, true))
	}
	if bins > 0 {
		c.Bytes += B * (24*modes + 32*int64(bins) + 256)
		c.Flops += float64(B) * float64(modes) * 60
	}
	c.Flops += float64(T) * float64(B) * float64(modes) * 40
	return c
}
