package qha

import (
	"unsafe"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/thermo"
)

// Cost estimates of this package's computations, for admission control
// (the conventions of physics.Cost: memory allocated, an operation count).

// GruneisenCost estimates ModeGruneisen over points q-points with vols
// models of size s (s.Points is ignored). Memory, from gruneisen.go: the
// result (frequency, γ and the defined flag per mode, the caller's point
// list not counted); per block of gammaBlock points, every volume's
// frequencies and eigenvectors, and one stream of that block at a time
// (physics.StreamCost with eigenvectors); per worker the assignment
// scratch. Work: every point diagonalised with eigenvectors at every
// volume, then per other volume an n² overlap matrix of n-vectors (8n³)
// and the assignment (about n³ comparisons).
func GruneisenCost(s physics.GridSize, points, vols int) physics.Cost {
	n := int64(s.Modes())
	P := int64(points)
	block := int64(min(points, gammaBlock(int(n), vols)))
	c := physics.Cost{Bytes: 2048 + P*n*17 + block*int64(vols)*(8*n+16*n*n) + 8*((P+block-1)/max(block, 1)+block)}
	chunk := int(max(1, min(physics.DefaultChunkPoints, physics.DefaultChunkBytes/(16*n*n+8*n+64))))
	stream := physics.StreamCost(s, int(block), chunk, 0, physics.ModeOptions{Eigenvectors: true})
	c.Bytes += stream.Bytes + int64(s.Workers+4)*(8*n*n+int64(vols)*8*n+64*n+1024)
	// Every streamed chunk (frequencies and eigenvectors of each point)
	// is copied out and dropped: counted whole, the collector may not run
	// in between; and the point list of a grid (GridGruneisen).
	c.Bytes += int64(vols)*P*(int64(unsafe.Sizeof(physics.PointModes{}))+8*n+16*n*n) + 32*P
	c.Flops = float64(vols) * physics.StreamCost(s, points, chunk, 0, physics.ModeOptions{Eigenvectors: true}).Flops
	c.Flops += float64(P) * float64(vols-1) * 9 * float64(n*n*n)
	return c
}

// QHACost estimates Compute for vols models of size s (the grid's) at
// temps temperatures: every volume's grid modes and thermal sums
// (physics.GridModesCost, thermo.ThermalCost by mode sum; held one volume
// at a time but counted for all, since the results are kept), the
// per-temperature fits (a few small matrices each) and the points.
func QHACost(s physics.GridSize, vols, temps int) physics.Cost {
	per := physics.GridModesCost(s, physics.GridOptions{}).Plus(thermo.ThermalCost(s, temps, false, thermo.ModeSum, true))
	c := physics.Cost{Bytes: per.Bytes * int64(vols), Flops: per.Flops * float64(vols)}
	T := int64(temps)
	// Per temperature: the equation-of-state fit (Levenberg–Marquardt: up to
	// 200 steps, each a Jacobian, residual vectors and a small QR, about
	// 4 kB per volume in all, measured) and the entropy and Cv fits.
	c.Bytes += T * (int64(unsafe.Sizeof(Point{})) + 256 + int64(vols)*(8*12+5<<10) + 12<<10)
	c.Flops += float64(T) * (float64(vols)*2000 + 200*(300*float64(vols)+3000) + 600*200)
	return c
}
