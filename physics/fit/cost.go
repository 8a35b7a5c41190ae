package fit

import (
	"runtime"
	"strings"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// Cost estimate of Fit, for admission control (the conventions of
// physics.Cost: memory and an operation count).

// Shape is what the cost of a fit depends on.
type Shape struct {
	// Size is the model's size: sites, polarizations, dimensionality,
	// interactions (Points and Irreducible are ignored).
	Size physics.GridSize
	// Params is the number of free parameters, Charges how many of them
	// are Born charges (each adds charge models: ChargeModels).
	Params, Charges int
	// Frequencies counts the dispersion points and Γ frequencies, Q the
	// distinct wavevectors among them (at most Frequencies).
	Frequencies, Q int
	// LongWave counts the sound velocities and elastic constants.
	LongWave int
	// Heat is the heat-capacity data per distinct grid.
	Heat []HeatShape
	// Evaluations bounds the model evaluations (Problem.MaxEvaluations
	// resolved).
	Evaluations int
	// Compile is the cost of compiling the model once; a fit compiles it
	// at every evaluation, and once per parameter for the unit models.
	Compile physics.Cost
}

// HeatShape is one grid of heat-capacity data.
type HeatShape struct {
	Grid  mesh.GridSpec
	Temps int
}

// ShapeOf describes p for Cost, with the model's size and the cost of one
// compile. The problem need not be valid: counts are taken as given.
func ShapeOf(p *Problem, size physics.GridSize, compile physics.Cost) Shape {
	s := Shape{Size: size, Params: len(p.Free), Frequencies: len(p.Frequencies) + len(p.GammaFrequencies),
		LongWave: len(p.SoundVelocities) + len(p.ElasticConstants), Evaluations: p.maxEvaluations(), Compile: compile}
	qs := map[[3]float64]bool{}
	for _, f := range p.Frequencies {
		qs[f.Q] = true
	}
	if len(p.GammaFrequencies) > 0 {
		qs[[3]float64{}] = true
	}
	s.Q = len(qs)
	for _, f := range p.Free {
		if strings.HasPrefix(f.Path, "sites[") {
			s.Charges++
		}
	}
	grids := map[mesh.GridSpec]int{}
	for _, h := range p.HeatCapacities {
		g := h.Grid
		g.Finite = false
		if _, ok := grids[g]; !ok {
			grids[g] = len(s.Heat)
			s.Heat = append(s.Heat, HeatShape{Grid: g})
		}
		s.Heat[grids[g]].Temps += len(h.Points)
	}
	return s
}

// Data is the number of data of the shape.
func (s Shape) Data() int {
	n := s.Frequencies + s.LongWave
	for _, h := range s.Heat {
		n += h.Temps
	}
	return n
}

// Cost estimates Fit. Memory, from eval.go, lm.go, result.go and the data
// files: the unit models (one compile each) and their long-wave forms; per
// evaluation held at once — the current one, a trial and the linearised
// step — the values, the Jacobian (rows × parameters) and, for the step,
// its scaled copy and the SVD's U (rows × parameters); the work of one
// evaluation on every core: per wavevector the modes with eigenvectors
// and the parameters' derivative matrices (n² complex each), per grid
// worker a solver workspace and a derivative matrix, per grid slice the
// accumulated sums; the long-wave relaxation (the internal block, its
// eigenvectors and the relaxation, a few (sites·p)² numbers) and the
// covariance analysis (n² numbers a few times). Work: every evaluation
// compiles the model, solves every wavevector with eigenvectors and
// forms eᴴ(∂D)e per datum and parameter (8n² per product), relaxes the
// long-wave limit with its per-parameter derivative, and sums every grid
// point (half the grid, by time reversal) with n products per parameter;
// plus the unit models' compiles.
func Cost(s Shape) physics.Cost {
	n := int64(s.Size.Modes())
	np := int64(s.Params)
	rows := int64(s.Data())
	evals := float64(max(1, s.Evaluations))
	workers := int64(runtime.GOMAXPROCS(0))
	one := s.Size
	one.Points, one.Irreducible = 1, 1
	solve := physics.StreamCost(one, 1, 1, 1, physics.ModeOptions{Eigenvectors: true})
	c := physics.Cost{Bytes: 64 << 10}
	// Unit models, each as large as the model (its compile's memory).
	c.Bytes += (np + 2) * max(s.Compile.Bytes, 4096)
	perEval := 3*rows*(8*np+24) + 3*rows*np*8 + rows*np*8 + np*np*64
	// Frequencies: every wavevector's modes and derivative matrices, at
	// most workers at once.
	q := int64(s.Q)
	if q > 0 {
		perEval += min(q, workers) * (solve.Bytes + 16*n*n*(np+2) + 64*n)
	}
	nl := 3 * int64(s.Size.Sites) * int64(s.Size.P)
	if s.LongWave > 0 {
		perEval += 8*nl*nl*6 + 8*nl*9*(np+4)
		c.Bytes += np * 8 * (nl*nl + 4*nl*9)
	}
	var heatFlops float64
	for _, h := range s.Heat {
		pts := int64(h.Grid.Count()/2 + 1)
		perEval += 16 * int64(h.Temps) * (1 + np) * 8
		perEval += min(workers, 16) * (solve.Bytes + 16*n*n + 8*n*(np+4))
		perEval += 24 * pts
		heatFlops += float64(pts) * (solve.Flops + float64(np)*(s.unitAssembly()+8*float64(n*n*n)) +
			float64(h.Temps)*float64(n)*(40+2*float64(np)))
	}
	c.Bytes += 3 * perEval
	f := s.Compile.Flops + float64(q)*(solve.Flops+float64(np)*s.unitAssembly())
	f += float64(s.Frequencies) * float64(np) * 16 * float64(n*n)
	if s.LongWave > 0 {
		f += 12*float64(nl*nl*nl) + float64(np)*(4*float64(nl*nl)*9+float64(s.LongWave)*30)
	}
	f += heatFlops + float64(rows)*float64(np*np)*6 // the step's SVD
	c.Flops = evals*f + float64(np)*s.Compile.Flops
	if s.Charges > 0 {
		// The charge models (charges.go): compiled once, each assembled
		// (its long-range term) at every wavevector and grid point of an
		// evaluation, and their matrices kept beside the unit models'.
		cm := float64(ChargeModels(s.Charges))
		c.Bytes += int64(cm) * max(s.Compile.Bytes, 4096)
		pts := float64(q)
		for _, h := range s.Heat {
			pts += float64(h.Grid.Count()/2 + 1)
		}
		c.Flops += cm*s.Compile.Flops + evals*pts*cm*(s.Size.LongRangeFlops+2*float64(n*n))
	}
	return c
}

// unitAssembly bounds the work of assembling one unit model's D(q): at
// most the model's interactions.
func (s Shape) unitAssembly() float64 {
	n := float64(s.Size.Modes())
	return 8*float64(s.Size.Interactions)*float64(s.Size.P*s.Size.P) + 2*n*n
}

// CompileCost is the cost of compiling a model of size once, for
// Shape.Compile: memory 64 KiB + 4 KiB per interaction + 2 KiB per site
// (measured allocations of the examples: 4.5 kB for the chain, 28–43 kB
// for the fcc and two-site spring models, 92 kB for the rock-salt-like
// one with its three neighbour-shell searches; the bound covers each),
// and work the neighbour search's searchFlops (the caller's estimate)
// plus the assembly of the terms.
func CompileCost(size physics.GridSize, searchFlops float64) physics.Cost {
	return physics.Cost{
		Bytes: 64<<10 + 4<<10*int64(size.Interactions) + 2<<10*int64(size.Sites),
		Flops: searchFlops + 400*float64(size.Interactions)*9,
	}
}
