package physics

import (
	"runtime"
	"unsafe"

	"github.com/materials-lab/modegrid/physics/eigen"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// Cost estimates of the engine's computations, for admission control: a
// caller can tell before any work how much memory a request will take and
// how long it will compute, and refuse what cannot fit.
//
// Memory is an upper bound of everything the computation allocates
// (Cost.Bytes), term by term from the allocations the code makes (each
// estimator says which); with the garbage collector running the live peak
// is lower, since transient arrays are freed on the way. Counting total
// allocation rather than the live peak is deliberate: a collector that lags
// behind (GOGC) keeps garbage resident, so what was allocated is what the
// process may hold. TestCostLadder (physics/thermo) checks every estimator against the
// measured allocation of real runs: never below, never more than 2× above.
//
// Work (Cost.Flops) is an operation count from the dominant loops
// (Hermitian eigensolver, assembly of D(q), unfolding, simplex and mode
// sums); it is an estimate to within a small factor, turned into seconds
// with a conservative calibrated rate (FlopsPerCoreSecond).

// Cost is the estimated peak memory and work of one computation.
type Cost struct {
	Bytes int64   // memory allocated, bytes (upper bound of the peak)
	Flops float64 // floating-point operations
}

// Plus is the cost of doing c and then o while still holding c's memory.
func (c Cost) Plus(o Cost) Cost { return Cost{Bytes: c.Bytes + o.Bytes, Flops: c.Flops + o.Flops} }

// FlopsPerCoreSecond is the conservative rate at which work estimates are
// turned into time: 1 GFlop/s per core. Measured on the project's 2-core
// machine (Go 1.26, pure-Go Hermitian solver, n = 96…768): 3–6 GFlop/s per
// core idle by the operation counts of diagFlops, 1.5–3 GFlop/s under a
// load average of 10; the rate used is below all of them, so estimated
// seconds over-state the time.
const FlopsPerCoreSecond = 1e9

// Seconds is the estimated time of c on the given number of cores (≥ 1)
// at FlopsPerCoreSecond.
func (c Cost) Seconds(cores int) float64 {
	return c.Flops / (FlopsPerCoreSecond * float64(max(1, cores)))
}

// GridSize describes a grid computation for the estimators: the model's
// size and the grid's.
type GridSize struct {
	Sites, P, Dim int
	Interactions  int // force-constant pair terms (Model.Interactions): assembly work
	Points        int // grid points N
	// Irreducible is the number of points diagonalised: the exact count
	// when known (IrreducibleCount), else 0 for the upper
	// bound IrreducibleUpperBound. Ignored with NoSymmetry (all points).
	Irreducible int
	Workers     int // goroutines of the parallel loops (0: GOMAXPROCS)
	// LongRangeFlops is the work of the model's long-range term at one
	// q-point (LongRange.FlopsPerQ; physics/polar.Cost before a compile),
	// 0 without one: part of every assembly of D(q).
	LongRangeFlops float64
	// BatchPoints is the points of a batch when the model assembles its
	// dynamical matrices in batches (0: each alone); BatchPointBytes the
	// buffers a worker then holds per point of its largest batch and
	// BatchFixedBytes the rest of its batch workspace (dynbatch.go).
	// GridSizeOf fills them from the model. The work of the assembly is
	// estimated from Interactions either way: the batched path is the
	// faster one where it is taken, so that estimate stays an upper bound
	// (and the pre-compile bound, which knows no batches, stays below).
	BatchPoints     int
	BatchPointBytes int64
	BatchFixedBytes int64
}

// batchBytes is the batch workspace of one worker handed batches of at
// most points points (0 without batches).
func (s GridSize) batchBytes(points int) int64 {
	if s.BatchPoints == 0 {
		return 0
	}
	return s.BatchFixedBytes + s.BatchPointBytes*int64(max(0, min(s.BatchPoints, points)))
}

// batchWorkers is how many of workers the loops start over n points in
// batches: one batch per grab, so never more than the batches.
func (s GridSize) batchWorkers(workers, n int) int64 {
	if s.BatchPoints == 0 {
		return int64(workers)
	}
	return int64(max(1, min(workers, (n+s.BatchPoints-1)/s.BatchPoints)))
}

// GridSizeOf fills a GridSize for model m on spec (normalised, see
// GridSpec.Normalize) with irr irreducible points (0: unknown).
func (m *Model) GridSizeOf(spec mesh.GridSpec, irr int) GridSize {
	s := GridSize{Sites: m.nsites, P: m.p, Dim: m.dim, Interactions: m.Interactions(), Points: spec.Count(), Irreducible: irr,
		BatchPointBytes: m.batchPointBytes(), BatchFixedBytes: m.batchFixedBytes()}
	if m.longRange != nil {
		s.LongRangeFlops = m.longRange.FlopsPerQ()
	}
	if m.stack != nil {
		s.BatchPoints = m.stack.batch
	}
	return s
}

// Modes is the number of modes per point (sites × p).
func (s GridSize) Modes() int { return s.Sites * s.P }

// SolveCost is one D(q) assembled and diagonalised on its own, without
// eigenvectors (a workspace and the frequencies): for estimators of
// computations that solve a single point besides their main work (the
// divergence check of mean-square displacements at Γ).
func (s GridSize) SolveCost() Cost {
	n := s.Modes()
	return Cost{Bytes: workspaceBytes(n, false) + 8*int64(n), Flops: s.assembleFlops() + diagFlops(n, false)}
}

func (s GridSize) workers() int {
	if s.Workers > 0 {
		return s.Workers
	}
	return runtime.GOMAXPROCS(0)
}

// reps is the number of points diagonalised.
func (s GridSize) reps(opt GridOptions) int {
	switch {
	case opt.NoSymmetry:
		return s.Points
	case s.Irreducible > 0:
		return min(s.Irreducible, s.Points)
	}
	return mesh.IrreducibleUpperBound(s.Points, s.Dim)
}

// pointBytes is what GridModes keeps per point: frequencies, and per
// option the site weights, eigenvectors and site tensors.
func (s GridSize) pointBytes(opt GridOptions) int64 {
	nm, ns := int64(s.Modes()), int64(s.Sites)
	pairs := int64(s.P * (s.P + 1) / 2)
	b := 8 * nm
	if opt.Projections {
		b += 8 * nm * ns
	}
	if opt.Eigenvectors {
		b += 16 * nm * nm
	}
	if opt.SiteTensors {
		b += 8 * nm * ns * pairs
	}
	return b
}

// diagFlops is the work of one Hermitian eigenproblem of order n:
// reduction to tridiagonal form ≈ 16n³/3 real operations (4 per complex
// multiply-add, 4n³/3 of them), then ≈ 18n³ more to accumulate the
// transformations into eigenvectors (common practice: Golub & Van Loan,
// Matrix Computations, 4th ed., §8.3, counts for the real case times four).
// Those are the pure-Go path's operations; where this build's solver takes
// LAPACK, measured faster at the same n, the count is scaled by
// eigen.WorkScale so that the estimate follows the solver linked in.
func diagFlops(n int, vectors bool) float64 {
	x := float64(n)
	f := 16.0 / 3 * x * x * x
	if vectors {
		f += 18 * x * x * x
	}
	return f * eigen.WorkScale(n, vectors)
}

// assembleFlops is the work of building D(q): a complex phase and a p×p
// block per interaction, plus filling the n² matrix, plus the long-range
// term's sum.
func (s GridSize) assembleFlops() float64 {
	n := float64(s.Modes())
	return 8*float64(s.Interactions)*float64(s.P*s.P) + 2*n*n + s.LongRangeFlops
}

// workspaceBytes is one worker's eigensolver workspace (eigen.Work, whose
// size depends on the path the build's solver takes at n) and its phase
// tables.
func workspaceBytes(n int, vectors bool) int64 {
	return eigen.WorkspaceBytes(n, vectors) + 1024
}

// GridModesCost estimates Model.GridModes. Memory, from grid.go and
// the point list (32 B a point); the reduction (Slot 4 B, OpIndex
// 2 B and the visited mark 1 B per point; Irr and Mult allocated at the
// capacity IrreducibleUpperBound and trimmed, 8 B each, at most 24 B per
// bound point in all), counted even when the reduction comes from a cache,
// which may have dropped it by the time the work starts; the arrays of the
// diagonalised points, then the same arrays for every point (unfold); one
// solver workspace per worker, with its batch buffers for a model that
// assembles in batches (batchBytes). Work: assembly and diagonalisation of every
// diagonalised point, plus the unfolding (a p×p rotation per site and mode
// for eigenvectors and tensors).
func GridModesCost(s GridSize, opt GridOptions) Cost {
	n := int64(s.Points)
	reps := int64(s.reps(opt))
	per := s.pointBytes(opt)
	vec := opt.Projections || opt.Eigenvectors || opt.SiteTensors
	// 8 kB: the result's header, the workers' closures and channels
	// (about 4 kB; up to 4.6 kB measured under the race detector).
	c := Cost{Bytes: 8<<10 + 32*n + n*per + int64(s.workers())*workspaceBytes(s.Modes(), vec) +
		s.batchWorkers(s.workers(), int(reps))*s.batchBytes(int(reps))}
	if opt.NoSymmetry {
		c.Bytes += 10 * n // measured: about 9.5 B a point beyond the arrays, origin not traced
	} else {
		ub := int64(mesh.IrreducibleUpperBound(s.Points, s.Dim))
		c.Bytes += 7*n + 24*ub + reps*per + symOpsBytes + 12<<10
	}
	c.Flops = float64(reps) * (diagFlops(s.Modes(), vec) + s.assembleFlops())
	if !opt.NoSymmetry {
		nm, p := float64(s.Modes()), float64(s.P)
		u := nm // frequencies copied
		if opt.Projections {
			u += nm * float64(s.Sites)
		}
		if opt.Eigenvectors {
			u += 8 * nm * nm * p
		}
		if opt.SiteTensors {
			u += nm * float64(s.Sites) * 2 * p * p * p * p
		}
		c.Flops += float64(n) * u
	}
	return c
}

// symOpsBytes bounds the copies of the symmetry operations a reduction
// makes (at most 48 SymOp of about 300 B, in a slice grown by append, and
// their integer forms) and its cache key.
const symOpsBytes = 64 << 10

// GridModesBytes is the memory the finished GridModes hold
// (GridModes.Bytes): what a cache keeping them is charged.
func GridModesBytes(s GridSize, opt GridOptions) int64 {
	return 256 + int64(s.Points)*(32+s.pointBytes(opt))
}

// StreamCost estimates StreamModes over points q-points in chunks of
// chunk points with workers goroutines (0: GOMAXPROCS). Memory, from
// modes.go: at most 2·workers chunks computed ahead plus the one being
// emitted, each holding its PointModes records, frequencies, eigenvectors
// and velocities; one workspace per worker (and the velocity workspace,
// 7 n² complex, and the batch buffers of a model that assembles in
// batches). The point list itself is the caller's. Work: every point
// assembled and diagonalised, velocities by three Hermitian products per
// mode.
func StreamCost(s GridSize, points, chunk, workers int, opt ModeOptions) Cost {
	n := int64(s.Modes())
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	chunk = max(1, min(chunk, max(1, points)))
	nchunks := (points + chunk - 1) / chunk
	workers = min(workers, max(1, nchunks))
	per := int64(unsafe.Sizeof(PointModes{})) + 8*n
	if opt.Eigenvectors {
		per += 16 * n * n
	}
	if opt.Velocities {
		per += 24 * n
	}
	inFlight := int64(min(nchunks, 2*workers+1))
	vec := opt.Eigenvectors || opt.Velocities
	ws := workspaceBytes(int(n), vec) + s.batchBytes(chunk)
	if opt.Velocities {
		ws += 9*16*n*n + 1024 // velWork and its solvers of degenerate groups
	}
	c := Cost{Bytes: 8<<10 + inFlight*int64(chunk)*per + int64(workers)*ws}
	f := diagFlops(int(n), vec) + s.assembleFlops()
	if opt.Velocities {
		x := float64(n)
		f += 3 * (8*x*x*x + s.assembleFlops())
	}
	c.Flops = float64(points) * f
	return c
}

// DispersionCost estimates Model.Dispersion for samples samples
// (path.go): the samples (a PathSample, its point and frequencies each, the
// frequencies kept from the streamed chunks), the stream (eigenvectors in
// chunks of at most 64 points when connecting branches) and the branch
// connector (about five n² matrices, plus an output row per sample).
// vectors is true when the path needs eigenvectors (following modes or
// per-site weights); weights adds the per-sample site shares.
func DispersionCost(s GridSize, samples int, vectors, weights bool) Cost {
	connect := vectors
	n := int64(s.Modes())
	S := int64(samples)
	chunk := DefaultChunkPoints
	if connect {
		chunk = int(max(1, min(64, DefaultChunkBytes/(16*n*n+1))))
	}
	c := Cost{Bytes: S * (int64(unsafe.Sizeof(PathSample{})) + 1 + 32 + 8*n)}
	c = c.Plus(StreamCost(s, samples, chunk, 0, ModeOptions{Eigenvectors: connect}))
	if connect {
		c.Bytes += 80*n*n + S*(8*n+16*n+64)
		c.Flops += float64(S) * 8 * float64(n*n*n)
	}
	if weights {
		c.Bytes += S * 8 * n * int64(s.Sites)
	}
	return c
}
