package server

// Fault injection over real gRPC on loopback TCP: a client
// cancelling a 10⁶-point stream half way, requests past every cap,
// abusive and idle connections, a reader too slow for its stream, and
// callers without valid credentials. Each test shows its outcome with the
// server's own counters. The SIGTERM fault runs against a real modegridd
// child process in client/cmd/modegrid-load (load_test.go), whose
// TestMain builds it once.

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"errors"
	"io"
	"math"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	dto "github.com/prometheus/client_model/go"
	"golang.org/x/net/http2"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/keepalive"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// metricSum adds every sample of the counter family name whose "kind"
// label is not in skip.
func metricSum(t testing.TB, reg prometheus.Gatherer, name string, skip ...string) float64 {
	t.Helper()
	mfs, err := reg.Gather()
	if err != nil {
		t.Fatal(err)
	}
	sum := 0.0
	for _, mf := range mfs {
		if mf.GetName() != name {
			continue
		}
	samples:
		for _, m := range mf.GetMetric() {
			for _, lp := range m.GetLabel() {
				for _, s := range skip {
					if lp.GetName() == "kind" && lp.GetValue() == s {
						continue samples
					}
				}
			}
			sum += m.GetCounter().GetValue()
		}
	}
	return sum
}

// poll checks cond every millisecond until it holds, returning when it
// first did; it fails the test after limit. (A ticker, not a sleep: the
// test waits for an event with a time bound.)
func poll(t testing.TB, what string, limit time.Duration, cond func() bool) time.Time {
	t.Helper()
	deadline := time.NewTimer(limit)
	defer deadline.Stop()
	tick := time.NewTicker(time.Millisecond)
	defer tick.Stop()
	for {
		if cond() {
			return time.Now()
		}
		select {
		case <-tick.C:
		case <-deadline.C:
			t.Fatalf("%s: not within %v", what, limit)
		}
	}
}

// heapAfterGC is the live heap after two collections, bytes.
func heapAfterGC() uint64 {
	runtime.GC()
	runtime.GC()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	return ms.HeapAlloc
}

// millionChain is a modes request for the 10⁶ allowed wavevectors of a
// chain of 10⁶ cells (one branch: the cheapest points, so the stream is
// long but quick).
func millionChain(t testing.TB) *modegridv1.ComputeModesRequest {
	return &modegridv1.ComputeModesRequest{Model: inline(example(t, "chain")), Qpoints: cells(1_000_000)}
}

// TestFaultCancelHalfway: a client cancels a 10⁶-point modes stream once
// it has half of it. The server's computation stops (modegrid_computations_
// canceled_total{kind="modes"} turns 1; the lag after the cancel is
// logged, not asserted), the
// diagonalisation counter stops short of 10⁶, the slot is freed, and the
// heap returns to where it was before the call (the point list, 32 MB,
// and every chunk are released).
func TestFaultCancelHalfway(t *testing.T) {
	ts := startServer(t, Config{})
	ctx, cancel := context.WithCancel(testContext(t))
	defer cancel()
	// Warm up: compile the model so that its cache entry is in the
	// baseline heap.
	if _, err := collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: inline(example(t, "chain")), Qpoints: qlist(0.1)}); err != nil {
		t.Fatal(err)
	}
	base := heapAfterGC()
	canceled, qpoints := ts.srv.svc.met.canceled.WithLabelValues(kindModes), ts.srv.svc.met.qpoints
	q0 := value(qpoints)

	stream, err := ts.api.ComputeModes(ctx, millionChain(t))
	if err != nil {
		t.Fatal(err)
	}
	got := 0
	var peak uint64
	for chunks := 0; got < 500_000; chunks++ {
		r, err := stream.Recv()
		if err != nil {
			t.Fatalf("after %d points: %v", got, err)
		}
		if int(r.GetOffset()) != got || r.GetTotal() != 1_000_000 {
			t.Fatalf("chunk at %d of %d; want %d of 1000000", r.GetOffset(), r.GetTotal(), got)
		}
		got += len(r.GetPoints())
		if chunks%200 == 0 {
			var ms runtime.MemStats
			runtime.ReadMemStats(&ms)
			peak = max(peak, ms.HeapAlloc)
		}
	}
	cancel()
	cancelled := time.Now()
	stopped := poll(t, "the computation to stop", 10*time.Second, func() bool { return value(canceled) == 1 })
	lag := stopped.Sub(cancelled)
	done := value(qpoints) - q0
	t.Logf("cancelled after %d points received; computation returned %v later with %.0f of 10⁶ points diagonalised; heap peak %.1f MiB over the baseline",
		got, lag.Round(100*time.Microsecond), done, float64(peak-min(peak, base))/(1<<20))
	if done >= 1_000_000 || done < float64(got) {
		t.Errorf("%.0f points diagonalised; want between the %d received and 10⁶ (stopped half way)", done, got)
	}
	// Messages already received are still delivered; then the stream ends
	// with CANCELED, never as if complete.
	for {
		if _, err := stream.Recv(); err != nil {
			if status.Code(err) != codes.Canceled {
				t.Errorf("stream after cancel: %v; want Canceled", err)
			}
			break
		}
	}
	poll(t, "the slot to be released", 10*time.Second, func() bool { return ts.srv.svc.gate.InFlight() == 0 })
	if after := value(qpoints) - q0; after != done {
		t.Errorf("points diagonalised grew from %.0f to %.0f after the computation stopped", done, after)
	}
	// 4 MiB of slack for the test's own garbage and metric state.
	if h := heapAfterGC(); h > base+4<<20 {
		t.Errorf("heap %.1f MiB after the cancelled stream; want within 4 MiB of the %.1f MiB before it", float64(h)/(1<<20), float64(base)/(1<<20))
	}
}

// TestFaultSlowReader: a reader that stops reading a 10⁶-point stream
// after its first message stalls the computation by HTTP/2 flow control:
// the server computes only about a flow-control window ahead of what was
// read, so memory does not grow with the size of the stream; when the
// reader resumes, the points keep arriving in order (the test reads
// 100 000 more, then cancels).
func TestFaultSlowReader(t *testing.T) {
	tests := []struct {
		name string
		dial []grpc.DialOption
		// ahead bounds the bytes of points the server may have computed
		// beyond what the client read: the client's receive window, the
		// server's per-stream write quota (64 KiB in grpc-go), and the
		// chunks StreamModes keeps in flight (2 per core).
		ahead int
	}{
		{name: "64 KiB window", dial: []grpc.DialOption{grpc.WithInitialWindowSize(64 << 10), grpc.WithInitialConnWindowSize(64 << 10)}, ahead: 1 << 20},
		// grpc-go's dynamic window (BDP estimation) grows to at most 16 MiB.
		{name: "dynamic window", ahead: 16<<20 + 1<<20},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ts := startServer(t, Config{}, serverOpts{dialOpts: append([]grpc.DialOption{grpc.WithTransportCredentials(insecureCreds())}, tt.dial...)})
			qpoints := ts.srv.svc.met.qpoints
			ctx := testContext(t)
			q0 := value(qpoints)
			stream, err := ts.api.ComputeModes(ctx, millionChain(t))
			if err != nil {
				t.Fatal(err)
			}
			first, err := stream.Recv()
			if err != nil {
				t.Fatal(err)
			}
			read := len(first.GetPoints())
			perPoint := float64(proto.Size(first)) / float64(read)
			// Stalled: the counter has not moved for 300 consecutive
			// polls (300 ms).
			last, still := -1.0, 0
			poll(t, "the computation to stall", 20*time.Second, func() bool {
				n := value(qpoints) - q0
				if n == last {
					still++
				} else {
					last, still = n, 0
				}
				return still >= 300
			})
			ahead := (last - float64(read)) * perPoint
			t.Logf("reader stopped after %d points; server stalled at %.0f of 10⁶ points, %.0f points (%.2f MiB of messages) ahead", read, last, last-float64(read), ahead/(1<<20))
			if last >= 1_000_000 {
				t.Fatalf("the server computed all 10⁶ points for a reader that read %d", read)
			}
			if ahead > float64(tt.ahead) {
				t.Errorf("the server got %.2f MiB ahead of the reader; want at most %.2f MiB", ahead/(1<<20), float64(tt.ahead)/(1<<20))
			}
			// Resume: the stream goes on from where it stalled, in order.
			for read < 100_000 {
				r, err := stream.Recv()
				if err != nil {
					t.Fatalf("after %d points: %v", read, err)
				}
				if int(r.GetOffset()) != read {
					t.Fatalf("chunk at %d; want %d", r.GetOffset(), read)
				}
				read += len(r.GetPoints())
			}
			if n := value(qpoints) - q0; n <= last {
				t.Errorf("the computation did not resume: %.0f points, stalled at %.0f", n, last)
			}
		})
	}
}

// tooBig is a request message over a 1 MiB receive limit: a q-point list
// of 50 000 points (about 1.4 MB serialised).
func tooBig(t testing.TB) *modegridv1.ComputeModesRequest {
	pts := make([]*modegridv1.QPoint, 50_000)
	for i := range pts {
		pts[i] = &modegridv1.QPoint{Q1: 0.5 - float64(i)/50_000, Q2: 0.25, Q3: 0.125}
	}
	return &modegridv1.ComputeModesRequest{Model: inline(example(t, "fcc")),
		Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: pts}}}}
}

// TestFaultCapsRefusedBeforeWork: a request past any cap is refused with
// INVALID_ARGUMENT naming the field and the cap, and nothing is
// diagonalised: no computation but the model's compilation (needed to know
// the dimensionality the request is checked against) starts, and the
// q-point counter stays at 0. A message over max-msg-bytes is refused by
// gRPC before it is decoded, with RESOURCE_EXHAUSTED giving the limit.
func TestFaultCapsRefusedBeforeWork(t *testing.T) {
	caps := Config{MaxQPoints: 1000, MaxSites: 1, MaxTemps: 50, MaxPathPoints: 300, MaxPathCorners: 5, MaxDOSBins: 2000, MaxMsgBytes: 1 << 20}
	ts := startServer(t, caps)
	chain, fcc := example(t, "chain"), example(t, "fcc")
	two := example(t, "diatomic-chain")
	corners := func(n int) []*modegridv1.PathPoint {
		var out []*modegridv1.PathPoint
		for i := range n {
			out = append(out, &modegridv1.PathPoint{Label: "P", Q: &modegridv1.QPoint{Q1: float64(i%2) / 2}})
		}
		return out
	}
	type call func(ctx context.Context) error
	modes := func(r *modegridv1.ComputeModesRequest) call {
		return func(ctx context.Context) error { _, err := collectModes(ctx, ts.api, r); return err }
	}
	dos := func(r *modegridv1.ComputeDosRequest) call {
		return func(ctx context.Context) error { _, err := ts.api.ComputeDos(ctx, r); return err }
	}
	thermal := func(r *modegridv1.ComputeThermalRequest) call {
		return func(ctx context.Context) error { _, err := ts.api.ComputeThermal(ctx, r); return err }
	}
	disp := func(r *modegridv1.ComputeDispersionRequest) call {
		return func(ctx context.Context) error { _, err := ts.api.ComputeDispersion(ctx, r); return err }
	}
	tests := []struct {
		name  string
		call  call
		field string // the violation's field
		cap   string // named in its description
	}{
		{name: "grid over max-qpoints", call: modes(&modegridv1.ComputeModesRequest{Model: inline(fcc), Qpoints: mpGrid(false, 11, 10, 10)}), field: "qpoints.grid.mesh", cap: "max-qpoints=1000"},
		{name: "finite crystal over max-qpoints", call: modes(&modegridv1.ComputeModesRequest{Model: inline(chain), Qpoints: cells(1001)}), field: "qpoints.cells.cells[0]", cap: "max-qpoints=1000"},
		{name: "list over max-qpoints", call: modes(&modegridv1.ComputeModesRequest{Model: inline(chain), Qpoints: qlist(make([]float64, 1001)...)}), field: "qpoints.list.points", cap: "max-qpoints=1000"},
		{name: "dos grid over max-qpoints", call: dos(&modegridv1.ComputeDosRequest{Model: inline(fcc), Qpoints: mpGrid(false, 20, 20, 20)}), field: "qpoints.grid.mesh", cap: "max-qpoints=1000"},
		{name: "sites over max-sites", call: thermal(&modegridv1.ComputeThermalRequest{Model: inline(two), Qpoints: mpGrid(false, 8), TemperaturesK: []float64{300}}), field: "model.crystal.sites", cap: "max-sites=1"},
		{name: "temperature list over max-temps", call: thermal(&modegridv1.ComputeThermalRequest{Model: inline(chain), Qpoints: mpGrid(false, 8), TemperaturesK: make([]float64, 51)}), field: "temperatures_k", cap: "max-temps=50"},
		{name: "temperature range over max-temps", call: thermal(&modegridv1.ComputeThermalRequest{Model: inline(chain), Qpoints: mpGrid(false, 8), Range: &modegridv1.TemperatureRange{StartK: 0, StopK: 1000, StepK: 1}}), field: "range", cap: "max-temps=50"},
		{name: "path samples over max-path-points", call: disp(&modegridv1.ComputeDispersionRequest{Model: inline(chain), Path: corners(2), Points: 301}), field: "points", cap: "max-path-points=300"},
		{name: "path spacing over max-path-points", call: disp(&modegridv1.ComputeDispersionRequest{Model: inline(chain), Path: corners(2), SpacingInvA: 1e-4}), field: "spacing_inv_a", cap: "max-path-points=300"},
		{name: "path corners over max-path-corners", call: disp(&modegridv1.ComputeDispersionRequest{Model: inline(chain), Path: corners(6)}), field: "path", cap: "max-path-corners=5"},
		{name: "dos window over max-dos-bins", call: dos(&modegridv1.ComputeDosRequest{Model: inline(chain), Qpoints: mpGrid(false, 8), Min: 0, Max: 10, Step: 1e-3}), field: "step", cap: "max-dos-bins=2000"},
		// Not caps, but refused before the grid is diagonalised all the
		// same (they used to be found by spectra.ComputeDOS after it).
		{name: "dos window upside down", call: dos(&modegridv1.ComputeDosRequest{Model: inline(chain), Qpoints: mpGrid(false, 8), Min: 4, Max: 2}), field: "max", cap: "greater than min"},
		{name: "dos negative width", call: dos(&modegridv1.ComputeDosRequest{Model: inline(chain), Qpoints: mpGrid(false, 8), Method: modegridv1.DosMethod_DOS_METHOD_GAUSSIAN, Width: -0.5}), field: "width", cap: "must be > 0"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			reg := ts.srv.Registry()
			work0 := metricSum(t, reg, "modegrid_computations_total", kindCompile)
			q0 := metric(t, reg, "modegrid_qpoints_diagonalized_total", nil)
			fields := badFields(t, tt.call(testContext(t)))
			desc, ok := fields[tt.field]
			if !ok {
				t.Fatalf("violations %v do not name %s", fields, tt.field)
			}
			if !strings.Contains(desc, tt.cap) {
				t.Errorf("%s: %q does not name the cap %s", tt.field, desc, tt.cap)
			}
			t.Logf("INVALID_ARGUMENT %s: %s", tt.field, desc)
			if n := metricSum(t, reg, "modegrid_computations_total", kindCompile) - work0; n != 0 {
				t.Errorf("%v computations started for a refused request; want 0", n)
			}
			if n := metric(t, reg, "modegrid_qpoints_diagonalized_total", nil) - q0; n != 0 {
				t.Errorf("%v q-points diagonalised for a refused request; want 0", n)
			}
		})
	}
	t.Run("message over max-msg-bytes", func(t *testing.T) {
		reg := ts.srv.Registry()
		work0 := metricSum(t, reg, "modegrid_computations_total")
		_, err := collectModes(testContext(t), ts.api, tooBig(t))
		st := status.Convert(err)
		if st.Code() != codes.ResourceExhausted || !strings.Contains(st.Message(), "1048576") {
			t.Errorf("got %v; want ResourceExhausted naming the 1048576-byte limit", err)
		}
		t.Logf("%v: %s", st.Code(), st.Message())
		if n := metricSum(t, reg, "modegrid_computations_total") - work0; n != 0 {
			t.Errorf("%v computations (compilation included) for an undecoded message; want 0", n)
		}
	})
}

// TestFaultOverflowingCaps: regression tests for two requests whose sizes
// overflowed an int while being checked against the cap. A mesh of three
// divisions each within max-qpoints (2²²·2²²·2²² wraps to 0) was accepted
// and made the server build an unbounded list of points; a temperature
// range with a tiny step wrapped to a negative count and got "at least one
// temperature is required" instead of the cap. Both are now refused, naming
// the cap, before any work.
func TestFaultOverflowingCaps(t *testing.T) {
	ts := startServer(t, Config{})
	const n = 1 << 22 // DefaultMaxQPoints
	tests := []struct {
		name  string
		call  func(ctx context.Context) error
		field string
		cap   string
	}{
		{name: "mesh product wraps to 0", call: func(ctx context.Context) error {
			_, err := collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: inline(example(t, "fcc")), Qpoints: mpGrid(false, n, n, n)})
			return err
		}, field: "qpoints.grid.mesh", cap: "max-qpoints=4194304"},
		{name: "mesh product wraps to 0, finite crystal", call: func(ctx context.Context) error {
			_, err := collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: inline(example(t, "fcc")), Qpoints: cells(n/2, n/2, n*4)})
			return err
		}, field: "qpoints.cells.cells[2]", cap: "max-qpoints=4194304"},
		{name: "mesh product wraps to 0, within each cap", call: func(ctx context.Context) error {
			_, err := collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Model: inline(example(t, "fcc")), Qpoints: cells(n/2, n/2, n)})
			return err
		}, field: "qpoints.cells.cells", cap: "max-qpoints=4194304"},
		{name: "temperature count wraps", call: func(ctx context.Context) error {
			_, err := ts.api.ComputeThermal(ctx, &modegridv1.ComputeThermalRequest{Model: inline(example(t, "chain")), Qpoints: mpGrid(false, 8),
				Range: &modegridv1.TemperatureRange{StartK: 0, StopK: 1e6, StepK: 1e-300}})
			return err
		}, field: "range", cap: "max-temps=10000"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			reg := ts.srv.Registry()
			work0 := metricSum(t, reg, "modegrid_computations_total", kindCompile)
			fields := badFields(t, tt.call(testContext(t)))
			if d, ok := fields[tt.field]; !ok || !strings.Contains(d, tt.cap) {
				t.Errorf("violations %v; want %s naming %s", fields, tt.field, tt.cap)
			} else {
				t.Logf("INVALID_ARGUMENT %s: %s", tt.field, d)
			}
			if n := metricSum(t, reg, "modegrid_computations_total", kindCompile) - work0; n != 0 {
				t.Errorf("%v computations started; want 0", n)
			}
		})
	}
}

// rawConn is an HTTP/2 connection to the server made by hand, to behave
// as no well-mannered gRPC client would.
type rawConn struct {
	net.Conn
	fr *http2.Framer
}

// dialRaw opens a TCP connection to addr; with preface it sends the
// HTTP/2 client preface and an empty SETTINGS frame. Every read and write
// fails after 20 s, so a test cannot hang on it.
func dialRaw(t *testing.T, addr string, preface bool) *rawConn {
	t.Helper()
	c, err := net.Dial("tcp", addr)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	c.SetDeadline(time.Now().Add(20 * time.Second))
	rc := &rawConn{Conn: c, fr: http2.NewFramer(c, c)}
	if preface {
		if _, err := io.WriteString(c, http2.ClientPreface); err != nil {
			t.Fatal(err)
		}
		if err := rc.fr.WriteSettings(); err != nil {
			t.Fatal(err)
		}
	}
	return rc
}

// connEvents is what a raw connection saw until the server closed it.
type connEvents struct {
	goAway     []goAway
	serverPing int // pings the server sent (not acks)
	closed     time.Duration
}

// goAway is a GOAWAY frame the server sent.
type goAway struct {
	code  http2.ErrCode
	debug string
}

// readUntilClosed reads frames until the server closes the connection,
// acknowledging the server's pings when ack is set.
func (rc *rawConn) readUntilClosed(t *testing.T, ack bool) connEvents {
	t.Helper()
	start := time.Now()
	var ev connEvents
	for {
		f, err := rc.fr.ReadFrame()
		if err != nil {
			var ne net.Error
			if errors.As(err, &ne) && ne.Timeout() {
				t.Fatalf("the server did not close the connection within 20 s (saw %+v)", ev)
			}
			ev.closed = time.Since(start)
			return ev
		}
		switch f := f.(type) {
		case *http2.GoAwayFrame:
			ev.goAway = append(ev.goAway, goAway{code: f.ErrCode, debug: string(f.DebugData())})
		case *http2.PingFrame:
			if !f.IsAck() {
				ev.serverPing++
				if ack {
					rc.fr.WritePing(true, f.Data)
				}
			}
		case *http2.SettingsFrame:
			if !f.IsAck() {
				rc.fr.WriteSettingsAck()
			}
		}
	}
}

// TestFaultKeepalive: connections that misbehave are closed by the
// server's keepalive enforcement and connection limits. A client pinging
// far more often than the policy's 20 s (the production policy, not a
// test setting) gets GOAWAY ENHANCE_YOUR_CALM "too_many_pings"; an idle
// connection, a peer that stops answering pings and a connection that
// never speaks HTTP/2 are closed after the (here shortened) limits.
func TestFaultKeepalive(t *testing.T) {
	tests := []struct {
		name    string
		opts    []grpc.ServerOption
		preface bool
		act     func(t *testing.T, rc *rawConn)
		ack     bool
		check   func(t *testing.T, ev connEvents)
	}{
		{name: "ping flood", preface: true, ack: true,
			act: func(t *testing.T, rc *rawConn) {
				for i := range 10 {
					if err := rc.fr.WritePing(false, [8]byte{byte(i)}); err != nil {
						t.Fatal(err)
					}
				}
			},
			check: func(t *testing.T, ev connEvents) {
				if len(ev.goAway) == 0 || ev.goAway[0].code != http2.ErrCodeEnhanceYourCalm || ev.goAway[0].debug != "too_many_pings" {
					t.Errorf("got GOAWAY %v; want ENHANCE_YOUR_CALM too_many_pings", ev.goAway)
				}
			}},
		{name: "idle connection", preface: true, ack: true,
			opts: []grpc.ServerOption{grpc.KeepaliveParams(keepalive.ServerParameters{MaxConnectionIdle: 200 * time.Millisecond})},
			check: func(t *testing.T, ev connEvents) {
				if len(ev.goAway) == 0 || ev.goAway[0].code != http2.ErrCodeNo || ev.goAway[0].debug != "max_idle" {
					t.Errorf("got GOAWAY %v; want NO_ERROR max_idle", ev.goAway)
				}
			}},
		{name: "peer not answering pings", preface: true, ack: false,
			opts: []grpc.ServerOption{grpc.KeepaliveParams(keepalive.ServerParameters{Time: time.Second, Timeout: 300 * time.Millisecond})},
			check: func(t *testing.T, ev connEvents) {
				// The ping goes out at the 1 s keepalive time, so a ping
				// seen means the close came after it (the time itself is
				// logged below, not compared with the clock).
				if ev.serverPing == 0 {
					t.Error("the server sent no keepalive ping before closing")
				}
			}},
		{name: "no HTTP/2 preface", preface: false,
			opts: []grpc.ServerOption{grpc.ConnectionTimeout(300 * time.Millisecond)},
			check: func(t *testing.T, ev connEvents) {
				if len(ev.goAway) != 0 || ev.serverPing != 0 {
					t.Errorf("saw %+v; want the connection closed without a word", ev)
				}
			}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ts := startServer(t, Config{ServerOptions: tt.opts})
			rc := dialRaw(t, ts.addr, tt.preface)
			if tt.act != nil {
				tt.act(t, rc)
			}
			ev := rc.readUntilClosed(t, tt.ack)
			t.Logf("closed after %v; GOAWAY %d, server pings %d", ev.closed.Round(time.Millisecond), len(ev.goAway), ev.serverPing)
			tt.check(t, ev)
			// The server still serves well-behaved clients.
			if _, err := collectModes(testContext(t), ts.api, modesReq(t)); err != nil {
				t.Errorf("a normal call afterwards: %v", err)
			}
		})
	}
}

// certSpec describes a client certificate for issueCert.
type certSpec struct {
	notBefore, notAfter time.Time
	usage               x509.ExtKeyUsage
}

// issueCert writes a client certificate signed by p's CA as spec says.
func issueCert(t *testing.T, p *pki, name string, spec certSpec) tls.Certificate {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	p.serial++
	der, err := x509.CreateCertificate(rand.Reader, &x509.Certificate{
		SerialNumber: big.NewInt(p.serial), Subject: pkix.Name{CommonName: name},
		NotBefore: spec.notBefore, NotAfter: spec.notAfter,
		KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{spec.usage},
	}, p.caCert, &key.PublicKey, p.caKey)
	if err != nil {
		t.Fatal(err)
	}
	return tls.Certificate{Certificate: [][]byte{der}, PrivateKey: key}
}

// TestFaultCredentials: with mutual TLS and bearer tokens configured, a
// call with no token, a wrong token, an expired or not-yet-valid client
// certificate, one signed by another CA, or one not meant for client
// authentication is refused with UNAUTHENTICATED naming the reason, is
// counted, and computes nothing, although its request carries an inline
// model and a grid. The same call with valid credentials computes.
func TestFaultCredentials(t *testing.T) {
	dir := t.TempDir()
	lab, other := newPKI(t, dir, "lab"), newPKI(t, dir, "elsewhere")
	srvCert, srvKey := lab.issue(t, "modegridd", true)
	tokens := filepath.Join(dir, "tokens")
	if err := os.WriteFile(tokens, []byte("lab-token-0123456789\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	ts := startServer(t, Config{TLSCertFile: srvCert, TLSKeyFile: srvKey, ClientCAFile: lab.caFile("lab"), TokenFile: tokens},
		serverOpts{dialOpts: []grpc.DialOption{grpc.WithTransportCredentials(credentials.NewTLS(&tls.Config{RootCAs: lab.pool(), MinVersion: tls.VersionTLS12}))}})
	now := time.Now()
	valid := certSpec{notBefore: now.Add(-time.Hour), notAfter: now.Add(time.Hour), usage: x509.ExtKeyUsageClientAuth}
	good := issueCert(t, lab, "client", valid)
	expired := issueCert(t, lab, "expired", certSpec{notBefore: now.Add(-48 * time.Hour), notAfter: now.Add(-24 * time.Hour), usage: x509.ExtKeyUsageClientAuth})
	future := issueCert(t, lab, "future", certSpec{notBefore: now.Add(24 * time.Hour), notAfter: now.Add(48 * time.Hour), usage: x509.ExtKeyUsageClientAuth})
	serverOnly := issueCert(t, lab, "server-usage", certSpec{notBefore: valid.notBefore, notAfter: valid.notAfter, usage: x509.ExtKeyUsageServerAuth})
	stranger := issueCert(t, other, "stranger", valid)
	const token = "Bearer lab-token-0123456789"
	req := &modegridv1.ComputeDosRequest{Model: inline(example(t, "fcc")), Qpoints: mpGrid(false, 6, 6, 6)}
	tests := []struct {
		name   string
		cert   tls.Certificate
		auth   string // authorization metadata ("" none)
		want   codes.Code
		reason string // in the status message
	}{
		{name: "no token", cert: good, want: codes.Unauthenticated, reason: "missing"},
		{name: "wrong token", cert: good, auth: "Bearer lab-token-012345678", want: codes.Unauthenticated, reason: "invalid bearer token"},
		{name: "expired certificate", cert: expired, auth: token, want: codes.Unauthenticated, reason: "expired"},
		{name: "certificate not yet valid", cert: future, auth: token, want: codes.Unauthenticated, reason: "not yet valid"},
		{name: "certificate of another CA", cert: stranger, auth: token, want: codes.Unauthenticated, reason: "unknown authority"},
		{name: "certificate for servers only", cert: serverOnly, auth: token, want: codes.Unauthenticated, reason: "key usage"},
		{name: "valid certificate and token", cert: good, auth: token, want: codes.OK},
	}
	reg := ts.srv.Registry()
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			conn, err := grpc.NewClient(ts.addr, grpc.WithTransportCredentials(credentials.NewTLS(&tls.Config{
				RootCAs: lab.pool(), Certificates: []tls.Certificate{tt.cert}, MinVersion: tls.VersionTLS12})))
			if err != nil {
				t.Fatal(err)
			}
			defer conn.Close()
			ctx := testContext(t)
			if tt.auth != "" {
				ctx = metadata.AppendToOutgoingContext(ctx, "authorization", tt.auth)
			}
			work0 := metricSum(t, reg, "modegrid_computations_total")
			fail0 := metric(t, reg, "modegrid_auth_failures_total", nil)
			_, err = modegridv1.NewModegridServiceClient(conn).ComputeDos(ctx, req)
			st := status.Convert(err)
			if st.Code() != tt.want || !strings.Contains(st.Message(), tt.reason) {
				t.Fatalf("got %v; want %v mentioning %q", err, tt.want, tt.reason)
			}
			work := metricSum(t, reg, "modegrid_computations_total") - work0
			fails := metric(t, reg, "modegrid_auth_failures_total", nil) - fail0
			if tt.want == codes.OK {
				if work == 0 {
					t.Error("the valid call computed nothing")
				}
				return
			}
			t.Logf("refused: %s", st.Message())
			if work != 0 || fails != 1 {
				t.Errorf("%v computations and %v auth failures counted; want 0 and 1", work, fails)
			}
		})
	}
}

// value reads a counter or gauge directly (cheaper than a Gather of the
// whole registry, so it can be polled every millisecond).
func value(m prometheus.Metric) float64 {
	var d dto.Metric
	if err := m.Write(&d); err != nil {
		return math.NaN()
	}
	if d.Counter != nil {
		return d.GetCounter().GetValue()
	}
	return d.GetGauge().GetValue()
}

func insecureCreds() credentials.TransportCredentials { return insecure.NewCredentials() }

// TestFaultBadInputs: a catalogue of bad requests and what each gets —
// the code, and for INVALID_ARGUMENT the field named — logged for the
// reliability table (go test ./server -run TestFaultBadInputs -v).
func TestFaultBadInputs(t *testing.T) {
	ts := startServer(t, Config{})
	chain, fcc := example(t, "chain"), example(t, "fcc")
	withSites := func(c *modegridv1.Crystal, edit func(*modegridv1.Crystal)) *modegridv1.Crystal {
		c = proto.Clone(c).(*modegridv1.Crystal)
		edit(c)
		return c
	}
	unstable := withSites(chain, func(c *modegridv1.Crystal) { c.Springs[0].KLong = -1 })
	modes := func(r *modegridv1.ComputeModesRequest) func(context.Context) error {
		return func(ctx context.Context) error { _, err := collectModes(ctx, ts.api, r); return err }
	}
	dos := func(r *modegridv1.ComputeDosRequest) func(context.Context) error {
		return func(ctx context.Context) error { _, err := ts.api.ComputeDos(ctx, r); return err }
	}
	thermal := func(r *modegridv1.ComputeThermalRequest) func(context.Context) error {
		return func(ctx context.Context) error { _, err := ts.api.ComputeThermal(ctx, r); return err }
	}
	disp := func(r *modegridv1.ComputeDispersionRequest) func(context.Context) error {
		return func(ctx context.Context) error { _, err := ts.api.ComputeDispersion(ctx, r); return err }
	}
	q := func(qs ...[3]float64) *modegridv1.QPointSet {
		l := &modegridv1.QPointList{}
		for _, v := range qs {
			l.Points = append(l.Points, &modegridv1.QPoint{Q1: v[0], Q2: v[1], Q3: v[2]})
		}
		return &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: l}}
	}
	tests := []struct {
		name  string
		call  func(context.Context) error
		code  codes.Code
		field string // for INVALID_ARGUMENT: a violation's field
	}{
		{name: "no model", call: modes(&modegridv1.ComputeModesRequest{Qpoints: qlist(0)}), code: codes.InvalidArgument, field: "model"},
		{name: "malformed model hash", call: modes(&modegridv1.ComputeModesRequest{Model: byHash("abc"), Qpoints: qlist(0)}), code: codes.InvalidArgument, field: "model.model_hash"},
		{name: "unknown model hash", call: modes(&modegridv1.ComputeModesRequest{Model: byHash(strings.Repeat("ab", 32)), Qpoints: qlist(0)}), code: codes.NotFound},
		{name: "negative mass", call: modes(&modegridv1.ComputeModesRequest{Model: inline(withSites(chain, func(c *modegridv1.Crystal) { c.Sites[0].MassAmu = -1 })), Qpoints: qlist(0)}),
			code: codes.InvalidArgument, field: "model.crystal.sites[0].mass_amu"},
		{name: "NaN lattice component", call: modes(&modegridv1.ComputeModesRequest{Model: inline(withSites(chain, func(c *modegridv1.Crystal) { c.Lattice[0].X = math.NaN() })), Qpoints: qlist(0)}),
			code: codes.InvalidArgument, field: "model.crystal.lattice[0].x"},
		{name: "parallel lattice vectors", call: modes(&modegridv1.ComputeModesRequest{Model: inline(withSites(fcc, func(c *modegridv1.Crystal) { c.Lattice[2] = c.Lattice[1] })), Qpoints: qlist(0)}),
			code: codes.InvalidArgument, field: "model.crystal.lattice"},
		{name: "spring to a missing site", call: modes(&modegridv1.ComputeModesRequest{Model: inline(withSites(chain, func(c *modegridv1.Crystal) { c.Springs[0].ToSite = 5 })), Qpoints: qlist(0)}),
			code: codes.InvalidArgument, field: "model.crystal.springs[0].to_site"},
		{name: "duplicate bond", call: modes(&modegridv1.ComputeModesRequest{Model: inline(withSites(chain, func(c *modegridv1.Crystal) {
			c.Springs = append(c.Springs, &modegridv1.Spring{FromSite: 0, ToSite: 0, Cell: []int32{-1}, KLong: 1})
		})), Qpoints: qlist(0)}), code: codes.InvalidArgument, field: "model.crystal.springs[1]"},
		{name: "frac of the wrong length", call: modes(&modegridv1.ComputeModesRequest{Model: inline(withSites(fcc, func(c *modegridv1.Crystal) { c.Sites[0].Frac = []float64{0} })), Qpoints: qlist(0)}),
			code: codes.InvalidArgument, field: "model.crystal.sites[0].frac"},
		{name: "shell of an unknown label", call: modes(&modegridv1.ComputeModesRequest{Model: inline(withSites(chain, func(c *modegridv1.Crystal) {
			c.Shells = []*modegridv1.Shell{{FromLabel: "A", ToLabel: "Zz", Shell: 1, KLong: 1}}
		})), Qpoints: qlist(0)}), code: codes.InvalidArgument, field: "model.crystal.shells[0].to_label"},
		{name: "NaN q", call: modes(&modegridv1.ComputeModesRequest{Model: inline(chain), Qpoints: q([3]float64{0.1, 0, 0}, [3]float64{math.NaN(), 0, 0})}),
			code: codes.InvalidArgument, field: "qpoints.list.points[1].q1"},
		{name: "q past the dimensionality", call: modes(&modegridv1.ComputeModesRequest{Model: inline(chain), Qpoints: q([3]float64{0.1, 0.2, 0})}),
			code: codes.InvalidArgument, field: "qpoints.list.points[0].q2"},
		{name: "unknown unit", call: modes(&modegridv1.ComputeModesRequest{Model: inline(chain), Qpoints: qlist(0), Unit: 9}), code: codes.InvalidArgument, field: "unit"},
		{name: "DOS on an explicit list", call: dos(&modegridv1.ComputeDosRequest{Model: inline(chain), Qpoints: qlist(0.1)}), code: codes.InvalidArgument, field: "qpoints.list"},
		{name: "DOS window upside down", call: dos(&modegridv1.ComputeDosRequest{Model: inline(chain), Qpoints: mpGrid(false, 16), Min: 5, Max: 1}), code: codes.InvalidArgument, field: "max"},
		{name: "negative Gaussian width", call: dos(&modegridv1.ComputeDosRequest{Model: inline(chain), Qpoints: mpGrid(false, 16), Method: modegridv1.DosMethod_DOS_METHOD_GAUSSIAN, Width: -1}),
			code: codes.InvalidArgument, field: "width"},
		{name: "negative DOS step", call: dos(&modegridv1.ComputeDosRequest{Model: inline(chain), Qpoints: mpGrid(false, 16), Step: -0.1}),
			code: codes.InvalidArgument, field: "step"},
		{name: "negative temperature", call: thermal(&modegridv1.ComputeThermalRequest{Model: inline(chain), Qpoints: mpGrid(false, 16), TemperaturesK: []float64{300, -4}}),
			code: codes.InvalidArgument, field: "temperatures_k[1]"},
		{name: "range stop below start", call: thermal(&modegridv1.ComputeThermalRequest{Model: inline(chain), Qpoints: mpGrid(false, 16), Range: &modegridv1.TemperatureRange{StartK: 300, StopK: 100, StepK: 10}}),
			code: codes.InvalidArgument, field: "range.stop_k"},
		{name: "range step zero", call: thermal(&modegridv1.ComputeThermalRequest{Model: inline(chain), Qpoints: mpGrid(false, 16), Range: &modegridv1.TemperatureRange{StopK: 100}}),
			code: codes.InvalidArgument, field: "range.step_k"},
		{name: "thermal of an unstable model", call: thermal(&modegridv1.ComputeThermalRequest{Model: inline(unstable), Qpoints: mpGrid(false, 16), TemperaturesK: []float64{300}}),
			code: codes.FailedPrecondition},
		{name: "path of one corner", call: disp(&modegridv1.ComputeDispersionRequest{Model: inline(chain), Path: []*modegridv1.PathPoint{{Label: "G"}}}), code: codes.InvalidArgument, field: "path"},
		{name: "label not of this lattice", call: disp(&modegridv1.ComputeDispersionRequest{Model: inline(chain), Path: []*modegridv1.PathPoint{{Label: "G"}, {Label: "L"}}}),
			code: codes.InvalidArgument, field: "path[1].label"},
		// No field: nothing of the request could be read (ops_test.go
		// checks the message, metric and log line).
		{name: "bytes that are not a request", call: func(ctx context.Context) error {
			return ts.conn.Invoke(ctx, modegridv1.ModegridService_CheckModel_FullMethodName, rawRequest("\xff\xff\xff"), &modegridv1.CheckModelResponse{}, grpc.ForceCodec(rawCodec{}))
		}, code: codes.InvalidArgument, field: ""},
		{name: "message over max-msg-bytes", call: modes(tooBigMessage(t)), code: codes.ResourceExhausted},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := tt.call(testContext(t))
			st := status.Convert(err)
			if st.Code() != tt.code {
				t.Fatalf("got %v; want %v", err, tt.code)
			}
			if tt.code != codes.InvalidArgument {
				t.Logf("%v: %s", st.Code(), st.Message())
				return
			}
			fields := badFields(t, err)
			d, ok := fields[tt.field]
			if !ok {
				t.Fatalf("violations %v do not name %s", fields, tt.field)
			}
			t.Logf("INVALID_ARGUMENT %s: %s", tt.field, d)
		})
	}
}

// tooBigMessage is a request over the default 16 MiB message cap: a list
// of 600 000 q-points (about 17 MB serialised).
func tooBigMessage(t testing.TB) *modegridv1.ComputeModesRequest {
	pts := make([]*modegridv1.QPoint, 600_000)
	for i := range pts {
		pts[i] = &modegridv1.QPoint{Q1: 0.1 + float64(i)*1e-7, Q2: 0.2, Q3: 0.3}
	}
	return &modegridv1.ComputeModesRequest{Model: inline(example(t, "fcc")),
		Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: pts}}}}
}
