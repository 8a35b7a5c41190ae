package scatter

import (
	"context"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
)

// BenchmarkPowderMap200 is a 200×200 powder map (|Q| 0.1…10 Å⁻¹, E 0…60
// meV) of the two-site rock-salt-like example at 300 K with the default
// quadrature tolerance, Debye–Waller factors included (24³ and 12³
// grids) and the incoherent term of its site Q (σ_inc = 2 barn, its DOS on
// the 24³ grid): the figure DEVELOPERS.md quotes.
func BenchmarkPowderMap200(b *testing.B) {
	m := testmodels.Compile(b, testmodels.Load(b, "rocksalt-like"))
	sites := sitesOf(m, 3.0, 6.0)
	sites[1].IncoherentBarn = 2
	opt := Options{Sites: sites, TempK: 300, Axis: Axis{Min: 0, Max: 59.7, Step: 0.3, Unit: physics.MeV}, Resolution: Resolution{FWHM: []float64{1.0}}}
	po := PowderOptions{QMinInvA: 0.1, QMaxInvA: 10, NQ: 200}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		r, err := ComputePowder(context.Background(), m, po, opt)
		if err != nil {
			b.Fatal(err)
		}
		if i == 0 {
			dirs, worst := 0, 0
			for _, d := range r.Directions {
				dirs += d
				worst = max(worst, d)
			}
			b.Logf("rows %d × energies %d; directions per row: mean %d, max %d; unconverged rows %d", len(r.S), len(r.Energies), dirs/len(r.S), worst, r.Unconverged)
		}
	}
}
