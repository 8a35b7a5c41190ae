package qha

import (
	"context"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/parallel"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// ModeGammas holds mode Grüneisen parameters γ = −∂ln ω/∂ln V at the
// reference volume of a VolumeSet, on a list of q-points.
type ModeGammas struct {
	NModes  int
	Points  []mesh.QPoint // as given (weights kept)
	FreqTHz []float64     // at the reference volume, [i*NModes+k], ascending
	// Gamma[i*NModes+k] is γ of mode k at point i, 0 where undefined.
	Gamma []float64
	// Defined is false where γ is not defined: a mode of zero or
	// imaginary frequency at any volume (the acoustic modes at Γ).
	Defined []bool
	// MinOverlap is the smallest overlap |⟨e_ref|e_V⟩|² of a reference
	// mode with the mode matched to it at another volume (with its
	// degenerate partners there: inside a degenerate subspace single
	// modes are arbitrary). 1 for identical eigenvectors; values well
	// below 1/2 mean the volumes are too far apart to follow the modes.
	MinOverlap float64
}

// ModeGruneisen computes γ of every mode at every point of pts from the
// models of set: at each q the modes of every volume are matched to the
// reference volume's by the overlap of their eigenvectors (the assignment
// maximising Σ|⟨e_ref,k|e_V,π(k)⟩|², Hungarian method: Kuhn, Naval Res.
// Logist. Q. 2, 83 (1955)), not by sorting frequencies, so branches that
// cross between volumes keep their identity; then −d ln ω/d ln V is the
// finite difference of VolumeSet.lnStencil. Modes degenerate at the
// reference volume get their group's average γ (the split of a degenerate
// subspace into modes is arbitrary; its mean is not). Points are checked
// with physics.ValidateQPoints (fields "points[i]…").
func ModeGruneisen(ctx context.Context, set *VolumeSet, pts []mesh.QPoint) (*ModeGammas, error) {
	ref := set.Models[set.Ref]
	if err := physics.ValidateQPoints(ref.Dim(), pts, "points"); err != nil {
		return nil, err
	}
	n := ref.ModeCount()
	out := &ModeGammas{NModes: n, Points: pts, FreqTHz: make([]float64, len(pts)*n),
		Gamma: make([]float64, len(pts)*n), Defined: make([]bool, len(pts)*n), MinOverlap: 1}
	block := gammaBlock(n, len(set.Models))
	overlaps := make([]float64, 0, (len(pts)+block-1)/block)
	for lo := 0; lo < len(pts); lo += block {
		hi := min(lo+block, len(pts))
		mo, err := out.block(ctx, set, pts[lo:hi], lo)
		if err != nil {
			return nil, err
		}
		overlaps = append(overlaps, mo)
	}
	for _, o := range overlaps {
		out.MinOverlap = math.Min(out.MinOverlap, o)
	}
	return out, nil
}

// gammaBlock is the number of points solved at once: their eigenvectors
// at every volume take at most about 16 MiB.
func gammaBlock(n, vols int) int {
	per := 16 * n * n * vols
	return max(1, min(4096, (16<<20)/max(per, 1)))
}

// volumeModes are the modes of one block of points at one volume.
type volumeModes struct {
	freq []float64    // [i*n+k]
	vecs []complex128 // [(i*n+k)*n+c]
}

// block fills the rows off … off+len(pts)−1 of out and returns the
// smallest matched overlap.
func (out *ModeGammas) block(ctx context.Context, set *VolumeSet, pts []mesh.QPoint, off int) (float64, error) {
	n := out.NModes
	modes := make([]volumeModes, len(set.Models))
	for v, m := range set.Models {
		vm := volumeModes{freq: make([]float64, len(pts)*n), vecs: make([]complex128, len(pts)*n*n)}
		err := m.StreamModes(ctx, pts, physics.ModeOptions{Eigenvectors: true}, func(c physics.ModeChunk) error {
			for j, p := range c.Points {
				i := c.Offset + j
				copy(vm.freq[i*n:(i+1)*n], p.FreqTHz)
				copy(vm.vecs[i*n*n:(i+1)*n*n], p.Eigvecs)
			}
			return nil
		})
		if err != nil {
			return 0, err
		}
		modes[v] = vm
	}
	idx, w := set.lnStencil()
	minOv := make([]float64, len(pts))
	err := parallel.For(ctx, len(pts), 16, func(<-chan struct{}) func(i int) bool {
		pw := newPointGamma(n, len(set.Models))
		return func(i int) bool {
			minOv[i] = pw.solve(modes, set.Ref, idx, w, i, out, off+i)
			return true
		}
	})
	mo := 1.0
	for _, o := range minOv {
		mo = math.Min(mo, o)
	}
	return mo, err
}

// pointGamma is one worker's scratch for the γ of one point.
type pointGamma struct {
	n     int
	cost  []float64 // n×n assignment costs
	match [][]int   // per volume: reference mode k ↦ mode π(k)
	hung  *hungarian
	lnw   []float64
}

func newPointGamma(n, vols int) *pointGamma {
	p := &pointGamma{n: n, cost: make([]float64, n*n), match: make([][]int, vols), hung: newHungarian(n), lnw: make([]float64, n)}
	for v := range p.match {
		p.match[v] = make([]int, n)
	}
	return p
}

// solve computes the γ of point i of the block (row r of out) and
// returns the smallest overlap of its matched pairs.
func (p *pointGamma) solve(modes []volumeModes, ref int, idx []int, w []float64, i int, out *ModeGammas, r int) float64 {
	n := p.n
	rv := modes[ref]
	minOv := 1.0
	for v := range modes {
		if v == ref {
			for k := range p.match[v] {
				p.match[v][k] = k
			}
			continue
		}
		for k := 0; k < n; k++ {
			ek := rv.vecs[(i*n+k)*n : (i*n+k+1)*n]
			for j := 0; j < n; j++ {
				ej := modes[v].vecs[(i*n+j)*n : (i*n+j+1)*n]
				var z complex128
				for c := range ek {
					z += complex(real(ek[c]), -imag(ek[c])) * ej[c]
				}
				p.cost[k*n+j] = -(real(z)*real(z) + imag(z)*imag(z))
			}
		}
		p.hung.solve(p.cost, p.match[v])
		minOv = math.Min(minOv, p.subspaceOverlap(modes[v].freq[i*n:(i+1)*n], v))
	}
	freq := rv.freq[i*n : (i+1)*n]
	copy(out.FreqTHz[r*n:(r+1)*n], freq)
	for k := 0; k < n; k++ {
		g, ok := 0.0, true
		for s, v := range idx {
			f := modes[v].freq[i*n+p.match[v][k]]
			if !(f > 0) {
				ok = false
				break
			}
			g -= w[s] * math.Log(f)
		}
		if ok {
			out.Gamma[r*n+k], out.Defined[r*n+k] = g, true
		}
	}
	averageDegenerateGamma(freq, out.Gamma[r*n:(r+1)*n], out.Defined[r*n:(r+1)*n])
	return minOv
}

// subspaceOverlap is the smallest, over the reference modes k, overlap of
// e_ref,k with the subspace of the modes of volume v degenerate with its
// match π(k) (within physics.DegenerateTolTHz): inside a degenerate
// subspace the match of single modes is arbitrary, the subspace is not.
func (p *pointGamma) subspaceOverlap(freq []float64, v int) float64 {
	n := p.n
	var top float64
	for _, f := range freq {
		top = math.Max(top, math.Abs(f))
	}
	tol := physics.DegenerateTolTHz*top + 1e-9
	minOv := 1.0
	for k := 0; k < n; k++ {
		fm := freq[p.match[v][k]]
		var ov float64
		for j := 0; j < n; j++ {
			if math.Abs(freq[j]-fm) <= tol {
				ov -= p.cost[k*n+j]
			}
		}
		minOv = math.Min(minOv, ov)
	}
	return minOv
}

// averageDegenerateGamma replaces the γ of every group of modes degenerate
// at the reference volume (within physics.DegenerateTolTHz of the
// largest) by the group's mean over its defined members.
func averageDegenerateGamma(freq, gamma []float64, def []bool) {
	var top float64
	for _, f := range freq {
		top = math.Max(top, math.Abs(f))
	}
	tol := physics.DegenerateTolTHz*top + 1e-9
	for k := 0; k < len(freq); {
		e := k + 1
		for e < len(freq) && freq[e]-freq[e-1] <= tol {
			e++
		}
		var sum float64
		var cnt int
		for j := k; j < e; j++ {
			if def[j] {
				sum += gamma[j]
				cnt++
			}
		}
		if cnt > 0 && e-k > 1 {
			for j := k; j < e; j++ {
				if def[j] {
					gamma[j] = sum / float64(cnt)
				}
			}
		}
		k = e
	}
}

// GridGruneisen is ModeGruneisen on every point of a grid of the
// reference model (spec as physics.Model.GridModes takes it; every point,
// no symmetry reduction), the points carrying their weights.
func GridGruneisen(ctx context.Context, set *VolumeSet, spec mesh.GridSpec) (*ModeGammas, error) {
	ref := set.Models[set.Ref]
	spec, err := physics.NormalizeGrid(spec, ref.Dim())
	if err != nil {
		return nil, err
	}
	pts, err := spec.PointsContext(ctx)
	if err != nil {
		return nil, err
	}
	return ModeGruneisen(ctx, set, pts)
}

// AverageGamma is the thermodynamic average of the mode γ at each
// temperature, weighted by the modes' heat capacities:
//
//	γ(T) = Σ w C(ν,T) γ / Σ w C(ν,T),  C/k = x² eˣ/(eˣ−1)², x = hν/kT,
//
// with w the points' weights, over the defined modes (Grüneisen, Ann.
// Phys. 344, 257 (1912); Ashcroft & Mermin ch. 25). At T = 0, and where
// no defined mode carries heat capacity, it is 0 and ok[i] is false.
func (g *ModeGammas) AverageGamma(tempsK []float64) (gamma []float64, ok []bool) {
	gamma, ok = make([]float64, len(tempsK)), make([]bool, len(tempsK))
	for t, tK := range tempsK {
		if !(tK > 0) {
			continue
		}
		kappa := physics.THzToKelvin / tK
		var num, den float64
		for i, p := range g.Points {
			for k := 0; k < g.NModes; k++ {
				j := i*g.NModes + k
				if !g.Defined[j] {
					continue
				}
				c := p.Weight * modeHeat(kappa*g.FreqTHz[j])
				num += c * g.Gamma[j]
				den += c
			}
		}
		if den > 0 {
			gamma[t], ok[t] = num/den, true
		}
	}
	return gamma, ok
}

// modeHeat is the heat capacity of one mode in units of k_B, x² eˣ/(eˣ−1)²
// = (x/2)²/sinh²(x/2), 0 past x = 1400 (underflow).
func modeHeat(x float64) float64 {
	switch {
	case !(x > 0):
		return 0
	case x > 1400:
		return 0
	}
	s := math.Sinh(x / 2)
	h := x / 2 / s
	return h * h
}

// String summarises the result, for logs.
func (g *ModeGammas) String() string {
	return fmt.Sprintf("%d points × %d modes, smallest overlap %.3f", len(g.Points), g.NModes, g.MinOverlap)
}
