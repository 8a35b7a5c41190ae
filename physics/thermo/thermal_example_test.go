package thermo_test

import (
	"context"
	"fmt"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/thermo"
)

// Heat capacity and entropy of a chain per mole of cells, and its Debye
// temperatures. The zero-point energy is hν_max/π per cell (⟨ν⟩ = 2ν_max/π
// for the chain), the elastic θ_D is (π/2)hν_max/k, and Cv approaches
// R = 8.314 J/(mol·K) as T passes hν_max/k = 291 K. At T = 0, θ_D(T) is
// only defined as its limit, the elastic θ_D; a reader checks ThetaDStatus
// before using ThetaDK.
func ExampleComputeThermal() {
	ctx := context.Background()
	m, g := testmodels.ChainModes(ctx, 1000) // a = 2.5 Å, M = 40 amu, K = 1.5 eV/Å²; 1000 points
	r, err := thermo.ComputeThermal(ctx, m, g, thermo.ThermalOptions{TempsK: []float64{0, 50, 300}})
	if err != nil {
		panic(err)
	}
	fmt.Printf("zero-point energy %.4f kJ/mol, elastic θ_D %.1f K\n", physics.EVToKJPerMol(r.ZPEeV), r.ThetaElasticK)
	for _, p := range r.Points {
		fmt.Printf("%3.0f K: Cv = %.3f J/(mol·K), S = %.3f J/(mol·K), θ_D = %.1f K (%v)\n",
			p.TempK, physics.EVPerKToJPerMolK(p.CveVPerK), physics.EVPerKToJPerMolK(p.SeVPerK), p.ThetaDK, p.ThetaDStatus)
	}
	// Output:
	// zero-point energy 0.7690 kJ/mol, elastic θ_D 456.4 K
	//   0 K: Cv = 0.000 J/(mol·K), S = 0.000 J/(mol·K), θ_D = 456.4 K (elastic-limit)
	//  50 K: Cv = 3.412 J/(mol·K), S = 3.094 J/(mol·K), θ_D = 396.9 K (determined)
	// 300 K: Cv = 7.992 J/(mol·K), S = 14.431 J/(mol·K), θ_D = 357.3 K (determined)
}
