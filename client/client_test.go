package client_test

import (
	"context"
	"math"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/backoff"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/resolver"
	"google.golang.org/grpc/resolver/manual"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
	"github.com/materials-lab/modegrid/server"
)

// thzPerSqrtEVPerA2Amu is ν in THz of ω = sqrt(1 eV/Å²/1 amu):
// sqrt(e/(1e-20 m²·m_u))/(2π·1e12), e = 1.602176634e-19 C and
// m_u = 1.66053906660e-27 kg (CODATA 2018).
var thzPerSqrtEVPerA2Amu = math.Sqrt(1.602176634e-19/(1e-20*1.66053906660e-27)) / (2 * math.Pi * 1e12)

func dial(t testing.TB, target string, opts ...client.Option) *client.Client {
	t.Helper()
	c, err := client.Dial(target, opts...)
	if err != nil {
		t.Fatalf("Dial: %v", err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

// TestModesChain: the monatomic chain over real loopback gRPC gives
// ω(q) = 2 sqrt(K/M) |sin(qa/2)| (Kittel, Introduction to Solid State
// Physics, ch. 4) to 1e-9 relative, and the progress callback ends at
// done == total.
func TestModesChain(t *testing.T) {
	addr, _ := startServer(t, "")
	c := dial(t, addr)
	chain := example(t, "chain")
	K, M := chain.GetSprings()[0].GetKLong(), chain.GetSites()[0].GetMassAmu()
	qs := []float64{0, 0.1, 0.25, 0.5, -0.3}
	var pts [][3]float64
	for _, q := range qs {
		pts = append(pts, [3]float64{q, 0, 0})
	}
	var lastDone, lastTotal int
	resp, err := c.Modes(testContext(t), &modegridv1.ComputeModesRequest{Model: client.Inline(chain), Qpoints: client.QList(pts...)},
		client.Progress(func(done, total int) { lastDone, lastTotal = done, total }))
	if err != nil {
		t.Fatal(err)
	}
	if len(resp.GetPoints()) != len(qs) {
		t.Fatalf("got %d points; want %d", len(resp.GetPoints()), len(qs))
	}
	for i, q := range qs {
		// ω = 2 sqrt(K/M)|sin(qa/2)| with qa = 2πq (fractional q).
		want := 2 * math.Sqrt(K/M) * math.Abs(math.Sin(math.Pi*q)) * thzPerSqrtEVPerA2Amu
		got := resp.GetPoints()[i].GetFrequencies()[0]
		if math.Abs(got-want) > 1e-9*want+1e-12 {
			t.Errorf("q=%v: got %.12g THz; want %.12g", q, got, want)
		}
	}
	if lastDone != len(qs) || lastTotal != len(qs) {
		t.Errorf("last progress %d/%d; want %d/%d", lastDone, lastTotal, len(qs), len(qs))
	}
}

// TestModelSentOnceThenByHash: the first call carries the model inline,
// later ones only its hash — the hash the first response named.
func TestModelSentOnceThenByHash(t *testing.T) {
	var rec recorder
	addr, _ := startServer(t, "", rec.options()...)
	c := dial(t, addr)
	req := &modegridv1.ComputeModesRequest{Model: client.Inline(example(t, "fcc")), Qpoints: client.QList([3]float64{0.5, 0, 0.5})}
	first, err := c.Modes(testContext(t), req)
	if err != nil {
		t.Fatal(err)
	}
	if first.GetModelHash() == "" {
		t.Fatal("response names no model hash")
	}
	for range 2 {
		if _, err := c.Modes(testContext(t), req); err != nil {
			t.Fatal(err)
		}
	}
	calls := rec.snapshot()
	if len(calls) != 3 {
		t.Fatalf("server saw %d calls; want 3", len(calls))
	}
	if !calls[0].inline {
		t.Errorf("first call: model not inline")
	}
	for i, cl := range calls[1:] {
		if cl.inline || cl.ref != first.GetModelHash() {
			t.Errorf("call %d: inline=%v ref=%q; want a reference to %q", i+2, cl.inline, cl.ref, first.GetModelHash())
		}
	}
	if src := req.GetModel(); src.GetCrystal() == nil {
		t.Error("the caller's request was modified")
	}
}

// TestResendOnNotFound: a server that never saw the model (here: a
// restarted one, cache empty) answers a reference with NOT_FOUND and the
// client resends the model inline, transparently — both for a model the
// caller gave inline and for a reference the caller gave itself.
func TestResendOnNotFound(t *testing.T) {
	var rec1 recorder
	addr, kill := startServer(t, "", rec1.options()...)
	c := dial(t, addr)
	crystal := example(t, "chain")
	req := &modegridv1.ComputeModesRequest{Model: client.Inline(crystal), Qpoints: client.QList([3]float64{0.5, 0, 0})}
	first, err := c.Modes(testContext(t), req)
	if err != nil {
		t.Fatal(err)
	}
	hash := first.GetModelHash()
	if hash == "" {
		t.Fatal("response names no model hash")
	}
	kill()

	var rec2 recorder
	_, kill2 := startServer(t, addr, rec2.options()...) // same address, empty cache
	wait := client.GRPCCallOptions(grpc.WaitForReady(true))
	again, err := c.Modes(testContext(t), req, wait)
	if err != nil {
		t.Fatalf("after restart: %v", err)
	}
	if got, want := again.GetPoints()[0].GetFrequencies()[0], first.GetPoints()[0].GetFrequencies()[0]; got != want {
		t.Errorf("after resend: %v THz; want %v", got, want)
	}
	calls := rec2.snapshot()
	if len(calls) != 2 || calls[0].ref != hash || !calls[1].inline {
		t.Fatalf("restarted server saw %+v; want a reference to %s then the model inline", calls, hash)
	}

	// The caller's own reference, after another restart: still resent.
	kill2()
	var rec3 recorder
	startServer(t, addr, rec3.options()...)
	byRef := &modegridv1.ComputeModesRequest{
		Model:   &modegridv1.ModelSource{Source: &modegridv1.ModelSource_ModelHash{ModelHash: hash}},
		Qpoints: client.QList([3]float64{0.5, 0, 0}),
	}
	if _, err := c.Modes(testContext(t), byRef, wait); err != nil {
		t.Fatalf("caller's reference after restart: %v", err)
	}
	if calls := rec3.snapshot(); len(calls) != 2 || calls[0].ref != hash || !calls[1].inline {
		t.Errorf("second restart saw %+v; want the reference then the model inline", calls)
	}
}

// TestUnknownReference: a reference the client cannot resend comes back as
// NOT_FOUND.
func TestUnknownReference(t *testing.T) {
	addr, _ := startServer(t, "")
	c := dial(t, addr)
	req := &modegridv1.ComputeModesRequest{
		Model:   &modegridv1.ModelSource{Source: &modegridv1.ModelSource_ModelHash{ModelHash: strings.Repeat("ab", 32)}},
		Qpoints: client.QList([3]float64{0.5, 0, 0}),
	}
	_, err := c.Modes(testContext(t), req)
	if status.Code(err) != codes.NotFound {
		t.Errorf("got %v; want NotFound", err)
	}
}

// failFirst injects UNAVAILABLE into the first n attempts of every call, in
// front of the real service, and counts attempts. With afterHeader the
// response headers go out first, so the call is committed and gRPC's retry
// policy no longer applies.
type failFirst struct {
	n           int32
	afterHeader bool
	attempts    atomic.Int32
}

func (f *failFirst) options() []grpc.ServerOption {
	return []grpc.ServerOption{
		grpc.ChainUnaryInterceptor(func(ctx context.Context, req any, info *grpc.UnaryServerInfo, h grpc.UnaryHandler) (any, error) {
			if isModegrid(info.FullMethod) && f.attempts.Add(1) <= f.n {
				if f.afterHeader {
					if err := grpc.SendHeader(ctx, metadata.Pairs("x-fault", "after-header")); err != nil {
						return nil, err
					}
				}
				return nil, status.Error(codes.Unavailable, "injected fault")
			}
			return h(ctx, req)
		}),
		grpc.ChainStreamInterceptor(func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) error {
			if isModegrid(info.FullMethod) && f.attempts.Add(1) <= f.n {
				if f.afterHeader {
					if err := ss.SendHeader(metadata.Pairs("x-fault", "after-header")); err != nil {
						return err
					}
				}
				return status.Error(codes.Unavailable, "injected fault")
			}
			return h(srv, ss)
		}),
	}
}

// TestRetryOnUnavailable: UNAVAILABLE is retried by the service config up
// to the attempt limit; other codes are not retried. A call broken after
// the server's response headers (which gRPC no longer retries) is sent
// again by the client up to 3 times.
func TestRetryOnUnavailable(t *testing.T) {
	tests := []struct {
		name         string
		fail         int32
		afterHeader  bool
		maxAttempts  int
		stream       bool
		invalid      bool
		wantCode     codes.Code
		wantAttempts int32
	}{
		{name: "stream two faults recovered", fail: 2, maxAttempts: 4, stream: true, wantCode: codes.OK, wantAttempts: 3},
		{name: "unary two faults recovered", fail: 2, maxAttempts: 4, wantCode: codes.OK, wantAttempts: 3},
		{name: "retries disabled", fail: 1, maxAttempts: 1, stream: true, wantCode: codes.Unavailable, wantAttempts: 1},
		{name: "attempts exhausted", fail: 10, maxAttempts: 3, stream: true, wantCode: codes.Unavailable, wantAttempts: 3},
		{name: "invalid argument not retried", fail: 0, maxAttempts: 4, stream: true, invalid: true, wantCode: codes.InvalidArgument, wantAttempts: 1},
		{name: "unary broken after headers resent", fail: 2, afterHeader: true, maxAttempts: 4, wantCode: codes.OK, wantAttempts: 3},
		{name: "stream broken after headers resent", fail: 2, afterHeader: true, maxAttempts: 4, stream: true, wantCode: codes.OK, wantAttempts: 3},
		{name: "resends exhausted", fail: 10, afterHeader: true, maxAttempts: 4, wantCode: codes.Unavailable, wantAttempts: 4},
		{name: "resends disabled with retries", fail: 1, afterHeader: true, maxAttempts: 1, stream: true, wantCode: codes.Unavailable, wantAttempts: 1},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			f := &failFirst{n: tc.fail, afterHeader: tc.afterHeader}
			addr, _ := startServer(t, "", f.options()...)
			c := dial(t, addr, client.WithMaxAttempts(tc.maxAttempts))
			crystal := example(t, "chain")
			if tc.invalid {
				crystal.Sites[0].MassAmu = -1
			}
			var err error
			if tc.stream {
				_, err = c.Modes(testContext(t), &modegridv1.ComputeModesRequest{Model: client.Inline(crystal), Qpoints: client.QList([3]float64{0.5, 0, 0})})
			} else {
				_, err = c.Check(testContext(t), &modegridv1.CheckModelRequest{Model: client.Inline(crystal)})
			}
			if got := status.Code(err); got != tc.wantCode {
				t.Errorf("code %v (%v); want %v", got, err, tc.wantCode)
			}
			if got := f.attempts.Load(); got != tc.wantAttempts {
				t.Errorf("server saw %d attempts; want %d", got, tc.wantAttempts)
			}
		})
	}
}

// breakAfter ends the first stream with UNAVAILABLE after it has sent n
// messages, in front of the real service.
type breakAfter struct {
	n      int
	broken atomic.Bool
}

type countingStream struct {
	grpc.ServerStream
	left int
}

var errInjected = status.Error(codes.Unavailable, "injected break")

func (s *countingStream) SendMsg(m any) error {
	if s.left == 0 {
		return errInjected
	}
	s.left--
	return s.ServerStream.SendMsg(m)
}

func (b *breakAfter) options() []grpc.ServerOption {
	return []grpc.ServerOption{grpc.ChainStreamInterceptor(func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) error {
		if !isModegrid(info.FullMethod) || b.broken.Swap(true) {
			return h(srv, ss)
		}
		h(srv, &countingStream{ServerStream: ss, left: b.n})
		return errInjected
	})}
}

// TestStreamResumes: a modes stream broken by UNAVAILABLE after two chunks
// is reopened; every point arrives exactly once, in q order.
func TestStreamResumes(t *testing.T) {
	b := &breakAfter{n: 2}
	addr, _ := startServer(t, "", b.options()...)
	c := dial(t, addr)
	var pts [][3]float64
	for i := range 10 {
		pts = append(pts, [3]float64{float64(i) / 20, 0, 0})
	}
	var progress []int
	resp, err := c.Modes(testContext(t), &modegridv1.ComputeModesRequest{
		Model: client.Inline(example(t, "chain")), Qpoints: client.QList(pts...), ChunkSize: 2,
	}, client.Progress(func(done, _ int) { progress = append(progress, done) }))
	if err != nil {
		t.Fatal(err)
	}
	if !b.broken.Load() {
		t.Fatal("the stream was never broken")
	}
	if len(resp.GetPoints()) != len(pts) {
		t.Fatalf("got %d points; want %d", len(resp.GetPoints()), len(pts))
	}
	for i, p := range resp.GetPoints() {
		if p.GetQ().GetQ1() != pts[i][0] {
			t.Errorf("point %d has q1 %v; want %v", i, p.GetQ().GetQ1(), pts[i][0])
		}
	}
	for i := 1; i < len(progress); i++ {
		if progress[i] <= progress[i-1] {
			t.Errorf("progress went %v", progress)
			break
		}
	}
}

// replicas starts n real servers behind one manual resolver and returns the
// target and a recorder per server.
func replicas(t *testing.T, n int) (string, []*recorder, grpc.DialOption) {
	t.Helper()
	r := manual.NewBuilderWithScheme("replicas")
	var addrs []resolver.Address
	var recs []*recorder
	for range n {
		rec := &recorder{}
		addr, _ := startServer(t, "", rec.options()...)
		addrs = append(addrs, resolver.Address{Addr: addr})
		recs = append(recs, rec)
	}
	r.InitialState(resolver.State{Addresses: addrs})
	return "replicas:///modegrid", recs, grpc.WithResolvers(r)
}

// TestRoundRobin: without affinity, calls are spread over every address the
// resolver returns (pick_first would send all of them to one).
func TestRoundRobin(t *testing.T) {
	target, recs, res := replicas(t, 3)
	c := dial(t, target, client.WithDialOptions(res))
	req := &modegridv1.ComputeModesRequest{Model: client.Inline(example(t, "chain")), Qpoints: client.QList([3]float64{0.25, 0, 0})}
	ctx := testContext(t)
	for i := 0; ; i++ {
		if _, err := c.Modes(ctx, req); err != nil {
			t.Fatal(err)
		}
		all := true
		for _, r := range recs {
			all = all && len(r.snapshot()) > 0
		}
		if all {
			break
		}
		if i == 300 {
			t.Fatal("300 calls did not reach all three servers")
		}
	}
}

// TestModelAffinity: with WithModelAffinity, every compute call for one
// model reaches the same replica and carries the model hash in the
// affinity header; different models spread over the replicas.
func TestModelAffinity(t *testing.T) {
	target, recs, res := replicas(t, 3)
	c := dial(t, target, client.WithDialOptions(res), client.WithModelAffinity())
	ctx := testContext(t)
	const models = 12
	hashes := make([]string, models)
	for i := range models {
		m := example(t, "chain")
		m.Sites[0].MassAmu = 10 + float64(i) // twelve distinct models
		req := &modegridv1.ComputeModesRequest{Model: client.Inline(m), Qpoints: client.QList([3]float64{0.5, 0, 0})}
		for range 3 {
			resp, err := c.Modes(ctx, req)
			if err != nil {
				t.Fatal(err)
			}
			hashes[i] = resp.GetModelHash()
		}
	}
	owner := map[string]int{} // model hash -> replica
	used := map[int]bool{}
	for ri, r := range recs {
		for _, cl := range r.snapshot() {
			if !strings.HasSuffix(cl.method, "/ComputeModes") {
				continue
			}
			if cl.affinity == "" {
				t.Errorf("replica %d: a compute call without the affinity header", ri)
				continue
			}
			if o, ok := owner[cl.affinity]; ok && o != ri {
				t.Errorf("model %.12s reached replicas %d and %d", cl.affinity, o, ri)
			}
			owner[cl.affinity] = ri
			used[ri] = true
		}
	}
	for i, h := range hashes {
		if _, ok := owner[h]; !ok {
			t.Errorf("model %d (hash %.12s) never carried its hash in the header", i, h)
		}
	}
	if len(used) < 2 {
		t.Errorf("12 models all went to %d replica(s); ring_hash should spread them", len(used))
	}
}

// TestFieldViolations: an invalid model comes back as INVALID_ARGUMENT and
// FieldViolations names every bad field.
func TestFieldViolations(t *testing.T) {
	addr, _ := startServer(t, "")
	c := dial(t, addr)
	bad := example(t, "diatomic-chain")
	bad.Sites[0].MassAmu = -1
	bad.Springs[1].ToSite = 9
	_, err := c.Modes(testContext(t), &modegridv1.ComputeModesRequest{Model: client.Inline(bad), Qpoints: client.QList([3]float64{0.5, 0, 0})})
	if status.Code(err) != codes.InvalidArgument {
		t.Fatalf("got %v; want InvalidArgument", err)
	}
	got := map[string]bool{}
	for _, v := range client.FieldViolations(err) {
		got[v.GetField()] = true
	}
	for _, f := range []string{"model.crystal.sites[0].mass_amu", "model.crystal.springs[1].to_site"} {
		if !got[f] {
			t.Errorf("violations %v do not name %s", got, f)
		}
	}
	if client.IsUnreachable(err) {
		t.Error("an invalid model is not an unreachable server")
	}
}

// TestDialOptions: bad options fail Dial with a clear error.
func TestDialOptions(t *testing.T) {
	tests := []struct {
		name    string
		target  string
		opts    []client.Option
		wantErr string
	}{
		{name: "defaults", target: "127.0.0.1:1"},
		{name: "affinity", target: "dns:///modegrid.example:7420", opts: []client.Option{client.WithModelAffinity()}},
		{name: "token on loopback", target: "127.0.0.1:7420", opts: []client.Option{client.WithToken("t")}},
		{name: "token over TLS", target: "dns:///modegrid.example:7420", opts: []client.Option{client.WithToken("t"), client.WithTLS(nil)}},
		{name: "token in clear refused", target: "dns:///modegrid.example:7420", opts: []client.Option{client.WithToken("t")}, wantErr: "needs TLS"},
		{name: "missing CA file", target: "x:1", opts: []client.Option{client.WithCAFile("/nonexistent/ca.pem")}, wantErr: "read CA file"},
		{name: "zero attempts", target: "x:1", opts: []client.Option{client.WithMaxAttempts(0)}, wantErr: "max attempts"},
		{name: "zero message size", target: "x:1", opts: []client.Option{client.WithMaxMessageBytes(0)}, wantErr: "max message bytes"},
		{name: "zero ready wait", target: "x:1", opts: []client.Option{client.WithReadyWait(0)}, wantErr: "ready wait must be > 0"},
		{name: "connect back-off", target: "x:1", opts: []client.Option{client.WithConnectBackoff(backoff.Config{
			BaseDelay: time.Second, Multiplier: 0.5, Jitter: 2, MaxDelay: time.Millisecond})},
			wantErr: "multiplier must be ≥ 1, got 0.5; jitter must be in [0, 1], got 2; max delay 1ms must be ≥ base delay 1s"},
		{name: "custom back-off", target: "x:1", opts: []client.Option{client.WithConnectBackoff(backoff.DefaultConfig), client.WithReadyWait(time.Minute)}},
		{name: "fail fast", target: "x:1", opts: []client.Option{client.WithFailFast()}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			c, err := client.Dial(tc.target, tc.opts...)
			if tc.wantErr == "" {
				if err != nil {
					t.Fatalf("Dial: %v", err)
				}
				c.Close()
				return
			}
			if err == nil || !strings.Contains(err.Error(), tc.wantErr) {
				t.Errorf("got %v; want an error containing %q", err, tc.wantErr)
			}
		})
	}
}

// TestDefaultsMatchServer: the client's keepalive pings are no more frequent
// than the server's enforcement policy allows (else the server would close
// the connection with too_many_pings), and its message limit equals the
// server's.
func TestDefaultsMatchServer(t *testing.T) {
	if client.DefaultKeepaliveTime < server.KeepaliveMinTime {
		t.Errorf("client pings every %v; the server allows one every %v at most", client.DefaultKeepaliveTime, server.KeepaliveMinTime)
	}
	if client.DefaultMaxMessageBytes != server.DefaultMaxMsgBytes {
		t.Errorf("client message limit %d bytes; server %d", client.DefaultMaxMessageBytes, server.DefaultMaxMsgBytes)
	}
}

// TestAffinityReportsTheCallsOwnViolations: with WithModelAffinity the
// client learns a new model's hash by CheckModel before the call; when
// that check is INVALID_ARGUMENT (here a bad symmetry tolerance), the call
// itself still goes and lists every problem of its own request at once,
// the bad q-point included.
func TestAffinityReportsTheCallsOwnViolations(t *testing.T) {
	addr, _ := startServer(t, "")
	c := dial(t, addr, client.WithModelAffinity())
	src := client.Inline(example(t, "chain"))
	src.SymmetryToleranceA = 5
	_, err := c.Modes(testContext(t), &modegridv1.ComputeModesRequest{Model: src, Qpoints: client.QList([3]float64{math.NaN(), 0, 0})})
	if status.Code(err) != codes.InvalidArgument {
		t.Fatalf("got %v; want InvalidArgument", err)
	}
	var fields []string
	tol, q := false, false
	for _, v := range client.FieldViolations(err) {
		fields = append(fields, v.GetField())
		tol = tol || v.GetField() == "model.symmetry_tolerance_a"
		q = q || strings.HasPrefix(v.GetField(), "qpoints")
	}
	if !tol || !q {
		t.Errorf("violations %v; want model.symmetry_tolerance_a and the q-point", fields)
	}
}

// TestEmptyStreamUnavailable: a modes stream that the server ends cleanly
// before its first message (the real service always sends the model hash
// first) is never an empty success: the client reports UNAVAILABLE at once
// and does not send the call again.
func TestEmptyStreamUnavailable(t *testing.T) {
	var attempts atomic.Int32
	addr, _ := startServer(t, "", grpc.ChainStreamInterceptor(func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) error {
		if isModegrid(info.FullMethod) {
			attempts.Add(1)
			return nil
		}
		return h(srv, ss)
	}))
	c := dial(t, addr, client.WithMaxAttempts(3))
	_, err := c.Modes(testContext(t), &modegridv1.ComputeModesRequest{Model: client.Inline(example(t, "chain")), Qpoints: client.QList([3]float64{0.5, 0, 0})})
	if status.Code(err) != codes.Unavailable || !strings.Contains(err.Error(), "before its first message") {
		t.Errorf("err = %v; want UNAVAILABLE saying the stream ended before its first message", err)
	}
	if n := attempts.Load(); n != 1 {
		t.Errorf("server saw %d attempts; want 1", n)
	}
}
