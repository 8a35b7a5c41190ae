package physics_test

import (
	"context"
	"math"
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"

	"github.com/materials-lab/modegrid/physics/mesh"
)

// mustPanic runs fn and returns its panic message; the test fails if fn
// does not panic with a "physics: " message.
func mustPanic(t *testing.T, name string, fn func()) {
	t.Helper()
	defer func() {
		t.Helper()
		r := recover()
		s, _ := r.(string)
		if !strings.HasPrefix(s, "physics: ") {
			t.Errorf("%s: panic %v; want a \"physics: \" message", name, r)
		}
	}()
	fn()
}

// TestQOutOfDomain: a q component that is not finite or beyond ±MaxQ is
// an error naming the field on every path users reach (lists, paths), and
// a "physics: " panic on the single-point methods, whose precondition it
// is; never NaN frequencies.
func TestQOutOfDomain(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "fcc"))
	for _, x := range []float64{-1e308, 1e308, math.NaN(), math.Inf(1), -physics.MaxQ * (1 + 1e-15), 2e6} {
		pts := []mesh.QPoint{{Q: [3]float64{0.1, 0, 0}, Weight: 1}, {Q: [3]float64{x, 0.2, 0}, Weight: 1}}
		if got := testmodels.ViolationFields(physics.ValidateQPoints(3, pts, "points")); len(got) != 1 || got[0] != "points[1].q1" {
			t.Errorf("ValidateQPoints q1=%v: fields %v; want [points[1].q1]", x, got)
		}
		err := m.StreamModes(context.Background(), pts, physics.ModeOptions{}, func(physics.ModeChunk) error { return nil })
		if got := testmodels.ViolationFields(err); len(got) != 1 || got[0] != "points[1].q1" {
			t.Errorf("StreamModes q1=%v: %v; want a violation of points[1].q1", x, err)
		}
		corners := []physics.PathCorner{{Label: "G"}, {Q: [3]float64{0, 0, x}, HasQ: true}}
		if _, err := m.Dispersion(context.Background(), corners, physics.PathOptions{Points: 5}); !strings.Contains(strings.Join(testmodels.ViolationFields(err), ","), "path[1].q.q3") {
			t.Errorf("Dispersion q3=%v: %v; want a violation of path[1].q.q3", x, err)
		}
		q := [3]float64{x, 0, 0}
		mustPanic(t, "FrequenciesTHz", func() { m.FrequenciesTHz(q) })
		mustPanic(t, "ModesAt", func() { m.ModesAt(q) })
		mustPanic(t, "Point", func() { m.Point(q, physics.ModeOptions{}) })
		mustPanic(t, "DynamicalMatrix", func() { m.DynamicalMatrix(q, nil) })
		mustPanic(t, "DynamicalMatrixGrad", func() { m.DynamicalMatrixGrad(q) })
	}
	// The bound itself is accepted.
	if err := physics.ValidateQPoints(3, []mesh.QPoint{{Q: [3]float64{physics.MaxQ, -physics.MaxQ, 0.5}}}, "points"); err != nil {
		t.Errorf("q at ±MaxQ: %v", err)
	}
	bad := [3]float64{math.NaN(), 0, 0}
	mustPanic(t, "Point(VelocityDir)", func() { m.Point([3]float64{0.1}, physics.ModeOptions{Velocities: true, VelocityDir: bad}) })
	mustPanic(t, "SoundVelocities", func() { _, _ = m.SoundVelocities(context.Background(), bad) })
	err := m.StreamModes(context.Background(), []mesh.QPoint{{Q: [3]float64{0.1}}}, physics.ModeOptions{Velocities: true, VelocityDir: bad}, func(physics.ModeChunk) error { return nil })
	if got := testmodels.ViolationFields(err); len(got) != 1 || got[0] != "velocity_dir" {
		t.Errorf("StreamModes with a NaN VelocityDir: %v; want a violation of velocity_dir", err)
	}
}

// TestLargeQPeriodic: D(q + G) = D(q) for a reciprocal lattice vector G in
// the cell phase convention (doc.go), and the engine reduces q modulo 1
// exactly, so frequencies at q and at q shifted by integers up to MaxQ are
// bit-for-bit equal for q exactly representable (dyadic fractions).
func TestLargeQPeriodic(t *testing.T) {
	m := testmodels.Compile(t, testmodels.Load(t, "rocksalt-like"))
	q := [3]float64{0.25, -0.375, 0.125}
	want := m.FrequenciesTHz(q)
	for _, shift := range [][3]float64{{999999, 0, 0}, {-999999, 999999, 12345}, {-999999, -999999, -999999}} {
		qs := [3]float64{q[0] + shift[0], q[1] + shift[1], q[2] + shift[2]}
		got := m.FrequenciesTHz(qs)
		for k := range want {
			if got[k] != want[k] {
				t.Errorf("q+%v: mode %d is %.17g THz; want %.17g exactly", shift, k, got[k], want[k])
			}
		}
	}
	// Sound velocities take a direction of any finite length.
	small, huge := testmodels.Sound(t, m, [3]float64{1, 1, 0}), testmodels.Sound(t, m, [3]float64{1e300, 1e300, 0})
	if !testmodels.CloseSlices(small, huge, 1e-12) {
		t.Errorf("SoundVelocities(1e300·dir) = %v; want %v", huge, small)
	}
}

// TestNilCrystal: a nil crystal is a validation error, not a panic.
func TestNilCrystal(t *testing.T) {
	if got := testmodels.ViolationFields(physics.Validate(nil, physics.Limits{})); len(got) != 1 || got[0] != "model" {
		t.Errorf("Validate(nil): fields %v; want [model]", got)
	}
	m, err := physics.Compile(context.Background(), nil, physics.Options{})
	if got := testmodels.ViolationFields(err); m != nil || len(got) != 1 || got[0] != "model" {
		t.Errorf("Compile(context.Background(), nil): %v, %v; want a violation of model", m, err)
	}
}

// TestCleanEigenvalues: the zero rule of doc.go on hand-made spectra.
func TestCleanEigenvalues(t *testing.T) {
	const tol = 1e-14
	for _, tc := range []struct {
		name string
		q    [3]float64
		p    int
		in   []float64
		want []float64
	}{
		{"Γ acoustic noise", [3]float64{}, 3, []float64{-3e-17, -1e-17, 2e-17, 0.5}, []float64{0, 0, 0, 0.5}},
		{"Γ image", [3]float64{1, -2, 0}, 1, []float64{4e-15, 0.3}, []float64{0, 0.3}},
		{"Γ: only p modes", [3]float64{}, 1, []float64{1e-16, 2e-16, 0.3}, []float64{0, 2e-16, 0.3}},
		{"Γ: sum rule broken", [3]float64{}, 1, []float64{-1e-6, 0.3}, []float64{-1e-6, 0.3}},
		{"Γ: real instability", [3]float64{}, 1, []float64{-0.2, 1e-17, 0.3}, []float64{-0.2, 0, 0.3}},
		{"off Γ: negative noise", [3]float64{0.1}, 1, []float64{-1e-15, 0.3}, []float64{0, 0.3}},
		{"off Γ: tiny positive kept", [3]float64{0.1}, 1, []float64{1e-16, 0.3}, []float64{1e-16, 0.3}},
		{"off Γ: imaginary kept", [3]float64{0.1}, 1, []float64{-2e-14, 0.3}, []float64{-2e-14, 0.3}},
	} {
		got := append([]float64(nil), tc.in...)
		physics.CleanEigenvalues(got, tc.q, tc.p, tol)
		for k := range got {
			if got[k] != tc.want[k] {
				t.Errorf("%s: %v; want %v", tc.name, got, tc.want)
				break
			}
		}
	}
}

// TestExamplesZeroAtGamma: for every example (springs keep the acoustic sum
// rule) the p acoustic modes at Γ and at its images are exactly 0 on every
// output path, none negative, and Stability's lowest frequency is 0.
func TestExamplesZeroAtGamma(t *testing.T) {
	for _, name := range testmodels.Names(t) {
		t.Run(name, func(t *testing.T) {
			m := testmodels.Compile(t, testmodels.Load(t, name))
			p := m.Polarizations()
			check := func(where string, f []float64) {
				t.Helper()
				for k := 0; k < p; k++ {
					if f[k] != 0 {
						t.Errorf("%s: acoustic mode %d is %g THz; want exactly 0", where, k, f[k])
					}
				}
				if len(f) > p && f[p] <= 0 {
					t.Errorf("%s: mode %d is %g THz; want > 0", where, p, f[p])
				}
			}
			check("FrequenciesTHz(Γ)", m.FrequenciesTHz([3]float64{}))
			img := [3]float64{1}
			if m.Dim() >= 2 {
				img[1] = -3
			}
			check("FrequenciesTHz(image of Γ)", m.FrequenciesTHz(img))
			f, _ := m.ModesAt([3]float64{})
			check("ModesAt", f)
			check("Point", m.Point([3]float64{}, physics.ModeOptions{Velocities: true}).FreqTHz)
			g := testmodels.Modes(t, m, forDim(mesh.GridSpec{Mesh: [3]int{4, 4, 4}}, m.Dim()), physics.GridOptions{})
			check("GridModes", g.FreqTHz[:g.NModes])
			path, err := m.Dispersion(testmodels.Ctx(t), []physics.PathCorner{{Label: "G"}, {Q: [3]float64{0.5}, HasQ: true}}, physics.PathOptions{Points: 3})
			if err != nil {
				t.Fatal(err)
			}
			check("Dispersion", path[0].FreqTHz)
			lo, _, stable, err := m.Stability(testmodels.Ctx(t), 4)
			if err != nil || !stable || lo != 0 {
				t.Errorf("Stability: lowest %g THz, stable %v, err %v; want exactly 0, stable", lo, stable, err)
			}
		})
	}
}

// forDim sets the mesh components past d to 1.
func forDim(g mesh.GridSpec, d int) mesh.GridSpec {
	for k := d; k < 3; k++ {
		g.Mesh[k] = 1
	}
	return g
}

// TestTinyStiffnessKept: a chain of equal masses M joined by alternating
// springs K and G = 1e-12 K has ω² = (K+G)/M ± (1/M)·sqrt(K² + G² + 2KG
// cos 2πq) (Ashcroft & Mermin, Solid State Physics, ch. 22, the linear
// chain with a basis); its acoustic branch, about 1e-6 of the optical one
// in frequency, is real and positive and must not be taken for rounding
// noise. The lower root is evaluated as 2KG(1 − cos 2πq)/(M² ω₊²) to avoid
// cancellation.
func TestTinyStiffnessKept(t *testing.T) {
	const k, gk, mass = 1.0, 1e-12, 10.0
	c := &physics.Crystal{Lattice: [][3]float64{{4, 0, 0}}, Polarizations: 1,
		Sites: []physics.Site{{Label: "A", MassAmu: mass, Frac: []float64{0}}, {Label: "B", MassAmu: mass, Frac: []float64{0.5}}},
		Springs: []physics.Spring{
			{From: 0, To: 1, Cell: []int{0}, KLong: k},
			{From: 1, To: 0, Cell: []int{1}, KLong: gk},
		}}
	m := testmodels.Compile(t, c)
	for _, q := range []float64{0.5, 0.25, 0.1} {
		cs := math.Cos(2 * math.Pi * q)
		wp := (k+gk)/mass + math.Sqrt(k*k+gk*gk+2*k*gk*cs)/mass
		wm := 2 * k * gk * (1 - cs) / (mass * mass * wp)
		f := m.FrequenciesTHz([3]float64{q})
		// Eigenvalue error ≈ ε‖D‖ ≈ 4e-17 against ω₋² ≥ 1.9e-14 (q = 0.1):
		// 0.2 % at most, 0.1 % in frequency.
		if want := math.Sqrt(wm) * physics.NuUnitTHz; !(f[0] > 0) || !relClose(f[0], want, 1e-2) {
			t.Errorf("q=%v: acoustic %g THz; want %g THz (positive)", q, f[0], want)
		}
		if want := math.Sqrt(wp) * physics.NuUnitTHz; !relClose(f[1], want, 1e-12) {
			t.Errorf("q=%v: optical %g THz; want %g", q, f[1], want)
		}
	}
	if wm := 2 * gk / mass; !(wm > 100*m.EigenTol()) {
		t.Fatalf("the zone-boundary eigenvalue %g is not well above EigenTol %g; the test needs it to be", wm, m.EigenTol())
	}
	if _, _, stable, err := m.Stability(testmodels.Ctx(t), 16); err != nil || !stable {
		t.Errorf("Stability: stable %v, err %v", stable, err)
	}
}
