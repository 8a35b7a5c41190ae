package deploy

import (
	"context"
	"fmt"
	"math/rand/v2"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

func TestScratchFailover(t *testing.T) {
	const n, workers = 3000, 8
	ctx := testContext(t, 90*time.Second)
	models := workloadModels(t, 3)
	rng := rand.New(rand.NewPCG(8, 3000))
	var calls []call
	for range n {
		m := models[rng.IntN(len(models))]
		var req *modegridv1.ComputeModesRequest
		if rng.IntN(2) == 0 {
			req = &modegridv1.ComputeModesRequest{Model: client.Inline(m), Qpoints: mesh(m, []uint32{4, 6, 8}[rng.IntN(3)])}
		} else {
			req = &modegridv1.ComputeModesRequest{Model: client.Inline(m), Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: []*modegridv1.QPoint{qAlong(m, rng.Float64()-0.5)}}}}}
		}
		calls = append(calls, call{name: "modes", do: func(ctx context.Context, c *client.Client) (proto.Message, error) { return c.Modes(ctx, req) }})
	}
	start := time.Now()
	single := startDaemon(t, daemonConfig{name: "single"})
	want, errs := runCalls(ctx, dialClient(t, single.grpcAddr), calls, workers, 0, nil)
	for i, err := range errs {
		if err != nil {
			t.Fatalf("single %d: %v", i, err)
		}
	}
	single.kill()
	t.Logf("single: %v", time.Since(start))
	redis := startRedis(t)
	var ds []*daemon
	for i := range 3 {
		ds = append(ds, startDaemon(t, daemonConfig{name: fmt.Sprintf("replica-%d", i), redis: redis.addr}))
	}
	target, resolverOpt := replicaTarget(ds...)
	var counter attemptCounter
	cl := dialClient(t, target, client.WithDialOptions(resolverOpt, grpc.WithStatsHandler(&counter)))
	start = time.Now()
	var vh float64
	got, errs := runCalls(ctx, cl, calls, workers, n/3, func() {
		if fams, err := ds[1].metrics(ctx); err == nil {
			vh = handled(fams)
		}
		ds[1].kill()
	})
	t.Logf("replicas: %v", time.Since(start))
	failed := 0
	for i, err := range errs {
		if err != nil {
			failed++
			if failed < 5 {
				t.Errorf("call %d: %v", i, err)
			}
		}
	}
	differ := 0
	for i := range calls {
		if !proto.Equal(got[i], want[i]) {
			differ++
		}
	}
	t.Logf("failed %d differ %d attempts %d failedAttempts %d victim %v", failed, differ, counter.attempts.Load(), counter.failed.Load(), vh)
}
