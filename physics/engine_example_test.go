// Examples of the engine's main calls (run as tests: their output is
// checked).

package physics_test

import (
	"context"
	"fmt"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// The zone-boundary frequency of the chain is 2 sqrt(K/M)·15.6333042 THz
// = 6.05477 THz (Kittel ch. 4), its speed of sound a sqrt(K/M)·9.82269
// km/s = 4.75537 km/s; along Γ–X, ν = 6.05477 sin(πq) THz.
func ExampleCompile() {
	m, err := physics.Compile(context.Background(), testmodels.Chain(), physics.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%s, %d mode(s) per q\n", m.LatticeType(), m.ModeCount())
	fmt.Printf("ν(X) = %.4f THz\n", m.FrequenciesTHz(m.StandardPoints()["X"])[0])
	c, err := m.SoundVelocities(context.Background(), [3]float64{1, 0, 0})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("c = %.4f km/s\n", c[0])
	// Output:
	// 1d, 1 mode(s) per q
	// ν(X) = 6.0548 THz
	// c = 4.7554 km/s
}

// Validation reports every problem at once, each with its field.
func ExampleValidate() {
	c := testmodels.Chain()
	c.Sites[0].MassAmu = -40
	c.Springs[0].To = 3
	err := physics.Validate(c, physics.Limits{})
	for _, v := range err.(*physics.ValidationError).Violations {
		fmt.Println(v)
	}
	// Output:
	// sites[0].mass_amu: must be > 0, got -40
	// springs[0].to_site: site index 3 out of range [0, 1)
}

// A path through built-in labels, five samples shared by length.
func ExampleModel_Dispersion() {
	m, _ := physics.Compile(context.Background(), testmodels.Chain(), physics.Options{})
	s, err := m.Dispersion(context.Background(), []physics.PathCorner{{Label: "G"}, {Label: "X"}}, physics.PathOptions{Points: 5})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, x := range s {
		fmt.Printf("%.4f Å⁻¹ %-2s %.4f THz\n", x.DistanceInvA, x.Label, x.FreqTHz[0])
	}
	// Output:
	// 0.0000 Å⁻¹ G  0.0000 THz
	// 0.3142 Å⁻¹    2.3171 THz
	// 0.6283 Å⁻¹    4.2814 THz
	// 0.9425 Å⁻¹    5.5939 THz
	// 1.2566 Å⁻¹ X  6.0548 THz
}

// The hash is that of the physics: the same chain in N/m hashes alike.
func ExampleModel_Hash() {
	a, _ := physics.Compile(context.Background(), testmodels.Chain(), physics.Options{})
	c := testmodels.Chain()
	c.ForceUnit = physics.NPerM
	c.Springs[0].KLong = 1.5 * 16.02176634
	b, _ := physics.Compile(context.Background(), c, physics.Options{})
	fmt.Println(len(a.Hash()), a.Hash() == b.Hash())
	// Output: 64 true
}
