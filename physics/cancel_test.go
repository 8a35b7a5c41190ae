// Tests of cancellation: every long stage stops when its context ends,
// returns the context's error, and keeps nothing half-computed.

package physics_test

import (
	"context"
	"errors"
	"sync"
	"sync/atomic"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"

	"github.com/materials-lab/modegrid/physics/mesh"
)

var (
	big256Once  sync.Once
	big256Model *physics.Model
)

// big256 is a 256-site model shared by the stage tests: compiled once (a
// fraction of a second); its lazy symmetry and long-wave limit take
// seconds, so each test cancels them midway on the same model, which a
// cancelled stage must leave usable.
func big256(t testing.TB) *physics.Model {
	big256Once.Do(func() { big256Model = testmodels.Compile(t, testmodels.BigCrystal(t, 4, 4, 2)) })
	if big256Model == nil {
		t.Fatal("the 256-site model did not compile")
	}
	return big256Model
}

// TestCancelCompile: the neighbour search of a 512-site model (about a
// second of work) stops when cancelled.
func TestCancelCompile(t *testing.T) {
	c := testmodels.BigCrystal(t, 4, 4, 4)
	lat := testmodels.CancelMidway(t, 2000, func(ctx context.Context) error {
		_, err := physics.Compile(ctx, c, physics.Options{})
		return err
	})
	t.Logf("Compile, 512 sites: returned %v after cancellation", lat)
}

// TestCancelSymmetry: the symmetry search of a 256-site model stops when
// cancelled, and a later call still finds the operations of a fresh
// model (nothing partial was kept; checked on a small model, where the
// search is quick). The search polls once per candidate translation and
// per block row of a full invariance test: 54 polls in all for this
// model, so the cancellation lands after 20. The model is compiled for
// this test alone: a search that completes is kept by the model, so on
// the shared one (after another test, or a second run with -count) there
// would be nothing left to cancel.
func TestCancelSymmetry(t *testing.T) {
	m := testmodels.Compile(t, testmodels.BigCrystal(t, 4, 4, 2))
	lat := testmodels.CancelMidway(t, 20, func(ctx context.Context) error {
		_, err := m.Symmetry(ctx)
		return err
	})
	t.Logf("Symmetry, 256 sites: returned %v after cancellation", lat)
}

// TestCancelLongWave: the long-wave set-up of a 256-site model (the dense
// route: an eigendecomposition of order 774 and a QR factorisation) stops
// when cancelled inside the eigensolver.
func TestCancelLongWave(t *testing.T) {
	m := big256(t)
	lat := testmodels.CancelMidway(t, 0, func(ctx context.Context) error {
		_, err := m.SoundVelocities(ctx, [3]float64{1, 0, 0})
		return err
	})
	t.Logf("long-wave set-up, 256 sites: returned %v after cancellation", lat)
}

// TestCancelStability: the stability grid of a 256-site model stops when
// cancelled (in the symmetry search, or in the 768×768 eigenproblems).
func TestCancelStability(t *testing.T) {
	m := big256(t)
	lat := testmodels.CancelMidway(t, 0, func(ctx context.Context) error {
		_, _, _, err := m.Stability(ctx, 2)
		return err
	})
	t.Logf("Stability, 256 sites: returned %v after cancellation", lat)
}

// TestCancelReduceGrid: reducing a 4-million-point grid stops when
// cancelled (the fcc symmetry is found first, uncancelled).
func TestCancelReduceGrid(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	testmodels.Symmetry(t, m)
	lat := testmodels.CancelMidway(t, 20, func(ctx context.Context) error {
		_, err := m.ReduceGrid(ctx, mesh.GridSpec{Mesh: [3]int{161, 160, 159}}, nil)
		return err
	})
	t.Logf("ReduceGrid, 4.1 M points: returned %v after cancellation", lat)
}

// TestCancelTetraClasses: building the tetrahedron classes of a fresh
// 90³ grid stops when cancelled, and caches nothing: the DOS computed
// afterwards equals the one computed without symmetry classes.
func TestCancelTetraClasses(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	g, err := m.GridModes(context.Background(), mesh.GridSpec{Mesh: [3]int{90, 90, 90}}, physics.GridOptions{})
	if err != nil {
		t.Fatal(err)
	}
	set := mesh.GridSimplices(m.Reciprocal(), g.Spec.Mesh, m.Dim())
	lat := testmodels.CancelMidway(t, 20, func(ctx context.Context) error {
		_, err := mesh.SimplexClasses(ctx, g.Reduction(), set, g.ReductionCache())
		return err
	})
	t.Logf("tetrahedron classes, 90³: returned %v after cancellation", lat)
	classes, err := mesh.SimplexClasses(context.Background(), g.Reduction(), set, g.ReductionCache())
	if err != nil {
		t.Fatal(err)
	}
	var n float64
	for _, c := range classes {
		n += c.Count
	}
	if want := float64(90 * 90 * 90 * len(set.Corners)); n != want {
		t.Errorf("classes after a cancelled build hold %g simplices; want %g", n, want)
	}
}

// TestCancelledFirstUseKeepsNothing: a first use of the lazy per-model
// values under an ended context fails with its error and stores nothing,
// so the next use computes the same result as on a fresh model.
func TestCancelledFirstUseKeepsNothing(t *testing.T) {
	c := testmodels.Supercell(t, testmodels.Load(t, "rocksalt-like"), testmodels.ConventionalCell)
	m := testmodels.Compile(t, c)
	done, cancel := context.WithCancel(context.Background())
	cancel()
	if ops, err := m.Symmetry(done); !errors.Is(err, context.Canceled) || ops != nil {
		t.Fatalf("Symmetry(cancelled) = %d ops, %v; want none and context.Canceled", len(ops), err)
	}
	dir := [3]float64{1, 2, 3}
	if v, err := m.SoundVelocities(done, dir); !errors.Is(err, context.Canceled) || v != nil {
		t.Fatalf("SoundVelocities(cancelled) = %v, %v; want nil and context.Canceled", v, err)
	}
	fresh := testmodels.Compile(t, c)
	if got, want := len(testmodels.Symmetry(t, m)), len(testmodels.Symmetry(t, fresh)); got != want || want != 48 {
		t.Errorf("after a cancelled search: %d operations; a fresh model has %d (want 48, the cubic group Oh)", got, want)
	}
	got, want := testmodels.Sound(t, m, dir), testmodels.Sound(t, fresh, dir)
	if len(got) != 3 || !testmodels.CloseSlices(got, want, 0) {
		t.Errorf("after a cancelled set-up: velocities %v; a fresh model gives %v", got, want)
	}
}

// TestLazy: one computation for concurrent first users; a waiter leaves
// when its own context ends; a failed or panicking computation stores
// nothing and the next caller computes again.
func TestLazy(t *testing.T) {
	var l physics.Lazy[int]
	started, release := make(chan struct{}), make(chan struct{})
	var calls atomic.Int32
	slow := func(context.Context) (int, error) {
		calls.Add(1)
		close(started)
		<-release
		return 7, nil
	}
	first := make(chan int)
	go func() {
		v, _ := l.Get(context.Background(), slow)
		first <- v
	}()
	<-started
	// A waiter whose context ends leaves with its error, the computation
	// carries on.
	gone, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := l.Get(gone, slow); !errors.Is(err, context.Canceled) {
		t.Fatalf("waiter with an ended context: %v; want context.Canceled", err)
	}
	second := make(chan int)
	go func() {
		v, _ := l.Get(context.Background(), slow)
		second <- v
	}()
	close(release)
	if a, b := <-first, <-second; a != 7 || b != 7 || calls.Load() != 1 {
		t.Fatalf("got %d and %d from %d computations; want 7 and 7 from 1", a, b, calls.Load())
	}

	var f physics.Lazy[int]
	boom := errors.New("boom")
	if _, err := f.Get(context.Background(), func(context.Context) (int, error) { return 1, boom }); !errors.Is(err, boom) {
		t.Fatalf("failing computation: %v; want %v", err, boom)
	}
	func() {
		defer func() { _ = recover() }()
		_, _ = f.Get(context.Background(), func(context.Context) (int, error) { panic("inside compute") })
	}()
	if v, err := f.Get(context.Background(), func(context.Context) (int, error) { return 3, nil }); v != 3 || err != nil {
		t.Fatalf("after a failure and a panic: %d, %v; want 3, nil", v, err)
	}
}
