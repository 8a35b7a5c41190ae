package testmodels

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// Test crystals and harnesses shared by the tests of the core, spectra
// and thermo.

// HangGuard bounds how long a cancelled stage may take to return before
// the test calls it hung: a detector of stages that ignore cancellation
// (which would run on for seconds to minutes), not a latency requirement.
const HangGuard = 10 * time.Second

// PollCtx is a context that signals, by closing Reached, the moment the
// stage under test has polled it `after` times with Err, or — when after
// is 0 — first asked for its Done channel (the eigensolver and the grid
// workers take ctx.Done() once and poll the channel). The stage is then
// inside its loops and the test cancels it.
type PollCtx struct {
	context.Context
	after   int64
	Polls   atomic.Int64
	once    sync.Once
	Reached chan struct{}
}

func NewPollCtx(parent context.Context, after int64) *PollCtx {
	return &PollCtx{Context: parent, after: after, Reached: make(chan struct{})}
}

func (c *PollCtx) Err() error {
	if n := c.Polls.Add(1); c.after > 0 && n == c.after {
		c.once.Do(func() { close(c.Reached) })
	}
	return c.Context.Err()
}

func (c *PollCtx) Done() <-chan struct{} {
	if c.after == 0 {
		c.once.Do(func() { close(c.Reached) })
	}
	return c.Context.Done()
}

// CancelMidway runs stage with a context cancelled once the stage has
// polled it after times (0: once it took the Done channel), and checks
// that it returns context.Canceled. It returns the time from the
// cancellation to the stage's return.
func CancelMidway(t *testing.T, after int64, stage func(ctx context.Context) error) time.Duration {
	t.Helper()
	parent, cancel := context.WithCancel(context.Background())
	defer cancel()
	ctx := NewPollCtx(parent, after)
	result := make(chan error, 1)
	var returned time.Time
	go func() {
		err := stage(ctx)
		returned = time.Now()
		result <- err
	}()
	select {
	case <-ctx.Reached:
	case err := <-result:
		t.Fatalf("the stage returned (%v) after %d Polls of its context, before the event (after=%d)", err, ctx.Polls.Load(), after)
	}
	cancelled := time.Now()
	cancel()
	select {
	case err := <-result:
		if !errors.Is(err, context.Canceled) {
			t.Fatalf("cancelled stage returned %v; want context.Canceled", err)
		}
		return returned.Sub(cancelled)
	case <-time.After(HangGuard):
		t.Fatalf("the stage did not return within %v of its cancellation", HangGuard)
		return 0
	}
}

// BigCrystal returns the rock-salt-like example as an m1×m2×m3 Supercell
// of its 8-site conventional cube (8·m1·m2·m3 sites, shells by label).
func BigCrystal(t testing.TB, m1, m2, m3 int) *physics.Crystal {
	cube := Supercell(t, Load(t, "rocksalt-like"), ConventionalCell)
	return Supercell(t, cube, [3][3]int{{m1, 0, 0}, {0, m2, 0}, {0, 0, m3}})
}

// ConventionalCell turns an fcc primitive cell into its conventional cube.
var ConventionalCell = [3][3]int{{-1, 1, 1}, {1, -1, 1}, {1, 1, -1}}

// Rung is one model of the Ladder.
type Rung struct {
	Sites int
	M     *physics.Model
}

// Ladder returns the benchmark models by site count: 1 (fcc), 2
// (rocksalt-like), 8 (its conventional cube) and 64 (2×2×2 cubes).
func Ladder(b testing.TB) []Rung {
	rs := Load(b, "rocksalt-like")
	cube := Supercell(b, rs, ConventionalCell)
	big := Supercell(b, cube, [3][3]int{{2, 0, 0}, {0, 2, 0}, {0, 0, 2}})
	return []Rung{
		{1, Compile(b, Load(b, "fcc"))},
		{2, Compile(b, rs)},
		{8, Compile(b, cube)},
		{64, Compile(b, big)},
	}
}

// Triclinic is a two-site model with unequal springs along skewed lattice
// vectors: no symmetry but the identity (and time reversal). Invented.
func Triclinic() *physics.Crystal {
	return &physics.Crystal{
		Lattice: [][3]float64{{3.1, 0, 0}, {0.4, 2.7, 0}, {0.3, 0.5, 3.4}},
		Sites: []physics.Site{
			{Label: "A", MassAmu: 12, Frac: []float64{0, 0, 0}},
			{Label: "B", MassAmu: 31, Frac: []float64{0.31, 0.22, 0.43}},
		},
		Springs: []physics.Spring{
			{From: 0, To: 1, Cell: []int{0, 0, 0}, KLong: 1.3, KTrans: 0.2},
			{From: 0, To: 0, Cell: []int{1, 0, 0}, KLong: 0.7, KTrans: 0.1},
			{From: 0, To: 0, Cell: []int{0, 1, 0}, KLong: 0.5, KTrans: 0.05},
			{From: 0, To: 0, Cell: []int{0, 0, 1}, KLong: 0.9, KTrans: 0.15},
			{From: 1, To: 1, Cell: []int{1, 0, 0}, KLong: 0.4, KTrans: 0.08},
			{From: 1, To: 1, Cell: []int{0, 1, 0}, KLong: 0.6, KTrans: 0.03},
			{From: 1, To: 1, Cell: []int{0, 0, 1}, KLong: 0.3, KTrans: 0.09},
			{From: 1, To: 0, Cell: []int{1, 1, 1}, KLong: 0.8, KTrans: 0.11},
		},
	}
}

// BrokenFCC is the fcc example with one extra spring along a single
// nearest-neighbour direction: that spring breaks every operation that
// does not map the bond ±a1 onto itself. Invented.
func BrokenFCC(t testing.TB) *physics.Crystal {
	c := Load(t, "fcc")
	c.Springs = append(c.Springs, physics.Spring{From: 0, To: 0, Cell: []int{1, 0, 0}, KLong: 0.3, KTrans: 0.05})
	return c
}

// UnstableChain is a chain whose second-neighbour spring is negative enough
// (K₂ < −K₁/4) that long waves are imaginary: ω² ∝ K₁ sin²(q/2) + K₂
// sin²(q) < 0 near Γ (Born–von Kármán chain, Kittel ch. 4 problem set;
// the sign test is common practice).
func UnstableChain() *physics.Crystal {
	return &physics.Crystal{
		Name: "unstable-chain", Lattice: [][3]float64{{2.5, 0, 0}}, Polarizations: 1,
		Sites: []physics.Site{{Label: "A", MassAmu: 40, Frac: []float64{0}}},
		Springs: []physics.Spring{
			{From: 0, To: 0, Cell: []int{1}, KLong: 1.0},
			{From: 0, To: 0, Cell: []int{2}, KLong: -0.4},
		},
	}
}

// Chain example (proto/examples/chain.json): K = 1.5 eV/Å², M = 40 amu, so
// ν_max = 2·sqrt(K/M) in units of sqrt(eV/Å²/amu) = 15.6333042 THz
// (Kittel, Introduction to Solid State Physics, ch. 4; the unit
// sqrt(e·10²⁰/m_u)/2π from CODATA 2018 e and m_u).
var ChainNuMaxTHz = 2 * math.Sqrt(1.5/40) * physics.NuUnitTHz

// benchGrids caches grid modes across benchmarks: a 48³ grid of the
// rock-salt-like example takes about a second to diagonalise, and the
// benchmarks time only what comes after ("frequencies given").
var benchGrids struct {
	sync.Mutex
	m map[string]*physics.GridModes
}

// BenchGrid compiles the example name and computes its modes on an n³
// grid, cached across benchmarks (see benchGrids).
func BenchGrid(b testing.TB, name string, n int, opt physics.GridOptions) (*physics.Model, *physics.GridModes) {
	b.Helper()
	m := Compile(b, Load(b, name))
	key := fmt.Sprintf("%s/%d/%v", name, n, opt)
	benchGrids.Lock()
	defer benchGrids.Unlock()
	if benchGrids.m == nil {
		benchGrids.m = map[string]*physics.GridModes{}
	}
	g := benchGrids.m[key]
	if g == nil {
		var err error
		g, err = m.GridModes(context.Background(), mesh.GridSpec{Mesh: [3]int{n, n, n}}, opt)
		if err != nil {
			b.Fatal(err)
		}
		benchGrids.m[key] = g
	}
	return m, g
}

// Chain is the monatomic chain of the packages' examples: a = 2.5 Å,
// M = 40 amu, K = 1.5 eV/Å² (the numbers of proto/examples/chain.json).
func Chain() *physics.Crystal {
	return &physics.Crystal{
		Lattice:       [][3]float64{{2.5, 0, 0}},
		Polarizations: 1,
		Sites:         []physics.Site{{Label: "A", MassAmu: 40, Frac: []float64{0}}},
		Springs:       []physics.Spring{{From: 0, To: 0, Cell: []int{1}, KLong: 1.5}},
	}
}

// ChainModes compiles Chain and computes its modes on an n-point grid, for
// the examples (which have no *testing.T): it panics on an error.
func ChainModes(ctx context.Context, n int) (*physics.Model, *physics.GridModes) {
	m, err := physics.Compile(ctx, Chain(), physics.Options{})
	if err != nil {
		panic(err)
	}
	g, err := m.GridModes(ctx, mesh.GridSpec{Mesh: [3]int{n}}, physics.GridOptions{})
	if err != nil {
		panic(err)
	}
	return m, g
}
