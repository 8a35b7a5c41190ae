package main

import (
	"archive/zip"
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/client"
)

// npyArray is one array for writeNPZ: shape, dtype ("<f8", "<i8", "<i4")
// and its numbers in row-major order, or in column-major order when
// fortran is set (as numpy writes an F-contiguous array).
type npyArray struct {
	shape   []int
	dtype   string
	data    []float64
	text    []string // dtype "<U1": one character each, UTF-32
	fortran bool
}

// writeNPZ writes a .npz as numpy.savez does: a zip of NAME.npy members,
// each a version-1.0 .npy header (a Python dict literal padded to 64
// bytes) followed by the little-endian data.
func writeNPZ(t *testing.T, path string, arrays map[string]npyArray) {
	t.Helper()
	var buf bytes.Buffer
	zw := zip.NewWriter(&buf)
	for name, a := range arrays {
		w, err := zw.Create(name + ".npy")
		if err != nil {
			t.Fatal(err)
		}
		shape := make([]string, len(a.shape))
		for k, v := range a.shape {
			shape[k] = fmt.Sprint(v)
		}
		st := "(" + strings.Join(shape, ", ")
		if len(shape) == 1 {
			st += ","
		}
		hdr := fmt.Sprintf("{'descr': '%s', 'fortran_order': %s, 'shape': %s), }", a.dtype, map[bool]string{true: "True", false: "False"}[a.fortran], st)
		pad := 64 - (10+len(hdr)+1)%64
		hdr += strings.Repeat(" ", pad%64) + "\n"
		var b bytes.Buffer
		b.WriteString("\x93NUMPY\x01\x00")
		_ = binary.Write(&b, binary.LittleEndian, uint16(len(hdr)))
		b.WriteString(hdr)
		for _, r := range strings.Join(a.text, "") {
			_ = binary.Write(&b, binary.LittleEndian, uint32(r))
		}
		for _, v := range a.data {
			switch a.dtype {
			case "<f8":
				_ = binary.Write(&b, binary.LittleEndian, v)
			case "<i8":
				_ = binary.Write(&b, binary.LittleEndian, int64(v))
			case "<i4":
				_ = binary.Write(&b, binary.LittleEndian, int32(v))
			}
		}
		if _, err := w.Write(b.Bytes()); err != nil {
			t.Fatal(err)
		}
	}
	if err := zw.Close(); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, buf.Bytes(), 0o600); err != nil {
		t.Fatal(err)
	}
}

// Diatomic chain (Kittel, Introduction to Solid State Physics, ch. 4):
// masses m1 at 0 and m2 at a/2, springs K1 within the cell and K2 to the
// next cell, here isotropic (the same spring along x, y and z).
const (
	chainA, chainM1, chainM2, chainK1, chainK2 = 5.0, 20.0, 50.0, 2.0, 3.0
	chainCells                                 = 4
)

// chainFC returns the force constants Φ(i, j) of the 4-cell supercell
// (atom 2c is m1 of cell c, atom 2c+1 is m2), N×N×3×3 row-major: Φ(i,i) =
// (K1+K2)·1, Φ(i,j) = −K·1 for the spring K joining i and j.
func chainFC() []float64 {
	const n = 2 * chainCells
	k := func(i, j int) float64 {
		lo, hi := min(i, j), max(i, j)
		switch {
		case i == j:
			return chainK1 + chainK2
		case hi == lo+1 && lo%2 == 0:
			return -chainK1
		case hi == lo+1 || (lo == 0 && hi == n-1):
			return -chainK2
		}
		return 0
	}
	phi := make([]float64, 0, n*n*9)
	for i := range n {
		for j := range n {
			v := k(i, j)
			phi = append(phi, v, 0, 0, 0, v, 0, 0, 0, v)
		}
	}
	return phi
}

// chainArrays is the chain as a full N×N supercell set.
func chainArrays() map[string]npyArray {
	var pos []float64
	for c := range chainCells {
		pos = append(pos, float64(c)/chainCells, (float64(c)+0.5)/chainCells)
	}
	const n = 2 * chainCells
	return map[string]npyArray{
		"lattice":             {shape: []int{1, 3}, dtype: "<f8", data: []float64{chainA, 0, 0}},
		"masses":              {shape: []int{2}, dtype: "<f8", data: []float64{chainM1, chainM2}},
		"positions":           {shape: []int{2, 1}, dtype: "<f8", data: []float64{0, 0.5}},
		"supercell_matrix":    {shape: []int{1, 1}, dtype: "<i8", data: []float64{chainCells}},
		"supercell_positions": {shape: []int{n, 1}, dtype: "<f8", data: pos},
		"force_constants":     {shape: []int{n, n, 3, 3}, dtype: "<f8", data: chainFC()},
	}
}

// chainTHz is the closed-form pair of frequencies (THz) at fractional q:
// ω² = S(1/m1+1/m2)/2 ± √((S/2)²(1/m1−1/m2)² + |K1+K2·e^{2πiq}|²/(m1m2))
// with S = K1+K2, in eV/Å²/amu; 1 eV/Å²/amu = e/(1e-20·u) s⁻² with
// e = 1.602176634e-19 J and u = 1.66053906660e-27 kg (CODATA 2018).
func chainTHz(q float64) (lo, hi float64) {
	s := chainK1 + chainK2
	mean := s * (1/chainM1 + 1/chainM2) / 2
	c2 := chainK1*chainK1 + chainK2*chainK2 + 2*chainK1*chainK2*math.Cos(2*math.Pi*q)
	root := math.Sqrt(s*s/4*math.Pow(1/chainM1-1/chainM2, 2) + c2/(chainM1*chainM2))
	unit := math.Sqrt(1.602176634e-19/(1e-20*1.66053906660e-27)) / (2 * math.Pi) / 1e12
	// ω_lo² = det/ω_hi², det = (S² − |K1+K2·e^{2πiq}|²)/(m1m2) =
	// 4K1K2 sin²(πq)/(m1m2): no cancellation near q = 0.
	det := 4 * chainK1 * chainK2 * math.Pow(math.Sin(math.Pi*q), 2) / (chainM1 * chainM2)
	return math.Sqrt(det/(mean+root)) * unit, math.Sqrt(mean+root) * unit
}

// modesJSON runs `modegrid modes --format json` and returns each point's
// frequencies.
func modesJSON(t *testing.T, model, q string) [][]float64 {
	t.Helper()
	code, out, stderr := runCLI(t, "modes", "-m", model, "--q", q, "--format", "json")
	if code != exitOK {
		t.Fatalf("modes -m %s: exit %d; stderr:\n%s", model, code, stderr)
	}
	var v struct {
		Points []struct {
			Frequencies []float64 `json:"frequencies"`
		} `json:"points"`
	}
	if err := json.Unmarshal([]byte(out), &v); err != nil {
		t.Fatalf("modes output is not JSON: %v", err)
	}
	var f [][]float64
	for _, p := range v.Points {
		f = append(f, p.Frequencies)
	}
	return f
}

// TestNPZDiatomicChain: the chain as a .npz supercell set, both as N×N
// blocks and as n×N blocks with int32 primitive_atoms stored in Fortran
// order, gives the closed-form frequencies through the embedded server.
func TestNPZDiatomicChain(t *testing.T) {
	qs := []float64{0, 0.1, 0.37, -0.23, 0.5}
	qText := make([]string, len(qs))
	for i, q := range qs {
		qText[i] = fmt.Sprint(q)
	}
	full := chainArrays()
	half := chainArrays()
	const n = 2 * chainCells
	rows := chainFC()[:2*n*9] // Φ(0, j), Φ(1, j): atoms 0 and 1 are the primitive sites' images
	half["force_constants"] = npyArray{shape: []int{2, n, 3, 3}, dtype: "<f8", data: fortranOrder(rows, []int{2, n, 3, 3}), fortran: true}
	half["primitive_atoms"] = npyArray{shape: []int{2}, dtype: "<i4", data: []float64{0, 1}}
	for name, arrays := range map[string]map[string]npyArray{"full": full, "primitive-rows": half} {
		t.Run(name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "chain.npz")
			writeNPZ(t, path, arrays)
			got := modesJSON(t, path, strings.Join(qText, ";"))
			if len(got) != len(qs) {
				t.Fatalf("%d points, want %d", len(got), len(qs))
			}
			for i, q := range qs {
				lo, hi := chainTHz(q)
				want := []float64{lo, lo, lo, hi, hi, hi}
				if len(got[i]) != len(want) {
					t.Fatalf("q=%g: %d frequencies, want %d", q, len(got[i]), len(want))
				}
				for m := range want {
					if math.Abs(got[i][m]-want[m]) > 1e-10 {
						t.Errorf("q=%g mode %d: %.15g THz, closed form %.15g", q, m, got[i][m], want[m])
					}
				}
			}
		})
	}
}

// fortranOrder rewrites row-major data of the given shape column-major.
func fortranOrder(v []float64, shape []int) []float64 {
	out := make([]float64, len(v))
	idx := make([]int, len(shape))
	for c := range v {
		f, stride := 0, 1
		for k := range shape {
			f += idx[k] * stride
			stride *= shape[k]
		}
		out[f] = v[c]
		for k := len(shape) - 1; k >= 0; k-- {
			if idx[k]++; idx[k] < shape[k] {
				break
			}
			idx[k] = 0
		}
	}
	return out
}

// TestNPZProblems: missing arrays, wrong dtypes and wrong shapes are all
// named in one run, each with the expected shape.
func TestNPZProblems(t *testing.T) {
	cases := map[string]struct {
		edit func(map[string]npyArray)
		want []string
	}{
		"missing and dtype": {func(a map[string]npyArray) {
			delete(a, "masses")
			delete(a, "force_constants")
			a["supercell_matrix"] = npyArray{shape: []int{1, 1}, dtype: "<f8", data: []float64{4}}
		}, []string{"3 problems", "masses: missing", "force_constants: missing", "supercell_matrix: dtype <f8, want int64 or int32"}},
		"shapes": {func(a map[string]npyArray) {
			a["positions"] = npyArray{shape: []int{2, 3}, dtype: "<f8", data: make([]float64, 6)}
			a["supercell_matrix"] = npyArray{shape: []int{2, 2}, dtype: "<i8", data: []float64{4, 0, 0, 1}}
			a["force_constants"] = npyArray{shape: []int{8, 8, 9}, dtype: "<f8", data: make([]float64, 8*8*9)}
		}, []string{"positions: shape (2, 3), want (n, d) = (2, 1)", "supercell_matrix: shape (2, 2), want (d, d) = (1, 1)", "force_constants: shape (8, 8, 9), want (N, N, 3, 3) = (8, 8, 3, 3)"}},
		"primitive rows": {func(a map[string]npyArray) {
			a["primitive_atoms"] = npyArray{shape: []int{2}, dtype: "<i8", data: []float64{0, 9}}
		}, []string{"force_constants: shape (8, 8, 3, 3), want (n, N, 3, 3) = (2, 8, 3, 3)", "primitive_atoms[1]: 9, want a supercell atom index in [0, 8)"}},
		"huge matrix": {func(a map[string]npyArray) {
			a["supercell_matrix"] = npyArray{shape: []int{1, 1}, dtype: "<i8", data: []float64{1 << 40}}
		}, []string{"supercell_matrix[0][0]: 1099511627776 does not fit in int32"}},
	}
	for name, tc := range cases {
		t.Run(name, func(t *testing.T) {
			a := chainArrays()
			tc.edit(a)
			path := filepath.Join(t.TempDir(), "bad.npz")
			writeNPZ(t, path, a)
			code, _, stderr := runCLI(t, "modes", "-m", path, "--q", "0")
			if code != exitInvalid {
				t.Fatalf("exit %d, want %d; stderr:\n%s", code, exitInvalid, stderr)
			}
			for _, w := range tc.want {
				if !strings.Contains(stderr, w) {
					t.Errorf("stderr lacks %q:\n%s", w, stderr)
				}
			}
		})
	}
}

// TestBinaryModelRoundTrip: a model written as protobuf binary (.pb and
// .binpb) reads back equal to its JSON and computes the same output.
func TestBinaryModelRoundTrip(t *testing.T) {
	c, err := client.LoadModel(example("diatomic-chain"))
	if err != nil {
		t.Fatal(err)
	}
	b, err := proto.Marshal(c)
	if err != nil {
		t.Fatal(err)
	}
	code, want, stderr := runCLI(t, "modes", "-m", example("diatomic-chain"), "--q", "0.1;0.5", "--format", "csv")
	if code != exitOK {
		t.Fatalf("JSON model: exit %d; %s", code, stderr)
	}
	for _, ext := range []string{".pb", ".binpb"} {
		path := filepath.Join(t.TempDir(), "chain"+ext)
		if err := os.WriteFile(path, b, 0o600); err != nil {
			t.Fatal(err)
		}
		back, err := parseModelFile(path, b)
		if err != nil || !proto.Equal(back, c) {
			t.Fatalf("%s: read back %v (err %v), want %v", ext, back, err, c)
		}
		code, got, stderr := runCLI(t, "modes", "-m", path, "--q", "0.1;0.5", "--format", "csv")
		if code != exitOK || got != want {
			t.Errorf("%s: exit %d, output\n%s\nwant\n%s\nstderr: %s", ext, code, got, want, stderr)
		}
	}
	bad := filepath.Join(t.TempDir(), "bad.pb")
	if err := os.WriteFile(bad, []byte{0xff, 0xff, 0xff}, 0o600); err != nil {
		t.Fatal(err)
	}
	if code, _, stderr := runCLI(t, "modes", "-m", bad, "--q", "0"); code != exitInvalid || !strings.Contains(stderr, "protobuf binary") {
		t.Errorf("garbage .pb: exit %d, stderr %s", code, stderr)
	}
}

// TestNPZLabels: optional labels become the site labels, the file's name
// the model's; a label count other than n is named.
func TestNPZLabels(t *testing.T) {
	a := chainArrays()
	a["labels"] = npyArray{shape: []int{2}, dtype: "<U1", text: []string{"L", "H"}}
	path := filepath.Join(t.TempDir(), "labelled.npz")
	writeNPZ(t, path, a)
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	c, err := parseModelFile(path, b)
	if err != nil {
		t.Fatal(err)
	}
	if c.GetName() != "labelled" || c.GetSites()[0].GetLabel() != "L" || c.GetSites()[1].GetLabel() != "H" {
		t.Errorf("name %q, sites %v; want labelled, L, H", c.GetName(), c.GetSites())
	}
	a["labels"] = npyArray{shape: []int{3}, dtype: "<U1", text: []string{"L", "H", "X"}}
	writeNPZ(t, path, a)
	if b, err = os.ReadFile(path); err != nil {
		t.Fatal(err)
	}
	if _, err := parseModelFile(path, b); err == nil || !strings.Contains(err.Error(), "labels: 3 entries, want n = 2") {
		t.Errorf("3 labels for 2 sites: %v", err)
	}
}

// TestNPZNotAnArchive: a .npz that is not a zip archive is an invalid
// model that says so.
func TestNPZNotAnArchive(t *testing.T) {
	path := filepath.Join(t.TempDir(), "text.npz")
	if err := os.WriteFile(path, []byte("lattice = 5\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	code, _, stderr := runCLI(t, "modes", "-m", path, "--q", "0")
	if code != exitInvalid || !strings.Contains(stderr, "not a NumPy .npz archive") {
		t.Errorf("exit %d, stderr %s", code, stderr)
	}
}
