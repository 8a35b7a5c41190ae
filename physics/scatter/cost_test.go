package scatter

import (
	"context"
	"fmt"
	"testing"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/testmodels"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// TestScatterCostLadder holds every scattering estimator to the measured
// allocation of the real computation, as thermo's TestCostLadder does for
// the grid, DOS, thermal and stream estimators: over the models of 1, 2
// and 8 sites, single-crystal maps (Q points, energies, Debye–Waller off,
// plain or extrapolated), powder maps (rows, directions, with and without
// the incoherent term; every row forced to its direction cap by a
// tolerance it cannot meet, the case the estimate assumes) and weighted
// DOS, the estimate must never be below the measurement nor more than
// twice it. The table is logged (go test -v).
func TestScatterCostLadder(t *testing.T) {
	ctx := context.Background()
	type rung struct {
		name string
		est  func() int64
		run  func()
	}
	var rungs []rung
	for _, l := range testmodels.Ladder(t) {
		if l.Sites > 8 {
			continue // the 8-site rungs already reach the per-point terms
		}
		m := l.M
		sites := make([]SiteScatterer, m.Sites())
		for i := range sites {
			sites[i] = SiteScatterer{CoherentFm: 3 + float64(i%2), IncoherentBarn: 1}
		}
		size := m.GridSizeOf(mesh.GridSpec{Mesh: [3]int{1, 1, 1}}, 1)
		for _, dw := range []DWOptions{{Off: true}, {Mesh: [3]int{4, 4, 4}}, {Mesh: [3]int{5, 5, 5}}} {
			tempK := 300.0
			dwSizes := DWSizes(m, dw, tempK)
			for _, sc := range []struct{ q, e int }{{10, 201}, {200, 201}, {50, 2001}} {
				qs := make([]QSample, sc.q)
				for i := range qs {
					qs[i].Q = [3]float64{0.1 + 0.013*float64(i), 0.2, -0.3}
				}
				opt := Options{Sites: sites, TempK: tempK, DebyeWaller: dw, Axis: Axis{Min: -20, Max: 60, Step: 80 / float64(sc.e-1), Unit: physics.MeV}}
				rungs = append(rungs, rung{
					name: fmt.Sprintf("%d sites single %d Q × %d E, Debye–Waller %s", l.Sites, sc.q, sc.e, dwName(dw)),
					est:  func() int64 { return SingleCost(size, dwSizes, sc.q, sc.e).Bytes },
					run: func() {
						if _, err := ComputeSingle(ctx, m, qs, opt); err != nil {
							t.Fatal(err)
						}
					},
				})
			}
			if dw.Off {
				continue
			}
			order, err := PowderGroupOrder(ctx, m, sites)
			if err != nil {
				t.Fatal(err)
			}
			for _, pc := range []struct {
				rows, e, dirs int
				coherentOnly  bool
				qRes          bool
			}{{3, 201, 256, true, false}, {3, 201, 256, false, false}, {20, 101, 1024, false, true}} {
				po := PowderOptions{QMinInvA: 0.5, QMaxInvA: 6, NQ: pc.rows, Tolerance: 1e-12, MaxDirections: pc.dirs, CoherentOnly: pc.coherentOnly}
				opt := Options{Sites: sites, TempK: tempK, DebyeWaller: dw, Axis: Axis{Min: -20, Max: 60, Step: 80 / float64(pc.e-1), Unit: physics.MeV}}
				if pc.qRes {
					opt.Resolution.QFWHM = 0.3
				}
				rungs = append(rungs, rung{
					name: fmt.Sprintf("%d sites powder %d rows × %d E, %d directions, incoherent %v, |Q| FWHM %v, Debye–Waller %s", l.Sites, pc.rows, pc.e, pc.dirs, !pc.coherentOnly, pc.qRes, dwName(dw)),
					est: func() int64 {
						c := PowderCost(size, dwSizes, PowderSize{Rows: pc.rows, E: pc.e, MaxDirections: pc.dirs, GroupOrder: order, QResolution: pc.qRes})
						if g, ok := IncoherentSize(m, dw, Neutron, pc.coherentOnly); ok {
							c = c.Plus(IncoherentCost(g, pc.rows, pc.e, IncoherentBins(opt.Axis, opt.Resolution)))
						}
						return c.Bytes
					},
					run: func() {
						if _, err := ComputePowder(ctx, m, po, opt); err != nil {
							t.Fatal(err)
						}
					},
				})
			}
		}
		for _, n := range []int{4, 8} {
			spec := mesh.GridSpec{Mesh: [3]int{n, n, n}}
			opt := Options{Sites: sites, Axis: Axis{Unit: physics.MeV}}
			rungs = append(rungs, rung{
				name: fmt.Sprintf("%d sites weighted DOS %d³, %d E", l.Sites, n, DefaultAxisSamples),
				est:  func() int64 { return WeightedDOSCost(m.GridSizeOf(spec, 0), true, DefaultAxisSamples).Bytes },
				run: func() {
					if _, err := ComputeWeightedDOS(ctx, m, spec, opt); err != nil {
						t.Fatal(err)
					}
				},
			})
		}
	}
	t.Logf("| request | estimate | measured | ratio |")
	t.Logf("|---|---|---|---|")
	for _, r := range rungs {
		got := testmodels.MeasureAlloc(t, r.run)
		est := r.est()
		ratio := float64(est) / float64(got)
		t.Logf("| %s | %d | %d | %.2f |", r.name, est, got, ratio)
		if est < got || ratio > 2 {
			t.Errorf("%s: estimate %d B, measured %d B (ratio %.2f, want 1…2)", r.name, est, got, ratio)
		}
	}
}

func dwName(o DWOptions) string {
	if o.Off {
		return "off"
	}
	return fmt.Sprintf("%d³", o.Mesh[0])
}
