// Package testmodels gives the tests of the engine's packages built on the
// core (spectra, thermo) the example crystals of proto/examples compiled,
// and crystal transformations (supercells, rotations, permutations, unit
// changes). It is for tests only: no non-test package imports it. The
// core's tests use it too: they are external tests (package physics_test),
// reaching the few internals they check through physics/export_test.go.
package testmodels

import (
	"context"
	"encoding/json"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"testing"
	"time"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/lattice"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// exampleDir holds the built-in example crystals (the protobuf JSON model
// files shared with the service and the demo).
var exampleDir = filepath.Join(dirOfThisFile(), "..", "..", "..", "proto", "examples")

// Names lists every example crystal in the repository.
func Names(t testing.TB) []string {
	t.Helper()
	m, err := filepath.Glob(filepath.Join(exampleDir, "*.json"))
	if err != nil || len(m) == 0 {
		t.Fatalf("no example crystals in %s: %v", exampleDir, err)
	}
	var names []string
	for _, p := range m {
		b := filepath.Base(p)
		names = append(names, b[:len(b)-len(".json")])
	}
	return names
}

// Load decodes an example model file with encoding/json, without its
// polar data (Born charges and ε∞): the tests of the core compile every
// example with the core alone, which refuses charges without the
// dipole–dipole builder of physics/polar. This mirror of the protobuf JSON
// mapping is test-only: physics must not import proto/.
func Load(t testing.TB, name string) *physics.Crystal {
	t.Helper()
	c := LoadPolar(t, name)
	c.EpsilonInf = nil
	for i := range c.Sites {
		c.Sites[i].BornCharge = nil
	}
	return c
}

// LoadPolar decodes an example model file with its polar data, if any.
func LoadPolar(t testing.TB, name string) *physics.Crystal {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(exampleDir, name+".json"))
	if err != nil {
		t.Fatal(err)
	}
	return Decode(t, name, b)
}

// Decode decodes a model file text (see Load).
func Decode(t testing.TB, name string, b []byte) *physics.Crystal {
	t.Helper()
	var f struct {
		Name          string
		Lattice       []struct{ X, Y, Z float64 }
		Polarizations int
		ForceUnit     string
		EpsilonInf    []float64
		Sites         []struct {
			Label      string
			MassAmu    float64
			Frac       []float64
			BornCharge []float64
		}
		Springs []struct {
			From          int `json:"fromSite"`
			To            int `json:"toSite"`
			Cell          []int
			KLong, KTrans float64
		}
		Shells []struct {
			FromLabel, ToLabel string
			Shell              int
			KLong, KTrans      float64
		}
		Blocks []struct {
			From int `json:"fromSite"`
			To   int `json:"toSite"`
			Cell []int
			Phi  []float64
		}
	}
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	c := &physics.Crystal{Name: f.Name, Polarizations: f.Polarizations, EpsilonInf: f.EpsilonInf}
	if f.ForceUnit == "FORCE_UNIT_N_PER_M" {
		c.ForceUnit = physics.NPerM
	}
	for _, v := range f.Lattice {
		c.Lattice = append(c.Lattice, [3]float64{v.X, v.Y, v.Z})
	}
	for _, s := range f.Sites {
		c.Sites = append(c.Sites, physics.Site{Label: s.Label, MassAmu: s.MassAmu, Frac: s.Frac, BornCharge: s.BornCharge})
	}
	for _, s := range f.Springs {
		c.Springs = append(c.Springs, physics.Spring{From: s.From, To: s.To, Cell: s.Cell, KLong: s.KLong, KTrans: s.KTrans})
	}
	for _, s := range f.Shells {
		c.Shells = append(c.Shells, physics.Shell{FromLabel: s.FromLabel, ToLabel: s.ToLabel, Shell: s.Shell, KLong: s.KLong, KTrans: s.KTrans})
	}
	for _, s := range f.Blocks {
		c.Blocks = append(c.Blocks, physics.Block{From: s.From, To: s.To, Cell: s.Cell, Phi: s.Phi})
	}
	return c
}

func Compile(t testing.TB, c *physics.Crystal) *physics.Model {
	t.Helper()
	m, err := physics.Compile(context.Background(), c, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// Symmetry is Model.Symmetry without a deadline.
func Symmetry(t testing.TB, m *physics.Model) []physics.SymOp {
	t.Helper()
	ops, err := m.Symmetry(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	return ops
}

// Sound is Model.SoundVelocities without a deadline.
func Sound(t testing.TB, m *physics.Model, dir [3]float64) []float64 {
	t.Helper()
	v, err := m.SoundVelocities(context.Background(), dir)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// ElasticTheta is Model.ElasticDebyeTemperature without a deadline.
func ElasticTheta(t testing.TB, m *physics.Model) float64 {
	t.Helper()
	th, err := m.ElasticDebyeTemperature(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	return th
}

// Clone deep-copies c.
func Clone(c *physics.Crystal) *physics.Crystal {
	out := *c
	out.Lattice = append([][3]float64(nil), c.Lattice...)
	out.Sites = nil
	for _, s := range c.Sites {
		s.Frac = append([]float64(nil), s.Frac...)
		s.BornCharge = append([]float64(nil), s.BornCharge...)
		if len(s.BornCharge) == 0 {
			s.BornCharge = nil
		}
		out.Sites = append(out.Sites, s)
	}
	if c.EpsilonInf != nil {
		out.EpsilonInf = append([]float64(nil), c.EpsilonInf...)
	}
	out.Springs = nil
	for _, s := range c.Springs {
		s.Cell = append([]int(nil), s.Cell...)
		out.Springs = append(out.Springs, s)
	}
	out.Shells = append([]physics.Shell(nil), c.Shells...)
	out.Blocks = nil
	for _, b := range c.Blocks {
		b.Cell = append([]int(nil), b.Cell...)
		b.Phi = append([]float64(nil), b.Phi...)
		out.Blocks = append(out.Blocks, b)
	}
	return &out
}

// Supercell returns c described in the cell a'_k = Σ_l M_kl a_l (d×d
// integer matrix, det ≠ 0): det(M) copies of every site, every spring and
// block re-expressed between the copies, shells unchanged (they act by
// label). Site I = copy·nsites + i… in enumeration order.
func Supercell(t testing.TB, c *physics.Crystal, mt [3][3]int) *physics.Crystal {
	t.Helper()
	d := len(c.Lattice)
	sc := newSupercellMap(t, d, mt)
	out := Clone(c)
	out.Lattice = make([][3]float64, d)
	for k := 0; k < d; k++ {
		for l := 0; l < d; l++ {
			for a := 0; a < 3; a++ {
				out.Lattice[k][a] += sc.mf[k][l] * c.Lattice[l][a]
			}
		}
	}
	out.Sites = sc.copySites(c.Sites)
	if len(out.Sites) != sc.det*len(c.Sites) {
		t.Fatalf("Supercell: %d sites; want %d", len(out.Sites), sc.det*len(c.Sites))
	}
	out.Springs = nil
	for _, s := range c.Springs {
		for I, cp := range sc.copies {
			if cp.prim == s.From {
				J, cell := sc.target(s.To, cp.t, s.Cell)
				out.Springs = append(out.Springs, physics.Spring{From: I, To: J, Cell: cell, KLong: s.KLong, KTrans: s.KTrans})
			}
		}
	}
	out.Blocks = nil
	for _, b := range c.Blocks {
		for I, cp := range sc.copies {
			if cp.prim == b.From {
				J, cell := sc.target(b.To, cp.t, b.Cell)
				out.Blocks = append(out.Blocks, physics.Block{From: I, To: J, Cell: cell, Phi: append([]float64(nil), b.Phi...)})
			}
		}
	}
	return out
}

// supercellMap is the change of cell of Supercell: M (integer and padded
// to 3×3 with the identity), its inverse and determinant, and the copies
// of the primitive sites in the new cell.
type supercellMap struct {
	t      testing.TB
	d      int
	mt     [3][3]int
	mf     [3][3]float64 // M
	inv    [3][3]float64 // M⁻¹
	det    int           // |det M|
	copies []siteCopy
}

// siteCopy is one site of the supercell: primitive site prim translated
// by the lattice vector t (primitive cells).
type siteCopy struct {
	prim int
	t    [3]int
}

// newSupercellMap pads mt (d×d) to 3×3 and inverts it.
func newSupercellMap(t testing.TB, d int, mt [3][3]int) *supercellMap {
	sc := &supercellMap{t: t, d: d, mt: mt}
	mf := &sc.mf
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			if i < d && j < d {
				mf[i][j] = float64(mt[i][j])
			} else if i == j {
				mf[i][j] = 1
			}
		}
	}
	sc.det = abs(int(math.Round(mf[0][0]*(mf[1][1]*mf[2][2]-mf[1][2]*mf[2][1]) -
		mf[0][1]*(mf[1][0]*mf[2][2]-mf[1][2]*mf[2][0]) +
		mf[0][2]*(mf[1][0]*mf[2][1]-mf[1][1]*mf[2][0]))))
	sc.inv = lattice.Invert(sc.mf, 3)
	return sc
}

// toNew converts primitive fractional coordinates f to the supercell's:
// M⁻ᵀ f.
func (sc *supercellMap) toNew(f [3]float64) [3]float64 {
	var g [3]float64
	for k := 0; k < 3; k++ {
		for l := 0; l < 3; l++ {
			g[k] += sc.inv[l][k] * f[l]
		}
	}
	return g
}

// copySites returns the sites of the supercell: every translate of every
// primitive site, within Σ|M_ij| cells, that falls inside the new cell, in
// order of primitive site then translation; it records them in sc.copies.
func (sc *supercellMap) copySites(sites []physics.Site) []physics.Site {
	d := sc.d
	reach := 0
	for i := 0; i < d; i++ {
		for j := 0; j < d; j++ {
			reach += abs(sc.mt[i][j])
		}
	}
	var out []physics.Site
	sc.copies = nil
	for i, s := range sites {
		var tt [3]int
		for tt[0] = -reach; tt[0] <= reach; tt[0]++ {
			for tt[1] = -reach; tt[1] <= reach; tt[1]++ {
				for tt[2] = -reach; tt[2] <= reach; tt[2]++ {
					if ns, ok := sc.copyInCell(s, tt); ok {
						out = append(out, ns)
						sc.copies = append(sc.copies, siteCopy{i, tt})
					}
				}
			}
		}
	}
	return out
}

// copyInCell returns site s translated by tt in supercell coordinates,
// and whether it lies in the supercell (tt zero beyond d dimensions, every
// coordinate in [0, 1) to 1e-9; −1e-9 … 0 is stored as 0).
func (sc *supercellMap) copyInCell(s physics.Site, tt [3]int) (physics.Site, bool) {
	d := sc.d
	for k := d; k < 3; k++ {
		if tt[k] != 0 {
			return physics.Site{}, false
		}
	}
	var f [3]float64
	for k := 0; k < d; k++ {
		f[k] = s.Frac[k] + float64(tt[k])
	}
	g := sc.toNew(f)
	for k := 0; k < d; k++ {
		if !(g[k] >= -1e-9 && g[k] < 1-1e-9) {
			return physics.Site{}, false
		}
	}
	ns := physics.Site{Label: s.Label, MassAmu: s.MassAmu, Frac: make([]float64, d)}
	for k := 0; k < d; k++ {
		ns.Frac[k] = math.Max(g[k], 0)
	}
	return ns, true
}

// target finds, for a bond from a copy at translation from to primitive
// site j in primitive cell offset cell (absolute translation T = from +
// cell), the copy J of j and the supercell offset N with T = t_J + Mᵀ N.
func (sc *supercellMap) target(j int, from [3]int, cell []int) (int, []int) {
	d := sc.d
	var T [3]int
	for k := 0; k < d; k++ {
		T[k] = from[k] + cell[k]
	}
	for J, cp := range sc.copies {
		if cp.prim != j {
			continue
		}
		var diff [3]float64
		for k := 0; k < 3; k++ {
			diff[k] = float64(T[k] - cp.t[k])
		}
		n := sc.toNew(diff)
		ok := true
		out := make([]int, d)
		for k := 0; k < d; k++ {
			r := math.Round(n[k])
			ok = ok && math.Abs(n[k]-r) < 1e-9
			out[k] = int(r)
		}
		if ok {
			return J, out
		}
	}
	sc.t.Fatalf("Supercell: no copy of site %d at %v", j, T)
	return 0, nil
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// RandomRotation returns a random proper rotation matrix (from a random
// unit quaternion).
func RandomRotation(rng *rand.Rand) [3][3]float64 {
	q := [4]float64{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
	n := math.Sqrt(q[0]*q[0] + q[1]*q[1] + q[2]*q[2] + q[3]*q[3])
	w, x, y, z := q[0]/n, q[1]/n, q[2]/n, q[3]/n
	return [3][3]float64{
		{1 - 2*(y*y+z*z), 2 * (x*y - z*w), 2 * (x*z + y*w)},
		{2 * (x*y + z*w), 1 - 2*(x*x+z*z), 2 * (y*z - x*w)},
		{2 * (x*z - y*w), 2 * (y*z + x*w), 1 - 2*(x*x+y*y)},
	}
}

func Rotate3(r [3][3]float64, v [3]float64) [3]float64 {
	var o [3]float64
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			o[a] += r[a][b] * v[b]
		}
	}
	return o
}

// Rotated returns c rigidly Rotated by r: lattice vectors rotate, fractional
// positions stay, blocks transform as R Φ Rᵀ.
func Rotated(c *physics.Crystal, r [3][3]float64) *physics.Crystal {
	out := Clone(c)
	for k := range out.Lattice {
		out.Lattice[k] = Rotate3(r, out.Lattice[k])
	}
	for i, b := range out.Blocks {
		var phi [9]float64
		for a := 0; a < 3; a++ {
			for bb := 0; bb < 3; bb++ {
				for x := 0; x < 3; x++ {
					for y := 0; y < 3; y++ {
						phi[3*a+bb] += r[a][x] * b.Phi[3*x+y] * r[bb][y]
					}
				}
			}
		}
		out.Blocks[i].Phi = phi[:]
	}
	return out
}

// PermutedSites returns c with site i moved to position perm[i].
func PermutedSites(c *physics.Crystal, perm []int) *physics.Crystal {
	out := Clone(c)
	for i, s := range c.Sites {
		s.Frac = append([]float64(nil), s.Frac...)
		out.Sites[perm[i]] = s
	}
	for k := range out.Springs {
		out.Springs[k].From = perm[out.Springs[k].From]
		out.Springs[k].To = perm[out.Springs[k].To]
	}
	for k := range out.Blocks {
		out.Blocks[k].From = perm[out.Blocks[k].From]
		out.Blocks[k].To = perm[out.Blocks[k].To]
	}
	return out
}

// InNPerM returns c with every force constant converted to N/m
// (1 eV/Å² = 16.02176634 N/m, CODATA 2018 exact).
func InNPerM(c *physics.Crystal) *physics.Crystal {
	if c.ForceUnit == physics.NPerM {
		return Clone(c)
	}
	out := Clone(c)
	out.ForceUnit = physics.NPerM
	const f = 16.02176634
	for k := range out.Springs {
		out.Springs[k].KLong *= f
		out.Springs[k].KTrans *= f
	}
	for k := range out.Shells {
		out.Shells[k].KLong *= f
		out.Shells[k].KTrans *= f
	}
	for k := range out.Blocks {
		for a := range out.Blocks[k].Phi {
			out.Blocks[k].Phi[a] *= f
		}
	}
	return out
}

// CloseSpectra reports that two spectra (THz, imaginary modes negative)
// agree as eigenvalues λ = ν|ν|: |λa − λb| ≤ tol·max|λb|. Zero modes at Γ
// are square roots of rounding noise (|λ| ≈ 1e-16 of the largest gives
// ν ≈ 1e-8 of the largest, of either sign), which a comparison of
// frequencies at 1e-12 would take for a difference.
func CloseSpectra(a, b []float64, tol float64) bool {
	sq := func(v []float64) []float64 {
		out := make([]float64, len(v))
		for k, x := range v {
			out[k] = x * math.Abs(x)
		}
		return out
	}
	return CloseSlices(sq(a), sq(b), tol)
}

// CloseSlices reports |a_k − b_k| ≤ tol·max(|b|) for all k.
func CloseSlices(a, b []float64, tol float64) bool {
	if len(a) != len(b) {
		return false
	}
	s := MaxAbs(b)
	for k := range a {
		if math.Abs(a[k]-b[k]) > tol*math.Max(s, 1e-300) {
			return false
		}
	}
	return true
}

// Ctx is a context for a test, ended after two minutes or with the test.
func Ctx(t testing.TB) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	t.Cleanup(cancel)
	return ctx
}

// Modes computes the modes of m on spec.
func Modes(t testing.TB, m *physics.Model, spec mesh.GridSpec, opt physics.GridOptions) *physics.GridModes {
	t.Helper()
	g, err := m.GridModes(Ctx(t), spec, opt)
	if err != nil {
		t.Fatal(err)
	}
	return g
}

// Grid compiles the example crystal name and computes its modes on spec.
func Grid(t testing.TB, name string, spec mesh.GridSpec, opt physics.GridOptions) (*physics.Model, *physics.GridModes) {
	t.Helper()
	m := Compile(t, Load(t, name))
	return m, Modes(t, m, spec, opt)
}

// dirOfThisFile is the directory of this source file, so that the
// examples are found from the test of any package.
func dirOfThisFile() string {
	_, f, _, _ := runtime.Caller(0)
	return filepath.Dir(f)
}

// MaxAbs is the largest |x| of xs (0 when empty).
func MaxAbs(xs []float64) float64 {
	var m float64
	for _, x := range xs {
		m = math.Max(m, math.Abs(x))
	}
	return m
}

// ViolationFields returns the fields of a *physics.ValidationError (nil
// for any other error).
func ViolationFields(err error) []string {
	var ve *physics.ValidationError
	if !errors.As(err, &ve) {
		return nil
	}
	var out []string
	for _, v := range ve.Violations {
		out = append(out, v.Field)
	}
	return out
}

// RelDiff is |a − b| relative to the larger magnitude (0 when equal).
func RelDiff(a, b float64) float64 {
	if a == b {
		return 0
	}
	return math.Abs(a-b) / math.Max(math.Abs(a), math.Abs(b))
}

// StepIntegral is Σ dos·step on the equally spaced frequencies freq: the
// states in a DOS window (the samples are bin averages).
func StepIntegral(freq, dos []float64) float64 {
	step := freq[1] - freq[0]
	s := 0.0
	for _, x := range dos {
		s += x * step
	}
	return s
}
