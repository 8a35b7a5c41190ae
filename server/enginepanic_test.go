package server

// A panic inside a parallel worker of the engine, injected through
// physics.SetFaultHook during real RPCs over loopback gRPC: the worker's
// panic is re-raised on the calling goroutine, recovered by the server
// (the recovery interceptor for the streaming call, the cache flight for
// the unary one), answered with INTERNAL, logged once with the worker's
// stack and counted; the server then serves the next call.

import (
	"context"
	"encoding/json"
	"log/slog"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/physics"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// faultHeader marks, in a test's request metadata, the calls whose engine
// workers the fault hook makes panic.
const faultHeader = "x-test-engine-fault"

// injectEngineFault is the fault hook of these tests: a worker of a
// computation whose incoming metadata carries faultHeader panics with the
// header's value. Other calls (and other tests) are not touched.
func injectEngineFault(ctx context.Context) {
	md, _ := metadata.FromIncomingContext(ctx)
	if v := md.Get(faultHeader); len(v) > 0 {
		panic(v[0])
	}
}

// TestEngineWorkerPanicBecomesInternal covers a streaming RPC
// (ComputeModes: StreamModes's workers, recovered by the stream
// interceptor) and a unary one (ComputeDos: GridModes's workers inside a
// shared cache flight, recovered by the flight).
func TestEngineWorkerPanicBecomesInternal(t *testing.T) {
	defer physics.SetFaultHook(injectEngineFault)()
	calls := []struct {
		method string
		call   func(ctx context.Context, api modegridv1.ModegridServiceClient) error
	}{
		{"ComputeModes", func(ctx context.Context, api modegridv1.ModegridServiceClient) error {
			_, err := collectModes(ctx, api, &modegridv1.ComputeModesRequest{Model: inline(example(t, "fcc")), Qpoints: mpGrid(false, 4, 4, 4)})
			return err
		}},
		{"ComputeDos", func(ctx context.Context, api modegridv1.ModegridServiceClient) error {
			_, err := api.ComputeDos(ctx, &modegridv1.ComputeDosRequest{Model: inline(example(t, "fcc")), Qpoints: mpGrid(false, 8, 8, 8)})
			return err
		}},
	}
	for _, tt := range calls {
		t.Run(tt.method, func(t *testing.T) {
			var buf syncBuffer
			ts := startServer(t, Config{Logger: slog.New(slog.NewJSONHandler(&buf, nil))})
			value := "injected engine fault in " + tt.method
			marked := metadata.AppendToOutgoingContext(testContext(t), faultHeader, value)
			err := tt.call(marked, ts.api)
			st := status.Convert(err)
			if st.Code() != codes.Internal || strings.Contains(st.Message(), "injected") {
				t.Fatalf("got %v; want Internal without the panic text", err)
			}
			if n := metric(t, ts.srv.Registry(), "modegrid_panics_recovered_total", nil); n != 1 {
				t.Errorf("panics counter %v; want 1", n)
			}
			if n := metric(t, ts.srv.Registry(), "grpc_server_handled_total", map[string]string{"grpc_method": tt.method, "grpc_code": "Internal"}); n != 1 {
				t.Errorf("handled{%s, Internal} = %v; want 1", tt.method, n)
			}
			checkPanicLog(t, buf.lines(), tt.method, value)
			// The same server answers the next (unmarked) call.
			if err := tt.call(testContext(t), ts.api); err != nil {
				t.Errorf("the call after the panic: %v", err)
			}
		})
	}
}

// checkPanicLog checks that exactly one JSON record reports the panic, with
// the method, the worker's original value, the worker's stack (through the
// engine's parallel helper into the hook) and the stack where the server
// recovered it.
func checkPanicLog(t *testing.T, lines []string, method, value string) {
	t.Helper()
	type record struct {
		Msg, Method, Panic, Where, Stack string
		CallerStack                      string `json:"caller_stack"`
	}
	var got []record
	for _, l := range lines {
		var r record
		if err := json.Unmarshal([]byte(l), &r); err != nil {
			t.Fatalf("log line %q is not JSON: %v", l, err)
		}
		if r.Msg == "panic recovered" {
			got = append(got, r)
		}
	}
	if len(got) != 1 {
		t.Fatalf("%d panic records; want 1", len(got))
	}
	r := got[0]
	if (r.Method != method && !strings.HasSuffix(r.Method, "/"+method)) || r.Panic != value || r.Where != "engine worker" {
		t.Errorf("record method %q panic %q where %q; want %s, %q, engine worker", r.Method, r.Panic, r.Where, method, value)
	}
	for _, frame := range []string{"physics/internal/parallel.(*Group).Go", "server.injectEngineFault"} {
		if !strings.Contains(r.Stack, frame) {
			t.Errorf("worker stack lacks %s:\n%s", frame, r.Stack)
		}
	}
	if r.CallerStack == "" || strings.Contains(r.CallerStack, "injectEngineFault") {
		t.Errorf("caller stack %q; want the recovering goroutine's stack", r.CallerStack)
	}
}
