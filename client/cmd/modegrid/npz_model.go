package main

import (
	"bytes"
	"fmt"
	"math"
	"path/filepath"
	"strings"

	"codeberg.org/sbinet/npyio/npz"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// npzArrays are the arrays of a supercell force-constant .npz; see
// loadNPZ.
type npzArrays struct {
	lattice, masses, positions, matrix, scPositions, fc, prim *npzArray
	labels                                                    []string
}

// loadNPZ reads a NumPy .npz supercell force-constant set into a Crystal
// with supercell_fc. Arrays (lengths in Å, masses in amu, force constants
// in eV/Å²): lattice (d×3), masses (n), positions (n×d, fractional),
// supercell_matrix (d×d, integers), supercell_positions (N×d, fractional
// in the supercell), force_constants (N×N×3×3, or n×N×3×3 with
// primitive_atoms (n) naming each primitive site's supercell image) and
// optionally labels (n strings). Every problem is reported at once, each
// naming its array and the expected shape.
func loadNPZ(path string, b []byte) (*modegridv1.Crystal, error) {
	r, err := npz.NewReader(bytes.NewReader(b), int64(len(b)))
	if err != nil {
		return nil, fmt.Errorf("not a NumPy .npz archive: %w", err)
	}
	z := &npzFile{r: r}
	a := z.readAll()
	if len(z.problems) == 0 {
		z.checkShapes(a)
	}
	if len(z.problems) > 0 {
		return nil, fmt.Errorf("%d problem%s: %s", len(z.problems), plural(len(z.problems)), strings.Join(z.problems, "; "))
	}
	return a.crystal(strings.TrimSuffix(filepath.Base(path), filepath.Ext(path))), nil
}

// readAll reads every array, noting missing ones and wrong dtypes.
func (z *npzFile) readAll() *npzArrays {
	a := &npzArrays{
		lattice:     z.read("lattice", false),
		masses:      z.read("masses", false),
		positions:   z.read("positions", false),
		matrix:      z.read("supercell_matrix", true),
		scPositions: z.read("supercell_positions", false),
		fc:          z.read("force_constants", false),
	}
	if z.has("primitive_atoms") {
		a.prim = z.read("primitive_atoms", true)
	}
	if z.has("labels") {
		if err := z.r.Read(z.key("labels"), &a.labels); err != nil {
			z.problemf("labels: %v (want n strings)", err)
		}
	}
	return a
}

// checkShapes checks every array against d (rows of lattice), n (masses)
// and N (rows of supercell_positions).
func (z *npzFile) checkShapes(a *npzArrays) {
	if !z.shapeIs("lattice", a.lattice, []int{-1, 3}, "(d, 3)") || !z.shapeIs("masses", a.masses, []int{-1}, "(n,)") {
		return
	}
	d, n := a.lattice.shape[0], a.masses.shape[0]
	if d < 1 || d > 3 {
		z.problemf("lattice: %d rows, want d = 1, 2 or 3", d)
		return
	}
	z.shapeIs("positions", a.positions, []int{n, d}, fmt.Sprintf("(n, d) = (%d, %d)", n, d))
	if z.shapeIs("supercell_matrix", a.matrix, []int{d, d}, fmt.Sprintf("(d, d) = (%d, %d)", d, d)) {
		for k, m := range a.matrix.ints {
			if m < math.MinInt32 || m > math.MaxInt32 {
				z.problemf("supercell_matrix[%d][%d]: %d does not fit in int32", k/d, k%d, m)
			}
		}
	}
	if a.labels != nil && len(a.labels) != n {
		z.problemf("labels: %d entries, want n = %d", len(a.labels), n)
	}
	if !z.shapeIs("supercell_positions", a.scPositions, []int{-1, d}, fmt.Sprintf("(N, d) = (N, %d)", d)) {
		return
	}
	bigN := a.scPositions.shape[0]
	if a.prim == nil {
		z.shapeIs("force_constants", a.fc, []int{bigN, bigN, 3, 3},
			fmt.Sprintf("(N, N, 3, 3) = (%d, %d, 3, 3), or (n, N, 3, 3) with primitive_atoms", bigN, bigN))
		return
	}
	z.shapeIs("primitive_atoms", a.prim, []int{n}, fmt.Sprintf("(n,) = (%d,)", n))
	z.shapeIs("force_constants", a.fc, []int{n, bigN, 3, 3}, fmt.Sprintf("(n, N, 3, 3) = (%d, %d, 3, 3) with primitive_atoms", n, bigN))
	for i, v := range a.prim.ints {
		if v < 0 || v >= int64(bigN) {
			z.problemf("primitive_atoms[%d]: %d, want a supercell atom index in [0, %d)", i, v, bigN)
		}
	}
}

// crystal builds the model from arrays whose shapes checkShapes accepted.
func (a *npzArrays) crystal(name string) *modegridv1.Crystal {
	d, n := a.lattice.shape[0], a.masses.shape[0]
	c := &modegridv1.Crystal{Name: name, ForceUnit: modegridv1.ForceUnit_FORCE_UNIT_EV_PER_A2}
	for r := range d {
		v := a.lattice.f[3*r : 3*r+3]
		c.Lattice = append(c.Lattice, &modegridv1.Vec3{X: v[0], Y: v[1], Z: v[2]})
	}
	for s := range n {
		site := &modegridv1.Site{MassAmu: a.masses.f[s], Frac: append([]float64(nil), a.positions.f[d*s:d*s+d]...)}
		if a.labels != nil {
			site.Label = a.labels[s]
		}
		c.Sites = append(c.Sites, site)
	}
	fc := &modegridv1.SupercellForceConstants{Fractional: true, Phi: a.fc.f}
	for _, m := range a.matrix.ints {
		fc.Matrix = append(fc.Matrix, int32(m))
	}
	for i := range a.scPositions.shape[0] {
		fc.Atoms = append(fc.Atoms, &modegridv1.SupercellAtom{Position: append([]float64(nil), a.scPositions.f[d*i:d*i+d]...)})
	}
	if a.prim != nil {
		for _, p := range a.prim.ints {
			fc.PrimitiveAtoms = append(fc.PrimitiveAtoms, uint32(p))
		}
	}
	c.SupercellFc = fc
	return c
}
