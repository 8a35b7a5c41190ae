package client_test

import (
	"context"
	"net"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
	"github.com/materials-lab/modegrid/server"
)

// benchServer serves the real server (server.New, all interceptors) on
// loopback.
func benchServer(b *testing.B) string {
	b.Helper()
	srv, err := server.New(server.Config{MetricsListen: "off"})
	if err != nil {
		b.Fatal(err)
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		b.Fatal(err)
	}
	go srv.Serve(lis)
	b.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		srv.Shutdown(ctx)
	})
	return lis.Addr().String()
}

var respSink *modegridv1.ComputeDosResponse

// BenchmarkCachedDOS: a cached DOS request over loopback through the
// client library (model sent by hash after the first call) and through the
// bare generated stub with the model inline, to show what the library adds
// or saves.
func BenchmarkCachedDOS(b *testing.B) {
	addr := benchServer(b)
	model := example(b, "rocksalt-like")
	req := &modegridv1.ComputeDosRequest{Model: client.Inline(model), Qpoints: client.Grid(8, 8, 8), PerSite: true}
	ctx := context.Background()
	for _, v := range []struct {
		name string
		opts []client.Option
	}{
		{"client", nil},
		{"client-no-retry", []client.Option{client.WithMaxAttempts(1)}},
		{"client-fail-fast", []client.Option{client.WithFailFast()}},
		{"client-no-retry-no-health", []client.Option{client.WithMaxAttempts(1), client.WithoutHealthCheck()}},
	} {
		b.Run(v.name, func(b *testing.B) { benchClientDOS(b, dial(b, addr, v.opts...), req) })
	}
	b.Run("stub", func(b *testing.B) {

		conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
		if err != nil {
			b.Fatal(err)
		}
		defer conn.Close()
		api := modegridv1.NewModegridServiceClient(conn)
		if _, err := api.ComputeDos(ctx, req); err != nil {
			b.Fatal(err)
		}
		for b.Loop() {
			r, err := api.ComputeDos(ctx, req)
			if err != nil {
				b.Fatal(err)
			}
			respSink = r
		}
	})
}

func benchClientDOS(b *testing.B, c *client.Client, req *modegridv1.ComputeDosRequest) {
	ctx := context.Background()
	if _, err := c.DOS(ctx, req); err != nil { // fill the cache, learn the hash
		b.Fatal(err)
	}
	for b.Loop() {
		r, err := c.DOS(ctx, req)
		if err != nil {
			b.Fatal(err)
		}
		respSink = r
	}
}
