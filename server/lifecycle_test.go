package server

import (
	"context"
	"errors"
	"io"
	"net"
	"net/http"
	"strings"
	"sync"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	reflectionpb "google.golang.org/grpc/reflection/grpc_reflection_v1"
	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// onceBlocker holds the first computation of kind until released (or
// cancelled); later ones pass.
type onceBlocker struct {
	kind    string
	once    sync.Once
	entered chan struct{}
	release chan struct{}
}

func newOnceBlocker(kind string) *onceBlocker {
	return &onceBlocker{kind: kind, entered: make(chan struct{}), release: make(chan struct{})}
}

func (b *onceBlocker) hook(ctx context.Context, kind string) {
	if kind != b.kind {
		return
	}
	first := false
	b.once.Do(func() { first = true })
	if !first {
		return
	}
	close(b.entered)
	select {
	case <-b.release:
	case <-ctx.Done():
	}
}

// TestGracefulShutdown: on Shutdown, health goes NOT_SERVING, new calls are
// refused, and the call in flight finishes with its full answer.
func TestGracefulShutdown(t *testing.T) {
	b := newOnceBlocker(kindModes)
	ts := startServer(t, Config{}, serverOpts{hook: b.hook})
	ctx := testContext(t)

	wctx, stopWatch := context.WithCancel(ctx)
	defer stopWatch()
	watch, err := healthpb.NewHealthClient(ts.conn).Watch(wctx, &healthpb.HealthCheckRequest{Service: modegridv1.ModegridService_ServiceDesc.ServiceName})
	if err != nil {
		t.Fatal(err)
	}
	if r, err := watch.Recv(); err != nil || r.GetStatus() != healthpb.HealthCheckResponse_SERVING {
		t.Fatalf("health before shutdown: %v, %v; want SERVING", r.GetStatus(), err)
	}

	inflight := make(chan error, 1)
	var got []*modegridv1.ComputeModesResponse
	go func() {
		var err error
		got, err = collectModes(ctx, ts.api, modesReq(t))
		inflight <- err
	}()
	<-b.entered

	shut := make(chan error, 1)
	go func() {
		sctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
		defer cancel()
		shut <- ts.srv.Shutdown(sctx)
	}()
	if r, err := watch.Recv(); err != nil || r.GetStatus() != healthpb.HealthCheckResponse_NOT_SERVING {
		t.Fatalf("health during shutdown: %v, %v; want NOT_SERVING", r.GetStatus(), err)
	}
	stopWatch() // a watch is a call in flight too

	// New calls are refused once the server stops accepting them.
	waitFor(t, "a new call to be refused", func() bool {
		_, err := collectModes(ctx, ts.api, modesReq(t))
		return status.Code(err) == codes.Unavailable
	})

	close(b.release)
	if err := <-inflight; err != nil {
		t.Fatalf("call in flight: %v; want it to finish", err)
	}
	if n := len(allPoints(got)); n != 2 {
		t.Errorf("call in flight got %d points; want 2", n)
	}
	if err := <-shut; err != nil {
		t.Errorf("Shutdown: %v; want nil", err)
	}
}

// TestForcedStopAfterGrace: calls still running when the grace period ends
// are cut off, their computations cancelled.
func TestForcedStopAfterGrace(t *testing.T) {
	b := newOnceBlocker(kindModes) // never released
	ts := startServer(t, Config{}, serverOpts{hook: b.hook})
	inflight := make(chan error, 1)
	go func() {
		_, err := collectModes(testContext(t), ts.api, modesReq(t))
		inflight <- err
	}()
	<-b.entered
	sctx, cancel := context.WithTimeout(context.Background(), 100*time.Millisecond)
	defer cancel()
	if err := ts.srv.Shutdown(sctx); !errors.Is(err, context.DeadlineExceeded) {
		t.Errorf("Shutdown: %v; want DeadlineExceeded", err)
	}
	if err := <-inflight; status.Code(err) != codes.Unavailable && status.Code(err) != codes.Canceled {
		t.Errorf("cut-off call: %v; want Unavailable or Canceled", err)
	}
	waitFor(t, "the cancellation counter", func() bool {
		return metric(t, ts.srv.Registry(), "modegrid_computations_canceled_total", map[string]string{"kind": kindModes}) == 1
	})
}

// TestHealthFollowsReadiness: NOT_SERVING until Serve, SERVING while
// serving.
func TestHealthFollowsReadiness(t *testing.T) {
	srv, err := New(Config{})
	if err != nil {
		t.Fatal(err)
	}
	ctx := testContext(t)
	for _, svc := range []string{"", modegridv1.ModegridService_ServiceDesc.ServiceName} {
		r, err := srv.health.Check(ctx, &healthpb.HealthCheckRequest{Service: svc})
		if err != nil || r.GetStatus() != healthpb.HealthCheckResponse_NOT_SERVING {
			t.Errorf("before Serve, service %q: %v, %v; want NOT_SERVING", svc, r.GetStatus(), err)
		}
	}
	if err := srv.Shutdown(ctx); err != nil {
		t.Fatal(err)
	}
	ts := startServer(t, Config{})
	r, err := healthpb.NewHealthClient(ts.conn).Check(ctx, &healthpb.HealthCheckRequest{Service: modegridv1.ModegridService_ServiceDesc.ServiceName})
	if err != nil || r.GetStatus() != healthpb.HealthCheckResponse_SERVING {
		t.Errorf("while serving: %v, %v; want SERVING", r.GetStatus(), err)
	}
}

func TestReflection(t *testing.T) {
	tests := []struct {
		name    string
		disable bool
		want    codes.Code
	}{
		{name: "on by default", want: codes.OK},
		{name: "off", disable: true, want: codes.Unimplemented},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ts := startServer(t, Config{DisableReflection: tt.disable})
			stream, err := reflectionpb.NewServerReflectionClient(ts.conn).ServerReflectionInfo(testContext(t))
			if err != nil {
				t.Fatal(err)
			}
			// Send reports io.EOF when the server already ended the stream;
			// Recv then says why.
			if err := stream.Send(&reflectionpb.ServerReflectionRequest{MessageRequest: &reflectionpb.ServerReflectionRequest_ListServices{}}); err != nil && !errors.Is(err, io.EOF) {
				t.Fatal(err)
			}
			resp, err := stream.Recv()
			if status.Code(err) != tt.want {
				t.Fatalf("got %v; want %v", err, tt.want)
			}
			stream.CloseSend()
			if err != nil {
				return
			}
			var names []string
			for _, s := range resp.GetListServicesResponse().GetService() {
				names = append(names, s.GetName())
			}
			if !strings.Contains(strings.Join(names, " "), "modegrid.v1.ModegridService") {
				t.Errorf("reflection lists %v; want modegrid.v1.ModegridService", names)
			}
		})
	}
}

// TestRun: Run listens on both ports, serves gRPC and /metrics, and
// returns nil when its context ends.
func TestRun(t *testing.T) {
	srv, err := New(Config{Listen: "127.0.0.1:0", MetricsListen: "127.0.0.1:0"})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(testContext(t))
	addrs := make(chan [2]net.Addr, 1)
	done := make(chan error, 1)
	go func() {
		done <- srv.Run(ctx, func(g, m net.Addr) { addrs <- [2]net.Addr{g, m} })
	}()
	a := <-addrs
	conn, err := grpc.NewClient(a[0].String(), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	if _, err := collectModes(testContext(t), modegridv1.NewModegridServiceClient(conn), modesReq(t)); err != nil {
		t.Errorf("gRPC through Run: %v", err)
	}
	req, _ := http.NewRequestWithContext(testContext(t), http.MethodGet, "http://"+a[1].String()+"/metrics", nil)
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	body, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	if resp.StatusCode != http.StatusOK || !strings.Contains(string(body), `grpc_server_handled_total{grpc_code="OK",grpc_method="ComputeModes"`) {
		t.Errorf("metrics endpoint: %d, body without the handled ComputeModes call", resp.StatusCode)
	}
	http.DefaultClient.CloseIdleConnections()
	conn.Close()
	cancel()
	if err := <-done; err != nil {
		t.Errorf("Run: %v; want nil after its context ended", err)
	}
}
