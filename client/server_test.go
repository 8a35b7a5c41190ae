package client_test

// Tests of the client run against the real modegrid server on loopback TCP.
// Interceptors added here only observe calls or inject transport-level
// faults (UNAVAILABLE) in front of the real service; they never answer in
// its place.

import (
	"context"
	"net"
	"strings"
	"sync"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/metadata"
	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/proto/examples"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
	"github.com/materials-lab/modegrid/server"
)

// startServer serves the real modegrid server (server.New with its
// interceptors, limits and health service; opts are added inside them) on a
// fresh loopback port, or on addr when given. It returns the address and a
// kill function that stops the server at once, as a crashed replica would;
// the server is stopped when the test ends in any case.
func startServer(t testing.TB, addr string, opts ...grpc.ServerOption) (string, func()) {
	t.Helper()
	addr, kill, _ := startServerConfig(t, addr, server.Config{}, opts...)
	return addr, kill
}

// startServerConfig is startServer with cfg (MetricsListen and
// ServerOptions are set here), also returning the server (for its
// metrics).
func startServerConfig(t testing.TB, addr string, cfg server.Config, opts ...grpc.ServerOption) (string, func(), *server.Server) {
	t.Helper()
	if addr == "" {
		addr = "127.0.0.1:0"
	}
	cfg.MetricsListen, cfg.ServerOptions = "off", opts
	srv, err := server.New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	lis, err := net.Listen("tcp", addr)
	if err != nil {
		t.Fatalf("listen: %v", err)
	}
	served := make(chan struct{})
	go func() {
		defer close(served)
		srv.Serve(lis)
	}()
	var once sync.Once
	kill := func() {
		once.Do(func() {
			ctx, cancel := context.WithCancel(context.Background())
			cancel() // no grace: stop now
			srv.Shutdown(ctx)
			<-served
		})
	}
	t.Cleanup(kill)
	return lis.Addr().String(), kill, srv
}

// call is one call seen by a recorder.
type call struct {
	method   string
	inline   bool   // the model came inline
	ref      string // the model came by hash
	affinity string // value of the affinity header
}

// recorder observes every call a server receives.
type recorder struct {
	mu    sync.Mutex // protects calls
	calls []call
}

func (r *recorder) add(ctx context.Context, method string, req any) {
	if !isModegrid(method) {
		return // health checks and reflection
	}
	if u, ok := req.(*modegridv1.UploadModelRequest); ok && u.GetHeader() == nil {
		return // an upload is recorded once, at its header
	}
	c := call{method: method}
	if m, ok := req.(proto.Message); ok {
		if src := modelOf(m); src != nil {
			c.inline = src.GetCrystal() != nil
			c.ref = src.GetModelHash()
		}
	}
	if md, ok := metadata.FromIncomingContext(ctx); ok {
		if v := md.Get("x-modegrid-model"); len(v) > 0 {
			c.affinity = v[0]
		}
	}
	r.mu.Lock()
	r.calls = append(r.calls, c)
	r.mu.Unlock()
}

func (r *recorder) snapshot() []call {
	r.mu.Lock()
	defer r.mu.Unlock()
	return append([]call(nil), r.calls...)
}

func (r *recorder) options() []grpc.ServerOption {
	return []grpc.ServerOption{
		grpc.ChainUnaryInterceptor(func(ctx context.Context, req any, info *grpc.UnaryServerInfo, h grpc.UnaryHandler) (any, error) {
			r.add(ctx, info.FullMethod, req)
			return h(ctx, req)
		}),
		grpc.ChainStreamInterceptor(func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) error {
			return h(srv, &recordingStream{ServerStream: ss, r: r, method: info.FullMethod})
		}),
	}
}

// recordingStream records the request of a server stream when it is read.
type recordingStream struct {
	grpc.ServerStream
	r      *recorder
	method string
}

func (s *recordingStream) RecvMsg(m any) error {
	err := s.ServerStream.RecvMsg(m)
	if err == nil {
		s.r.add(s.Context(), s.method, m)
	}
	return err
}

type modelRequest interface {
	GetModel() *modegridv1.ModelSource
}

func modelOf(m proto.Message) *modegridv1.ModelSource {
	if r, ok := m.(modelRequest); ok {
		return r.GetModel()
	}
	return nil
}

func testContext(t testing.TB) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	t.Cleanup(cancel)
	return ctx
}

func example(t testing.TB, name string) *modegridv1.Crystal {
	t.Helper()
	c, err := examples.Load(name)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// closedPort returns a loopback address nothing listens on: a port that was
// just bound and released.
func closedPort(t testing.TB) string {
	t.Helper()
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := lis.Addr().String()
	lis.Close()
	return addr
}

// isModegrid reports whether a full method name belongs to the modegrid
// service (not to health checking).
func isModegrid(fullMethod string) bool {
	return strings.HasPrefix(fullMethod, "/modegrid.v1.ModegridService/")
}
