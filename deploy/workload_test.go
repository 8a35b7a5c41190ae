package deploy

import (
	"context"
	"fmt"
	"math/rand/v2"
	"testing"

	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/client"
	"github.com/materials-lab/modegrid/proto/examples"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// dialClient returns a client of the Go client library for target, closed
// at test cleanup.
func dialClient(t testing.TB, target string, opts ...client.Option) *client.Client {
	t.Helper()
	c, err := client.Dial(target, opts...)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

// example loads a built-in example crystal.
func example(t testing.TB, name string) *modegridv1.Crystal {
	t.Helper()
	c, err := examples.Load(name)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// modesRequest asks for the modes of an example crystal at q-points along
// the first reciprocal axis (valid for any dimensionality).
func modesRequest(t testing.TB, name string, q1 []float64) *modegridv1.ComputeModesRequest {
	t.Helper()
	var pts []*modegridv1.QPoint
	for _, q := range q1 {
		pts = append(pts, &modegridv1.QPoint{Q1: q})
	}
	return &modegridv1.ComputeModesRequest{
		Model:   client.Inline(example(t, name)),
		Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: pts}}},
	}
}

// call is one request of a workload: what it asks (for messages) and how to
// send it with the Go client.
type call struct {
	name string
	do   func(ctx context.Context, c *client.Client) (proto.Message, error)
}

// workloadModels are the distinct models of the workloads: every example
// crystal, each also with its spring constants scaled (so the set has
// distinct model hashes, as several research groups' models would).
func workloadModels(t testing.TB, variants int) []*modegridv1.Crystal {
	t.Helper()
	var models []*modegridv1.Crystal
	for _, name := range examples.Names() {
		base := example(t, name)
		for v := range variants {
			c := proto.Clone(base).(*modegridv1.Crystal)
			f := 1 + 0.1*float64(v) // invented scale factors
			for _, s := range c.GetSprings() {
				s.KLong *= f
				s.KTrans *= f
			}
			for _, s := range c.GetShells() {
				s.KLong *= f
				s.KTrans *= f
			}
			for _, b := range c.GetBlocks() {
				for i := range b.Phi {
					b.Phi[i] *= f
				}
			}
			c.Name = fmt.Sprintf("%s-x%.1f", name, f)
			models = append(models, c)
		}
	}
	return models
}

func dim(c *modegridv1.Crystal) int { return len(c.GetLattice()) }

// mesh is an n×…×n grid in the crystal's dimensions.
func mesh(c *modegridv1.Crystal, n uint32) *modegridv1.QPointSet {
	m := make([]uint32, dim(c))
	for i := range m {
		m[i] = n
	}
	return &modegridv1.QPointSet{Set: &modegridv1.QPointSet_Grid{Grid: &modegridv1.MonkhorstPackGrid{Mesh: m}}}
}

// qAlong is the q-point x·(1,1,1) cut to the crystal's dimensions.
func qAlong(c *modegridv1.Crystal, x float64) *modegridv1.QPoint {
	q := &modegridv1.QPoint{Q1: x}
	if dim(c) > 1 {
		q.Q2 = x
	}
	if dim(c) > 2 {
		q.Q3 = x
	}
	return q
}

// mixedWorkload returns n requests drawn with rng over models: modes at
// random q-points (never repeated, so always computed), and modes on grids,
// dispersions, densities of states, thermal properties and model checks
// with a few repeated parameter sets (so a cache can answer repeats).
func mixedWorkload(rng *rand.Rand, models []*modegridv1.Crystal, n int) []call {
	calls := make([]call, 0, n)
	for len(calls) < n {
		m := models[rng.IntN(len(models))]
		src := client.Inline(m)
		meshN := []uint32{4, 6, 8}[rng.IntN(3)]
		switch k := rng.IntN(100); {
		case k < 30:
			var pts []*modegridv1.QPoint
			for range 1 + rng.IntN(4) {
				pts = append(pts, qAlong(m, rng.Float64()-0.5))
			}
			req := &modegridv1.ComputeModesRequest{Model: src, Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: pts}}}}
			calls = append(calls, call{name: "modes list " + m.Name, do: func(ctx context.Context, c *client.Client) (proto.Message, error) { return c.Modes(ctx, req) }})
		case k < 50:
			req := &modegridv1.ComputeModesRequest{Model: src, Qpoints: mesh(m, meshN)}
			calls = append(calls, call{name: fmt.Sprintf("modes grid %d %s", meshN, m.Name), do: func(ctx context.Context, c *client.Client) (proto.Message, error) { return c.Modes(ctx, req) }})
		case k < 65:
			req := &modegridv1.ComputeDispersionRequest{Model: src, Points: []uint32{21, 51}[rng.IntN(2)], Path: []*modegridv1.PathPoint{
				{Label: "G", Q: qAlong(m, 0)}, {Label: "A", Q: qAlong(m, 0.5)}, {Label: "B", Q: &modegridv1.QPoint{Q1: 0.25}},
			}}
			calls = append(calls, call{name: "dispersion " + m.Name, do: func(ctx context.Context, c *client.Client) (proto.Message, error) { return c.Dispersion(ctx, req) }})
		case k < 80:
			req := &modegridv1.ComputeDosRequest{Model: src, Qpoints: mesh(m, meshN)}
			calls = append(calls, call{name: fmt.Sprintf("dos %d %s", meshN, m.Name), do: func(ctx context.Context, c *client.Client) (proto.Message, error) { return c.DOS(ctx, req) }})
		case k < 95:
			req := &modegridv1.ComputeThermalRequest{Model: src, Qpoints: mesh(m, meshN), Range: &modegridv1.TemperatureRange{StartK: 0, StopK: 500, StepK: 50}, AllowUnstable: true}
			calls = append(calls, call{name: fmt.Sprintf("thermal %d %s", meshN, m.Name), do: func(ctx context.Context, c *client.Client) (proto.Message, error) { return c.Thermal(ctx, req) }})
		default:
			req := &modegridv1.CheckModelRequest{Model: src}
			calls = append(calls, call{name: "check " + m.Name, do: func(ctx context.Context, c *client.Client) (proto.Message, error) { return c.Check(ctx, req) }})
		}
	}
	return calls
}
