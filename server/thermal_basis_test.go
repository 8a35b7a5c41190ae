package server

import (
	"math"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// TestThermalBases: over real gRPC, the per-atom-mole heat capacity of the
// fcc (1 site) and rocksalt-like (2 sites) examples at 5000 K reads the
// classical 3R, R = 8.314462618 J/(mol·K) (CODATA 2018, k_B·N_A, exact);
// the per-cell-mole value is 3R times the sites; and every per-kilogram
// value is the per-cell-mole value over the molar mass of a cell, Σ m_s ×
// M_u with M_u = 0.99999999965e-3 kg/mol (CODATA 2018).
//
// Tolerance of the classical limit (derived): a mode of frequency ν
// contributes k_B(1 − x²/12 + O(x⁴)), x = hν/k_BT (expanding the Einstein
// heat capacity x²eˣ/(eˣ−1)²); both crystals' highest modes are below
// 7.1 THz, so x < 7.1·47.99/5000 = 0.068 and the shortfall is below
// 0.068²/12 = 3.9e-4 of 3R. On an N³ grid the three rigid translations at
// Γ (zero modes, left out of the sums) hold no heat, so the limit itself is
// 3R·(1 − 1/(sites·N³)) per mole of atoms.
func TestThermalBases(t *testing.T) {
	const (
		rCODATA = 8.314462618      // J/(mol·K)
		muKgMol = 0.99999999965e-3 // M_u, kg/mol
	)
	const n = 8 // grid divisions
	ts := startServer(t, Config{})
	ctx := testContext(t)
	for _, tc := range []struct {
		name  string
		sites int
	}{{"fcc", 1}, {"rocksalt-like", 2}} {
		t.Run(tc.name, func(t *testing.T) {
			c := example(t, tc.name)
			mass := 0.0
			for _, s := range c.GetSites() {
				mass += s.GetMassAmu()
			}
			r, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: inline(c), Qpoints: mpGrid(false, n, n, n),
				TemperaturesK: []float64{300, 5000}})
			if err != nil {
				t.Fatal(err)
			}
			if r.GetAtomsPerCell() != uint32(tc.sites) || r.GetCellMassAmu() != mass {
				t.Errorf("atoms per cell %d, cell mass %v amu; want %d, %v", r.GetAtomsPerCell(), r.GetCellMassAmu(), tc.sites, mass)
			}
			hot := r.GetPoints()[1]
			limit := 3 * rCODATA * (1 - 1/float64(tc.sites*n*n*n))
			if got := hot.GetHeatCapacityJPerMolAtomsK(); got/limit-1 < -3.9e-4 || got > limit*(1+1e-12) {
				t.Errorf("Cv at 5000 K = %.6f J/(K·mol atoms); want 3R(1 − 1/(%d·%d³)) = %.6f within 3.9e-4 below", got, tc.sites, n, limit)
			}
			if got := hot.GetHeatCapacityJPerMolK(); got/(limit*float64(tc.sites))-1 < -3.9e-4 || got > limit*float64(tc.sites)*(1+1e-12) {
				t.Errorf("Cv at 5000 K = %.6f J/(K·mol cells); want %d times the per-atom limit", got, tc.sites)
			}
			molarKg := mass * muKgMol
			same := func(what string, got, want float64) {
				t.Helper()
				if math.Abs(got-want) > 1e-9*math.Abs(want) {
					t.Errorf("%s = %.12g; want %.12g", what, got, want)
				}
			}
			for _, p := range r.GetPoints() {
				n := float64(tc.sites)
				same("Cv per mol atoms", p.GetHeatCapacityJPerMolAtomsK(), p.GetHeatCapacityJPerMolK()/n)
				same("S per mol atoms", p.GetEntropyJPerMolAtomsK(), p.GetEntropyJPerMolK()/n)
				same("F per mol atoms", p.GetFreeEnergyKjPerMolAtoms(), p.GetFreeEnergyKjPerMol()/n)
				same("U per mol atoms", p.GetInternalEnergyKjPerMolAtoms(), p.GetInternalEnergyKjPerMol()/n)
				same("Cv per kg", p.GetHeatCapacityJPerKgK(), p.GetHeatCapacityJPerMolK()/molarKg)
				same("S per kg", p.GetEntropyJPerKgK(), p.GetEntropyJPerMolK()/molarKg)
				same("F per kg", p.GetFreeEnergyKjPerKg(), p.GetFreeEnergyKjPerMol()/molarKg)
				same("U per kg", p.GetInternalEnergyKjPerKg(), p.GetInternalEnergyKjPerMol()/molarKg)
			}
			same("zero-point per mol atoms", r.GetZeroPointEnergyKjPerMolAtoms(), r.GetZeroPointEnergyKjPerMol()/float64(tc.sites))
			same("zero-point per kg", r.GetZeroPointEnergyKjPerKg(), r.GetZeroPointEnergyKjPerMol()/molarKg)
		})
	}
	// The constant the conversion uses is CODATA 2018's M_u.
	if math.Abs(physics.MolarMassConstantKgPerMol/muKgMol-1) > 1e-10 {
		t.Errorf("M_u = %v kg/mol; want %v", physics.MolarMassConstantKgPerMol, muKgMol)
	}
}
