package deploy

import (
	"context"
	"testing"

	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// BenchmarkReplicaPerCore measures what one core of modegridd serves: the
// daemon (built as the Dockerfile builds it) runs with GOMAXPROCS=1 and one
// computation slot, with its result cache off so every call computes; the
// client calls it sequentially over loopback gRPC. 1e9 / (ns/op) is the
// request rate one core sustains for that request; the capacity table of
// OPERATIONS.md comes from this benchmark. The "cached" cases turn the
// cache on and repeat one request, which measures a cache hit. rss-MB is
// the server's resident memory after the case.
//
//	go test -run '^$' -bench ReplicaPerCore -benchtime 2s ./deploy/
func BenchmarkReplicaPerCore(b *testing.B) {
	fcc, rocksalt := example(b, "fcc"), example(b, "rocksalt-like")
	path := func(c *modegridv1.Crystal, points uint32) *modegridv1.ComputeDispersionRequest {
		return &modegridv1.ComputeDispersionRequest{Model: client.Inline(c), Points: points, Path: []*modegridv1.PathPoint{
			{Label: "G", Q: &modegridv1.QPoint{}}, {Label: "X", Q: &modegridv1.QPoint{Q1: 0.5, Q3: 0.5}},
			{Label: "L", Q: &modegridv1.QPoint{Q1: 0.5, Q2: 0.5, Q3: 0.5}}, {Label: "G", Q: &modegridv1.QPoint{}},
		}}
	}
	dos := func(c *modegridv1.Crystal, n uint32) *modegridv1.ComputeDosRequest {
		return &modegridv1.ComputeDosRequest{Model: client.Inline(c), Qpoints: mesh(c, n)}
	}
	thermal := func(c *modegridv1.Crystal, n uint32) *modegridv1.ComputeThermalRequest {
		return &modegridv1.ComputeThermalRequest{Model: client.Inline(c), Qpoints: mesh(c, n),
			Range: &modegridv1.TemperatureRange{StartK: 0, StopK: 1000, StepK: 10}}
	}
	modes := func(c *modegridv1.Crystal, n uint32) *modegridv1.ComputeModesRequest {
		return &modegridv1.ComputeModesRequest{Model: client.Inline(c), Qpoints: mesh(c, n)}
	}
	type bcase struct {
		name   string
		cached bool
		do     func(ctx context.Context, c *client.Client) (proto.Message, error)
	}
	cases := []bcase{
		{name: "check/fcc", do: func(ctx context.Context, c *client.Client) (proto.Message, error) {
			return c.Check(ctx, &modegridv1.CheckModelRequest{Model: client.Inline(fcc)})
		}},
		{name: "modes-grid-16/fcc", do: func(ctx context.Context, c *client.Client) (proto.Message, error) {
			return c.Modes(ctx, modes(fcc, 16))
		}},
		{name: "dispersion-201/fcc", do: func(ctx context.Context, c *client.Client) (proto.Message, error) {
			return c.Dispersion(ctx, path(fcc, 201))
		}},
		{name: "dispersion-201/rocksalt", do: func(ctx context.Context, c *client.Client) (proto.Message, error) {
			return c.Dispersion(ctx, path(rocksalt, 201))
		}},
		{name: "dos-16/fcc", do: func(ctx context.Context, c *client.Client) (proto.Message, error) { return c.DOS(ctx, dos(fcc, 16)) }},
		{name: "dos-32/fcc", do: func(ctx context.Context, c *client.Client) (proto.Message, error) { return c.DOS(ctx, dos(fcc, 32)) }},
		{name: "dos-32/rocksalt", do: func(ctx context.Context, c *client.Client) (proto.Message, error) {
			return c.DOS(ctx, dos(rocksalt, 32))
		}},
		{name: "thermal-16/fcc", do: func(ctx context.Context, c *client.Client) (proto.Message, error) {
			return c.Thermal(ctx, thermal(fcc, 16))
		}},
		{name: "dos-32/fcc/cached", cached: true, do: func(ctx context.Context, c *client.Client) (proto.Message, error) { return c.DOS(ctx, dos(fcc, 32)) }},
	}
	for _, bc := range cases {
		b.Run(bc.name, func(b *testing.B) {
			env := []string{"GOMAXPROCS=1", "MODEGRID_MAX_CONCURRENT=1"}
			if !bc.cached {
				env = append(env, "MODEGRID_CACHE_BYTES=0")
			}
			d := startDaemon(b, daemonConfig{name: "bench", env: env})
			c := dialClient(b, d.grpcAddr)
			ctx := context.Background()
			if _, err := bc.do(ctx, c); err != nil { // warm: connection, model reference
				b.Fatal(err)
			}
			b.ResetTimer()
			for b.Loop() {
				if _, err := bc.do(ctx, c); err != nil {
					b.Fatal(err)
				}
			}
			b.StopTimer()
			fams, err := d.metrics(ctx)
			if err != nil {
				b.Fatal(err)
			}
			b.ReportMetric(sumMetric(fams, "process_resident_memory_bytes", nil)/1e6, "rss-MB")
			d.kill()
		})
	}
}
