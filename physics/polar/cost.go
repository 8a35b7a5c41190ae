// Cost estimates of the dipole–dipole term and the infrared response, for
// admission control (see physics/cost.go for the conventions: bytes are an
// upper bound of what is allocated, work an operation count turned into
// seconds at physics.FlopsPerCoreSecond).

package polar

import (
	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/lattice"
)

// Flops is the work of the term at one q (AddTo) for n sites, blocks
// real-space blocks in cells cell offsets and gvecs reciprocal vectors:
// per block a complex 3×3 update (36 operations), per cell a phase
// (about 40), per reciprocal vector its weight (about 20) and the site
// vectors (about 30 per site: kept phases and the 3×3 product; counted
// as 60) and a rank-one update of the lower triangle (8 operations per
// element, (3n)(3n+1)/2 elements).
func Flops(n, blocks, cells, gvecs int) float64 {
	nm := float64(3 * n)
	return 36*float64(blocks) + 40*float64(cells) + float64(gvecs)*(60*float64(n)+4*nm*(nm+1))
}

// Sizes are the sizes of a dipole–dipole term, known before it is built.
type Sizes struct {
	LambdaInvA        float64 // the default Ewald parameter, Å⁻¹
	RealBlocks        int     // real-space blocks
	Cells             int     // their cell offsets (at most)
	ReciprocalVectors int
}

// Estimate returns the sizes of the term of a crystal with polar data
// (validated, 3D) with the default parameter: the counts NewTerm would
// make, by the same enumeration, without storing or computing the blocks
// (for a 2-site cell a few thousand distance tests), or NewTerm's error
// for a set-up over MaxCandidates.
func Estimate(c *physics.Crystal) (Sizes, error) {
	t := geometryOf(c)
	var err error
	if t.lambda, err = t.defaultLambda(); err == nil {
		err = t.checkSize(t.lambda)
	}
	if err != nil {
		return Sizes{}, err
	}
	gs, _ := t.reciprocalVectors()
	s := Sizes{LambdaInvA: t.lambda, ReciprocalVectors: len(gs)}
	cells := map[[3]int]bool{}
	_ = t.eachReal(nil, t.lambda, func(_, _ int, n [3]int, _ [3]float64) {
		s.RealBlocks++
		cells[n] = true
	})
	s.Cells = len(cells)
	return s, nil
}

// geometryOf is the part of a Term that the sizes depend on, from a
// validated crystal.
func geometryOf(c *physics.Crystal) *Term {
	t := &Term{n: len(c.Sites)}
	copy(t.lat[:], c.Lattice)
	t.omega = lattice.GramMeasure(c.Lattice)
	t.recip = lattice.Reciprocal(t.lat, 3)
	t.eps = symmetric(c.EpsilonInf)
	t.epsInv, t.sqrtDet = inverse3(t.eps)
	for _, s := range c.Sites {
		var r [3]float64
		for k, f := range s.Frac {
			r = lattice.Add(r, lattice.Scale(c.Lattice[k], f))
		}
		t.tau = append(t.tau, r)
	}
	return t
}

// symmetric returns (e + eᵀ)/2 of 9 numbers, row-major.
func symmetric(e []float64) [9]float64 {
	var s [9]float64
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			s[3*a+b] = (e[3*a+b] + e[3*b+a]) / 2
		}
	}
	return s
}

// FlopsPerQ is the work at one q of the term the sizes describe.
func (s Sizes) FlopsPerQ(sites int) float64 {
	return Flops(sites, s.RealBlocks, s.Cells, s.ReciprocalVectors)
}

// BuildCost is the cost of NewTerm for these sizes: the blocks kept (88 B
// each, counted as 96 for the allocator's rounding), their cells (64 B
// each) and per reciprocal vector its coordinates, G·ε·G, Gaussian and
// site phases (52 + 16n B, counted as 64 + 16n), each array counted first
// and allocated once, the sum-rule matrix at q = 0 ((3n)² complex) and
// 8 KiB of small arrays (TestCostEstimates: 1.0–1.2× of the allocation). Work: per block a complementary error function, an
// exponential and the 3×3 sandwich (about 200 operations), one AddTo at
// q = 0, and the distance tests of the enumeration (up to four passes:
// counting for the default Λ, counting, computing).
func (s Sizes) BuildCost(sites int) physics.Cost {
	nm := int64(3 * sites)
	b := 96*int64(s.RealBlocks) + 64*int64(s.Cells) + (64+16*int64(sites))*int64(s.ReciprocalVectors) + 16*nm*nm + 8<<10
	f := 200*float64(s.RealBlocks) + s.FlopsPerQ(sites) + 4*40*float64(s.RealBlocks)
	return physics.Cost{Bytes: b, Flops: f}
}

// TermSizes returns the sizes of a built term (its Ewald parameter and
// counts).
func (t *Term) TermSizes() Sizes {
	return Sizes{LambdaInvA: t.lambda, RealBlocks: len(t.real), Cells: len(t.cells), ReciprocalVectors: len(t.gvecs)}
}

// compile-time check that *Term is a physics.LongRange.
var _ physics.LongRange = (*Term)(nil)

// InfraredCost estimates Infrared for a model of size s (physics.GridSize
// of the model, its LongRangeFlops included) and samples frequencies.
// Memory, from infrared.go, n modes: the n×n arrays — D(Γ) (16 n² bytes),
// its real symmetric copy, the eigenvectors and gonum's workspace (8 n²
// each), a solver workspace with eigenvectors for the LO modes
// (ModesToward, 56 n²) — rounded up to 160 n²; per mode about 2 KiB (the
// mode records, the charge matrix, the degenerate groups' bases, the
// eigensolver's vectors of length n); 48 bytes per sample; 4 KiB of
// headers. TestCostEstimates measures 1.2–1.9× of the allocation at 6, 9
// and 48 modes and 11 to 5001 samples. Work: two assemblies of D(Γ), two
// eigenproblems with vectors ((16/3 + 18) n³ each, as
// physics.GridModesCost counts them) and per sample a complex division
// per mode.
func InfraredCost(s physics.GridSize, samples int) physics.Cost {
	n := int64(s.Modes())
	b := 160*n*n + 2048*n + 48*int64(samples) + 12<<10 // 12 kB fixed: the reply's header and closures, up to 9 kB measured beside the arrays under the race detector
	x := float64(n)
	f := 2*s.SolveCost().Flops + 2*(16.0/3+18)*x*x*x + float64(samples)*x*30
	return physics.Cost{Bytes: b, Flops: f}
}
