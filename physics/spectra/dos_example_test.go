package spectra_test

import (
	"context"
	"fmt"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// The density of states of a chain by linear segments, in meV: ν_max =
// 25.04 meV, and N(ν) follows (2/π) arcsin(ν/ν_max) (Ashcroft & Mermin
// ch. 23), e.g. 0.1280 at 5 meV; g is the bin average over ±2.5 meV.
func ExampleComputeDOS() {
	ctx := context.Background()
	m, g := testmodels.ChainModes(ctx, 1000) // a = 2.5 Å, M = 40 amu, K = 1.5 eV/Å²; 1000 points
	d, err := spectra.ComputeDOS(ctx, m, g, spectra.DOSOptions{Unit: physics.MeV, Max: 25, Step: 5})
	if err != nil {
		panic(err)
	}
	for i, f := range d.Freq {
		fmt.Printf("%4.1f meV  g = %.4f /meV  N = %.4f\n", f, d.DOS[i], d.Integrated[i])
	}
	// Output:
	//  0.0 meV  g = 0.0127 /meV  N = 0.0000
	//  5.0 meV  g = 0.0260 /meV  N = 0.1280
	// 10.0 meV  g = 0.0278 /meV  N = 0.2615
	// 15.0 meV  g = 0.0320 /meV  N = 0.4089
	// 20.0 meV  g = 0.0436 /meV  N = 0.5890
	// 25.0 meV  g = 0.0578 /meV  N = 0.9638
}
