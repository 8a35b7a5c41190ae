package main

import (
	"bufio"
	"fmt"
	"math"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/materials-lab/modegrid/client"
)

// xyzFrame is one frame of an XYZ trajectory.
type xyzFrame struct {
	comment string
	labels  []string
	pos     [][3]float64
}

// parseXYZ reads a multi-frame XYZ file strictly: atom count, comment, and
// exactly that many "label x y z" lines per frame.
func parseXYZ(t *testing.T, s string) []xyzFrame {
	t.Helper()
	sc := bufio.NewScanner(strings.NewReader(s))
	var frames []xyzFrame
	for sc.Scan() {
		n, err := strconv.Atoi(sc.Text())
		if err != nil || n < 1 {
			t.Fatalf("frame %d: atom count line %q", len(frames)+1, sc.Text())
		}
		if !sc.Scan() {
			t.Fatalf("frame %d: no comment line", len(frames)+1)
		}
		f := xyzFrame{comment: sc.Text()}
		for i := 0; i < n; i++ {
			if !sc.Scan() {
				t.Fatalf("frame %d: %d of %d atoms", len(frames)+1, i, n)
			}
			fields := strings.Fields(sc.Text())
			if len(fields) != 4 {
				t.Fatalf("frame %d atom %d: %q is not 'label x y z'", len(frames)+1, i, sc.Text())
			}
			var r [3]float64
			for k := range r {
				if r[k], err = strconv.ParseFloat(fields[k+1], 64); err != nil {
					t.Fatal(err)
				}
			}
			f.labels, f.pos = append(f.labels, fields[0]), append(f.pos, r)
		}
		frames = append(frames, f)
	}
	return frames
}

// shapeFrames runs `shape` and parses its trajectory.
func shapeFrames(t *testing.T, args ...string) []xyzFrame {
	t.Helper()
	code, out, stderr := runCLI(t, append([]string{"shape", "--xyz", "-"}, args...)...)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	return parseXYZ(t, out)
}

// restX is the rest position along x of every atom of a 1D block of
// cells, in the order shape writes them (cell-major, then site).
func restX(c []float64, a float64, cells int) []float64 {
	var out []float64
	for n := 0; n < cells; n++ {
		for _, f := range c {
			out = append(out, (float64(n)+f)*a)
		}
	}
	return out
}

// TestShapeChain: the monatomic chain at the zone boundary (q = ½): the
// default block is 2 cells, neighbouring cells move in antiphase in every
// frame, and the largest displacement is the amplitude (derived: the mode
// is u_n ∝ (−1)ⁿ cos ωt).
func TestShapeChain(t *testing.T) {
	frames := shapeFrames(t, "-m", example("chain"), "--q", "0.5", "--frames", "8", "--amplitude", "0.2")
	if len(frames) != 8 {
		t.Fatalf("%d frames; want 8", len(frames))
	}
	rest := restX([]float64{0}, 2.5, 2)
	for i, f := range frames {
		if len(f.pos) != 2 || f.labels[0] != "A" {
			t.Fatalf("frame %d: %d atoms %v", i, len(f.pos), f.labels)
		}
		u0, u1 := f.pos[0][0]-rest[0], f.pos[1][0]-rest[1]
		if math.Abs(u0+u1) > 2e-6 {
			t.Errorf("frame %d: u0 = %.6f, u1 = %.6f; want antiphase", i, u0, u1)
		}
		// Frame f is at ωt = 2πf/8: u0 = 0.2 cos ωt.
		if want := 0.2 * math.Cos(2*math.Pi*float64(i)/8); math.Abs(math.Abs(u0)-math.Abs(want)) > 2e-6 {
			t.Errorf("frame %d: |u0| = %.6f; want %.6f", i, math.Abs(u0), math.Abs(want))
		}
	}
}

// TestShapeGammaAcoustic: at Γ the acoustic branch of the diatomic chain is
// a rigid translation: every atom (both masses) moves by the same amount,
// so the eigenvector is divided by sqrt(m) (derived: e_s ∝ sqrt(m_s)).
func TestShapeGammaAcoustic(t *testing.T) {
	frames := shapeFrames(t, "-m", example("diatomic-chain"), "--q", "0", "--branch", "1", "--cells", "3", "--frames", "4")
	rest := restX([]float64{0, 0.5}, 5, 3)
	for i, f := range frames {
		u0 := f.pos[0][0] - rest[0]
		for j := range f.pos {
			if u := f.pos[j][0] - rest[j]; math.Abs(u-u0) > 2e-6 {
				t.Errorf("frame %d atom %d: u = %.6f; want %.6f (rigid translation)", i, j, u, u0)
			}
		}
	}
	if u := frames[0].pos[0][0] - rest[0]; math.Abs(math.Abs(u)-0.1) > 2e-6 {
		t.Errorf("frame 1: u = %.6f; want ±0.1 (the default amplitude)", u)
	}
}

// TestShapeNewton: every frame of a mode of the diatomic chain obeys
// Newton's equation on the block with periodic ends, m_i ü_i = Σ k (u_j −
// u_i) = −m_i ω² u_i (harmonic springs; Ashcroft & Mermin ch. 22), at a q
// inside the zone where the cell phase convention matters (q = ¼: the
// other convention would shift site H by a phase of 2π·¼·½). Spring
// constants and masses are read from the model file; ω² is converted from
// THz with CODATA 2018 constants.
func TestShapeNewton(t *testing.T) {
	const (
		e    = 1.602176634e-19   // C (CODATA 2018, exact)
		mu   = 1.66053906660e-27 // kg (CODATA 2018)
		q    = 0.25
		nblk = 4 // the default block for q = ¼
	)
	c, err := client.LoadModel(example("diatomic-chain"))
	if err != nil {
		t.Fatal(err)
	}
	a := c.GetLattice()[0].GetX()
	var fracs []float64
	for _, s := range c.GetSites() {
		fracs = append(fracs, s.GetFrac()[0])
	}
	ns := len(fracs)
	rest := restX(fracs, a, nblk)
	omegaUnit := math.Sqrt(e / (1e-20 * mu)) // rad/s of 1 eV/Å²/amu
	for branch := 1; branch <= 2; branch++ {
		frames := shapeFrames(t, "-m", example("diatomic-chain"), "--q", fmt.Sprint(q), "--branch", fmt.Sprint(branch), "--frames", "5")
		var nu float64
		if _, err := fmt.Sscanf(frames[0].comment[strings.Index(frames[0].comment, "frequency"):], "frequency %g THz", &nu); err != nil {
			t.Fatalf("comment %q: %v", frames[0].comment, err)
		}
		w2 := math.Pow(2*math.Pi*nu*1e12/omegaUnit, 2) // eV/Å²/amu
		for fi, f := range frames {
			if len(f.pos) != nblk*ns {
				t.Fatalf("%d atoms; want %d", len(f.pos), nblk*ns)
			}
			u := make([]float64, len(f.pos))
			for i := range u {
				u[i] = f.pos[i][0] - rest[i]
			}
			force := make([]float64, len(u))
			for n := 0; n < nblk; n++ {
				for _, s := range c.GetSprings() {
					i := n*ns + int(s.GetFromSite())
					j := ((n+int(s.GetCell()[0]))%nblk+nblk)%nblk*ns + int(s.GetToSite())
					force[i] += s.GetKLong() * (u[j] - u[i])
					force[j] += s.GetKLong() * (u[i] - u[j])
				}
			}
			for i := range u {
				m := c.GetSites()[i%ns].GetMassAmu()
				if got, want := force[i]/m, -w2*u[i]; math.Abs(got-want) > 1e-4 {
					t.Errorf("branch %d frame %d atom %d: F/m = %.6f; −ω²u = %.6f eV/(Å·amu)", branch, fi, i, got, want)
				}
			}
		}
	}
}

// TestShapeErrors: the flags are checked before any work.
func TestShapeErrors(t *testing.T) {
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"shape", "-m", example("chain"), "--q", "0.5"}, "--xyz FILE (- for stdout) or --plot FILE.png|.svg is required"},
		{[]string{"shape", "-m", example("chain"), "--xyz", "-"}, "--q is required"},
		{[]string{"shape", "-m", example("chain"), "--xyz", "-", "--q", "0;0.5"}, "one q-point"},
		{[]string{"shape", "-m", example("chain"), "--xyz", "-", "--q", "0.5", "--branch", "2"}, "--branch must be ≤ 1"},
		{[]string{"shape", "-m", example("chain"), "--xyz", "-", "--q", "0.5", "--amplitude", "0"}, "--amplitude must be"},
		{[]string{"shape", "-m", example("chain"), "--xyz", "-", "--q", "0.5", "--frames", "0"}, "--frames must be"},
		{[]string{"shape", "-m", example("chain"), "--xyz", "-", "--q", "0.5", "--cells", "2x2"}, "--cells"},
	} {
		code, _, stderr := runCLI(t, tc.args...)
		if code != exitUsage || !strings.Contains(stderr, tc.want) {
			t.Errorf("%v: exit %d, stderr %q; want exit %d with %q", tc.args, code, stderr, exitUsage, tc.want)
		}
	}
	// A file is written when asked.
	file := filepath.Join(t.TempDir(), "mode.xyz")
	if code, _, stderr := runCLI(t, "shape", "-m", example("fcc"), "--q", "0.5,0,0.5", "--branch", "3", "--frames", "2", "--xyz", file); code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
}
