package server

import (
	"math"
	"strings"
	"testing"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// longChainSet is a monatomic chain (a = 2.5 Å, 40 amu, springs K = 1
// eV/Å² between neighbours) given as a supercell set of cells primitive
// cells, with one row (primitive_atoms): Φ_xx(0,0) = 2K, Φ_xx(0,±1) = −K.
func longChainSet(cells int) *modegridv1.Crystal {
	fc := &modegridv1.SupercellForceConstants{Matrix: []int32{int32(cells)}, PrimitiveAtoms: []uint32{0}}
	for i := range cells {
		fc.Atoms = append(fc.Atoms, &modegridv1.SupercellAtom{Position: []float64{2.5 * float64(i), 0, 0}})
		blk := make([]float64, 9)
		switch i {
		case 0:
			blk[0] = 2
		case 1, cells - 1:
			blk[0] = -1
		}
		fc.Phi = append(fc.Phi, blk...)
	}
	return &modegridv1.Crystal{
		Lattice:       []*modegridv1.Vec3{{X: 2.5}},
		Polarizations: 1,
		Sites:         []*modegridv1.Site{{Label: "A", MassAmu: 40, Frac: []float64{0}}},
		SupercellFc:   fc,
	}
}

// TestSupercellLimitsOverGRPC: a chain given as a supercell set of 256
// cells folds pairs onto images up to 128 cells away, past the ±64 limit
// of a model's cell offsets. Over gRPC, CheckModel reports it as one
// violation of supercell_fc.matrix naming the offset and the limit (before,
// 64 violations of blocks[65…128].cell[0], blocks the caller never gave),
// and a computation refuses it as INVALID_ARGUMENT naming
// model.crystal.supercell_fc.matrix together with a bad element of phi,
// all at once. The 128-cell set (reach 64) is valid, and its highest
// frequency is the chain's zone-boundary one, 2·sqrt(K/M)·15.6333 THz =
// 4.94365 THz for K = 1 eV/Å², M = 40 amu (Kittel, ch. 4; the factor is
// sqrt(eV/(Å²·amu))/2π in THz).
func TestSupercellLimitsOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	r, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: inline(longChainSet(256))})
	if err != nil {
		t.Fatal(err)
	}
	if v := r.GetViolations(); r.GetValid() || len(v) != 1 || v[0].GetField() != "supercell_fc.matrix" ||
		!strings.Contains(v[0].GetDescription(), "128 cells away") || !strings.Contains(v[0].GetDescription(), "±64 limit") {
		t.Errorf("valid=%v, violations %v; want one of supercell_fc.matrix naming 128 cells and the ±64 limit", r.GetValid(), v)
	}

	bad := longChainSet(256)
	bad.SupercellFc.Phi[9] = 1e-300
	_, err = collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: inline(bad), Qpoints: qlist(0.5)})
	fields := badFields(t, err)
	for f := range fields {
		if strings.Contains(f, "blocks") {
			t.Errorf("violation of %s: a field the caller never gave", f)
		}
	}
	if fields["model.crystal.supercell_fc.matrix"] == "" || fields["model.crystal.supercell_fc.phi[9]"] == "" {
		t.Errorf("violations %v; want model.crystal.supercell_fc.matrix and .phi[9]", fields)
	}

	r, err = ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: inline(longChainSet(128))})
	if err != nil || !r.GetValid() {
		t.Fatalf("128 cells: %v, %v; want valid", r, err)
	}
	const want = 2 * 0.15811388300841897 * 15.6333042 // 2·sqrt(1/40)·15.6333042 THz
	if got := r.GetMaxFrequencyThz(); math.Abs(got-want) > 1e-6*want {
		t.Errorf("128 cells: highest frequency %.9g THz; want %.9g", got, want)
	}
}
