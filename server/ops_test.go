package server

import (
	"context"
	"encoding/json"
	"errors"
	"log/slog"
	"net"
	"os"
	"strings"
	"testing"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/encoding"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	reflectionpb "google.golang.org/grpc/reflection/grpc_reflection_v1"
	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// garbage is not a protobuf message: field 1, length-delimited, with a
// length of 127 bytes of which none follow.
var garbage = rawRequest{0x0a, 0x7f}

// logRecords parses the JSON log lines with message msg.
func logRecords(t *testing.T, buf *syncBuffer, msg string) []map[string]any {
	t.Helper()
	var out []map[string]any
	for _, l := range buf.lines() {
		if l == "" {
			continue
		}
		var rec map[string]any
		if err := json.Unmarshal([]byte(l), &rec); err != nil {
			t.Fatalf("log line %q is not JSON: %v", l, err)
		}
		if rec["msg"] == msg {
			out = append(out, rec)
		}
	}
	return out
}

// TestUndecodableRequests: bytes that do not decode as the request message,
// sent over real gRPC to a unary and a streaming method, reach the client
// as INVALID_ARGUMENT (grpc-go alone would answer INTERNAL, or for unary
// calls reach no interceptor at all), are counted by method in
// modegrid_requests_undecodable_total and in the request metrics under
// InvalidArgument, and are logged.
func TestUndecodableRequests(t *testing.T) {
	var buf syncBuffer
	ts := startServer(t, Config{Logger: slog.New(slog.NewJSONHandler(&buf, nil))})
	ctx := testContext(t)
	const svc = "/modegrid.v1.ModegridService/"

	err := ts.conn.Invoke(ctx, svc+"CheckModel", garbage, &modegridv1.CheckModelResponse{}, grpc.ForceCodec(rawCodec{}))
	if status.Code(err) != codes.InvalidArgument || !strings.Contains(status.Convert(err).Message(), "modegrid.v1.CheckModelRequest") {
		t.Errorf("unary garbage: %v; want InvalidArgument naming the message type", err)
	}
	stream, err := ts.conn.NewStream(ctx, &grpc.StreamDesc{ServerStreams: true}, svc+"ComputeModes", grpc.ForceCodec(rawCodec{}))
	if err != nil {
		t.Fatal(err)
	}
	if err := stream.SendMsg(garbage); err != nil {
		t.Fatal(err)
	}
	stream.CloseSend()
	if err := stream.RecvMsg(&modegridv1.ComputeModesResponse{}); status.Code(err) != codes.InvalidArgument {
		t.Errorf("streaming garbage: %v; want InvalidArgument", err)
	}
	// A valid request after them still works: no state left behind.
	if _, err := collectModes(ctx, ts.api, modesReq(t)); err != nil {
		t.Errorf("valid call after garbage: %v", err)
	}
	reg := ts.srv.Registry()
	for _, m := range []string{"CheckModel", "ComputeModes"} {
		if got := metric(t, reg, "modegrid_requests_undecodable_total", map[string]string{"grpc_service": "modegrid.v1.ModegridService", "grpc_method": m}); got != 1 {
			t.Errorf("undecodable %s: %v; want 1", m, got)
		}
		if got := metric(t, reg, "grpc_server_handled_total", map[string]string{"grpc_method": m, "grpc_code": "InvalidArgument"}); got != 1 {
			t.Errorf("handled %s InvalidArgument: %v; want 1", m, got)
		}
	}
	if got := metric(t, reg, "modegrid_requests_undecodable_total", map[string]string{"grpc_service": "modegrid.v1.ModegridService", "grpc_method": "ComputeDos"}); got != 0 {
		t.Errorf("undecodable ComputeDos: %v; want 0 (exported, never incremented)", got)
	}
	recs := logRecords(t, &buf, "undecodable request")
	if len(recs) != 2 {
		t.Fatalf("%d undecodable-request log lines; want 2", len(recs))
	}
	for _, r := range recs {
		if r["level"] != "WARN" || r["err"] == "" || !strings.HasPrefix(r["method"].(string), svc) {
			t.Errorf("log line %v; want a warning with method and error", r)
		}
	}
	if n := len(ts.srv.undecodable.pending); n != 0 {
		t.Errorf("%d decoding records left pending; want 0", n)
	}
}

// TestHealthChecksLoggedAtDebug: a health check writes no line at the
// info level, and its line at debug; other calls still log at info.
func TestHealthChecksLoggedAtDebug(t *testing.T) {
	for _, lvl := range []slog.Level{slog.LevelInfo, slog.LevelDebug} {
		t.Run(lvl.String(), func(t *testing.T) {
			var buf syncBuffer
			ts := startServer(t, Config{Logger: slog.New(slog.NewJSONHandler(&buf, &slog.HandlerOptions{Level: lvl}))})
			ctx := testContext(t)
			if _, err := healthpb.NewHealthClient(ts.conn).Check(ctx, &healthpb.HealthCheckRequest{}); err != nil {
				t.Fatal(err)
			}
			if _, err := collectModes(ctx, ts.api, modesReq(t)); err != nil {
				t.Fatal(err)
			}
			var health, modes []map[string]any
			for _, r := range logRecords(t, &buf, "call") {
				switch r["method"] {
				case "/grpc.health.v1.Health/Check":
					health = append(health, r)
				case "/modegrid.v1.ModegridService/ComputeModes":
					modes = append(modes, r)
				}
			}
			wantHealth := 0
			if lvl == slog.LevelDebug {
				wantHealth = 1
			}
			if len(health) != wantHealth || (wantHealth == 1 && health[0]["level"] != "DEBUG") {
				t.Errorf("health lines %v; want %d at DEBUG", health, wantHealth)
			}
			if len(modes) != 1 || modes[0]["level"] != "INFO" {
				t.Errorf("ComputeModes lines %v; want one at INFO", modes)
			}
		})
	}
}

// TestHealthPort: the health-only port answers health checks without the
// main port's credentials (here: bearer tokens on the main port), follows
// the server's status, and serves nothing else — no computation, no
// reflection.
func TestHealthPort(t *testing.T) {
	tokens := t.TempDir() + "/tokens"
	if err := os.WriteFile(tokens, []byte("s3cret-token-for-the-test\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	ts := startServer(t, Config{TokenFile: tokens})
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- ts.srv.ServeHealth(lis) }()
	conn, err := grpc.NewClient(lis.Addr().String(), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	ctx := testContext(t)
	// Serve (started in a goroutine by startServer) turns the status to
	// SERVING: wait for that event on the health port itself.
	w, err := healthpb.NewHealthClient(conn).Watch(ctx, &healthpb.HealthCheckRequest{})
	if err != nil {
		t.Fatal(err)
	}
	for {
		r, err := w.Recv()
		if err != nil {
			t.Fatalf("watching health on the health port: %v", err)
		}
		if r.GetStatus() == healthpb.HealthCheckResponse_SERVING {
			break
		}
	}
	for _, svc := range []string{"", modegridv1.ModegridService_ServiceDesc.ServiceName} {
		r, err := healthpb.NewHealthClient(conn).Check(ctx, &healthpb.HealthCheckRequest{Service: svc})
		if err != nil || r.GetStatus() != healthpb.HealthCheckResponse_SERVING {
			t.Errorf("health port, service %q: %v, %v; want SERVING", svc, r.GetStatus(), err)
		}
	}
	_, err = collectModes(ctx, modegridv1.NewModegridServiceClient(conn), modesReq(t))
	if status.Code(err) != codes.Unimplemented {
		t.Errorf("ComputeModes on the health port: %v; want Unimplemented", err)
	}
	if _, err := modegridv1.NewModegridServiceClient(conn).CheckModel(ctx, &modegridv1.CheckModelRequest{}); status.Code(err) != codes.Unimplemented {
		t.Errorf("CheckModel on the health port: %v; want Unimplemented", err)
	}
	rs, err := reflectionpb.NewServerReflectionClient(conn).ServerReflectionInfo(ctx)
	if err == nil {
		rs.Send(&reflectionpb.ServerReflectionRequest{MessageRequest: &reflectionpb.ServerReflectionRequest_ListServices{}})
		_, err = rs.Recv()
	}
	if status.Code(err) != codes.Unimplemented {
		t.Errorf("reflection on the health port: %v; want Unimplemented", err)
	}
	sctx, cancel := context.WithCancel(ctx)
	cancel() // grace over at once: nothing is in flight
	ts.srv.Shutdown(sctx)
	if err := <-done; err != nil {
		t.Errorf("ServeHealth: %v; want nil after Shutdown", err)
	}
}

// TestRunGraceExpired: a call still running when the shutdown grace ends
// is cut off and logged, and Run still returns nil (an orderly stop: the
// daemon exits 0).
func TestRunGraceExpired(t *testing.T) {
	var buf syncBuffer
	b := newOnceBlocker(kindModes) // never released
	srv, err := New(Config{Listen: "127.0.0.1:0", MetricsListen: "off", ShutdownGrace: 1,
		Logger: slog.New(slog.NewJSONHandler(&buf, nil))})
	if err != nil {
		t.Fatal(err)
	}
	srv.svc.hook = b.hook
	ctx, cancel := context.WithCancel(testContext(t))
	addrs := make(chan net.Addr, 1)
	done := make(chan error, 1)
	go func() { done <- srv.Run(ctx, func(g, _ net.Addr) { addrs <- g }) }()
	conn, err := grpc.NewClient((<-addrs).String(), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	inflight := make(chan error, 1)
	go func() {
		_, err := collectModes(testContext(t), modegridv1.NewModegridServiceClient(conn), modesReq(t))
		inflight <- err
	}()
	<-b.entered
	cancel()
	if err := <-done; err != nil {
		t.Errorf("Run: %v; want nil after a shutdown whose grace expired", err)
	}
	if err := <-inflight; status.Code(err) != codes.Unavailable && status.Code(err) != codes.Canceled {
		t.Errorf("cut-off call: %v; want Unavailable or Canceled", err)
	}
	if n := len(logRecords(t, &buf, "grace period over: stopping calls still in flight (each logged with its code)")); n != 1 {
		t.Errorf("%d grace-over warnings; want 1", n)
	}
	waitFor(t, "the cut call's log line", func() bool {
		for _, r := range logRecords(t, &buf, "call") {
			if r["method"] == "/modegrid.v1.ModegridService/ComputeModes" && r["code"] != "OK" {
				return true
			}
		}
		return false
	})
}

// TestCrashGuard: a panic in a goroutine the server starts becomes one
// JSON log line and then continues as the same panic.
func TestCrashGuard(t *testing.T) {
	var buf syncBuffer
	srv, err := New(Config{Logger: slog.New(slog.NewJSONHandler(&buf, nil))})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Shutdown(testContext(t))
	var repanicked any
	func() {
		defer func() { repanicked = recover() }()
		func() {
			defer srv.crashGuard("test-goroutine")
			panic(errors.New("deliberate"))
		}()
	}()
	if e, ok := repanicked.(error); !ok || e.Error() != "deliberate" {
		t.Errorf("re-panicked with %v; want the original panic", repanicked)
	}
	recs := logRecords(t, &buf, "crash")
	if len(recs) != 1 {
		t.Fatalf("%d crash lines; want 1", len(recs))
	}
	r := recs[0]
	if r["level"] != "ERROR" || r["goroutine"] != "test-goroutine" || r["panic"] != "deliberate" || !strings.Contains(r["stack"].(string), "TestCrashGuard") {
		t.Errorf("crash line %v; want level, goroutine, panic and stack", r)
	}
}

// TestUndecodableStockCodec documents why the server has its own codec:
// with grpc-go's protobuf codec (given here through ServerOptions, which
// override the server's), the same bytes get INTERNAL — a server fault to
// the client and to the error-ratio alert — and the undecodable counter
// never moves.
func TestUndecodableStockCodec(t *testing.T) {
	ts := startServer(t, Config{ServerOptions: []grpc.ServerOption{grpc.ForceServerCodecV2(encoding.GetCodecV2("proto"))}})
	err := ts.conn.Invoke(testContext(t), modegridv1.ModegridService_CheckModel_FullMethodName, garbage, &modegridv1.CheckModelResponse{}, grpc.ForceCodec(rawCodec{}))
	if status.Code(err) != codes.Internal {
		t.Errorf("stock codec: %v; want Internal (grpc-go's answer to a codec error)", err)
	}
	if got := metric(t, ts.srv.Registry(), "modegrid_requests_undecodable_total", map[string]string{"grpc_method": "CheckModel"}); got != 0 {
		t.Errorf("undecodable counter %v; want 0 (the stock codec reports nothing)", got)
	}
}
