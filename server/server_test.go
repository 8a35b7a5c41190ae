package server

import (
	"context"
	"errors"
	"io"
	"math"
	"net"
	"runtime"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	dto "github.com/prometheus/client_model/go"
	"go.uber.org/goleak"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/proto/examples"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

func TestMain(m *testing.M) { goleak.VerifyTestMain(m) }

// testServer is a real Server on a loopback TCP port with a client
// connected to it.
type testServer struct {
	srv  *Server
	addr string
	conn *grpc.ClientConn
	api  modegridv1.ModegridServiceClient
	done chan error // Serve's result
}

// serverOpts are options of startServer.
type serverOpts struct {
	hook     func(ctx context.Context, kind string) // computation hook
	dialOpts []grpc.DialOption                      // replace the insecure default
}

// startServer builds a Server from cfg, serves it on 127.0.0.1:0 and dials
// it. Cleanup shuts it down and waits for Serve to return.
func startServer(t testing.TB, cfg Config, o ...serverOpts) *testServer {
	t.Helper()
	var opt serverOpts
	if len(o) > 0 {
		opt = o[0]
	}
	srv, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	srv.svc.hook = opt.hook
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	ts := &testServer{srv: srv, addr: lis.Addr().String(), done: make(chan error, 1)}
	go func() { ts.done <- srv.Serve(lis) }()
	dial := opt.dialOpts
	if dial == nil {
		dial = []grpc.DialOption{grpc.WithTransportCredentials(insecure.NewCredentials())}
	}
	ts.conn, err = grpc.NewClient(ts.addr, dial...)
	if err != nil {
		t.Fatal(err)
	}
	ts.api = modegridv1.NewModegridServiceClient(ts.conn)
	t.Cleanup(func() {
		ts.conn.Close()
		ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		defer cancel()
		srv.Shutdown(ctx)
		if err := <-ts.done; err != nil {
			t.Errorf("Serve: %v", err)
		}
	})
	return ts
}

func testContext(t testing.TB) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	t.Cleanup(cancel)
	return ctx
}

func inline(c *modegridv1.Crystal) *modegridv1.ModelSource {
	return &modegridv1.ModelSource{Source: &modegridv1.ModelSource_Crystal{Crystal: c}}
}

func byHash(h string) *modegridv1.ModelSource {
	return &modegridv1.ModelSource{Source: &modegridv1.ModelSource_ModelHash{ModelHash: h}}
}

func example(t testing.TB, name string) *modegridv1.Crystal {
	t.Helper()
	c, err := examples.Load(name)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

func qlist(qs ...float64) *modegridv1.QPointSet {
	var pts []*modegridv1.QPoint
	for _, q := range qs {
		pts = append(pts, &modegridv1.QPoint{Q1: q})
	}
	return &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: pts}}}
}

func mpGrid(shifted bool, mesh ...uint32) *modegridv1.QPointSet {
	return &modegridv1.QPointSet{Set: &modegridv1.QPointSet_Grid{Grid: &modegridv1.MonkhorstPackGrid{Mesh: mesh, Shifted: shifted}}}
}

func cells(n ...uint32) *modegridv1.QPointSet {
	return &modegridv1.QPointSet{Set: &modegridv1.QPointSet_Cells{Cells: &modegridv1.FiniteCrystal{Cells: n}}}
}

// collectModes reads a whole modes stream.
func collectModes(ctx context.Context, api modegridv1.ModegridServiceClient, req *modegridv1.ComputeModesRequest) ([]*modegridv1.ComputeModesResponse, error) {
	stream, err := api.ComputeModes(ctx, req)
	if err != nil {
		return nil, err
	}
	var out []*modegridv1.ComputeModesResponse
	for {
		r, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			return out, nil
		}
		if err != nil {
			return out, err
		}
		out = append(out, r)
	}
}

func allPoints(chunks []*modegridv1.ComputeModesResponse) []*modegridv1.Modes {
	var pts []*modegridv1.Modes
	for _, c := range chunks {
		pts = append(pts, c.GetPoints()...)
	}
	return pts
}

// badFields lists the BadRequest field paths of an INVALID_ARGUMENT error.
func badFields(t testing.TB, err error) map[string]string {
	t.Helper()
	st := status.Convert(err)
	if st.Code() != codes.InvalidArgument {
		t.Fatalf("got %v; want InvalidArgument", err)
	}
	out := map[string]string{}
	for _, d := range st.Details() {
		if br, ok := d.(*errdetails.BadRequest); ok {
			for _, v := range br.GetFieldViolations() {
				out[v.GetField()] = v.GetDescription()
			}
		}
	}
	if len(out) == 0 {
		t.Fatalf("INVALID_ARGUMENT without field violations: %v", err)
	}
	return out
}

// metric returns the value of the sample of family name whose labels
// include want (a counter, gauge, or a histogram's count), or −1 when
// absent.
func metric(t testing.TB, reg prometheus.Gatherer, name string, want map[string]string) float64 {
	t.Helper()
	mfs, err := reg.Gather()
	if err != nil {
		t.Fatal(err)
	}
	for _, mf := range mfs {
		if mf.GetName() != name {
			continue
		}
		for _, m := range mf.GetMetric() {
			if !hasLabels(m, want) {
				continue
			}
			switch {
			case m.Counter != nil:
				return m.GetCounter().GetValue()
			case m.Gauge != nil:
				return m.GetGauge().GetValue()
			case m.Histogram != nil:
				return float64(m.GetHistogram().GetSampleCount())
			}
		}
	}
	return -1
}

func hasLabels(m *dto.Metric, want map[string]string) bool {
	for k, v := range want {
		found := false
		for _, lp := range m.GetLabel() {
			if lp.GetName() == k && lp.GetValue() == v {
				found = true
			}
		}
		if !found {
			return false
		}
	}
	return true
}

// waitFor spins until cond holds (no sleeping), failing after the test
// context's timeout.
func waitFor(t testing.TB, what string, cond func() bool) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	for !cond() {
		if ctx.Err() != nil {
			t.Fatalf("timed out waiting for %s", what)
		}
		runtime.Gosched()
	}
}

// blocker is a computation hook that holds every computation of the
// chosen kinds until released or cancelled, reporting when one starts.
type blocker struct {
	kinds   map[string]bool
	entered chan string
	release chan struct{}
}

func newBlocker(kinds ...string) *blocker {
	b := &blocker{kinds: map[string]bool{}, entered: make(chan string, 64), release: make(chan struct{})}
	for _, k := range kinds {
		b.kinds[k] = true
	}
	return b
}

func (b *blocker) hook(ctx context.Context, kind string) {
	if !b.kinds[kind] {
		return
	}
	b.entered <- kind
	select {
	case <-b.release:
	case <-ctx.Done():
	}
}

// TestChainOverGRPC: the monatomic chain over real loopback gRPC gives
// ω(q) = 2 sqrt(K/m) |sin(qa/2)| (Kittel, Introduction to Solid State
// Physics, ch. 4; Ashcroft & Mermin, ch. 22) to 1e-9 relative, with the
// unit factor sqrt(eV/Å²/amu) from CODATA 2018 constants.
func TestChainOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	c := example(t, "chain")
	K, m := c.GetSprings()[0].GetKLong(), c.GetSites()[0].GetMassAmu()
	// ν [THz] = sqrt(λ [eV/Å²/amu]) · sqrt(e/(1e-20 m_u)) / (2π · 1e12)
	// with e = 1.602176634e-19 C and m_u = 1.66053906660e-27 kg (CODATA 2018).
	unit := math.Sqrt(1.602176634e-19/(1e-20*1.66053906660e-27)) / (2 * math.Pi * 1e12)
	qs := []float64{0, 0.1, 0.2, 0.25, 0.37, 0.5, -0.3}
	chunks, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(c), Qpoints: qlist(qs...)})
	if err != nil {
		t.Fatal(err)
	}
	pts := allPoints(chunks)
	if len(pts) != len(qs) {
		t.Fatalf("got %d points; want %d", len(pts), len(qs))
	}
	for i, q := range qs {
		want := 2 * math.Sqrt(K/m) * math.Abs(math.Sin(math.Pi*q)) * unit
		got := pts[i].GetFrequencies()[0]
		if math.Abs(got-want) > 1e-9*want+1e-12 {
			t.Errorf("q=%v: got %.12g THz; want %.12g", q, got, want)
		}
	}
	if h := chunks[0].GetModelHash(); !isHash(h) {
		t.Errorf("response model hash %q is not a hash", h)
	}
	if p := chunks[0].GetParameters(); !strings.Contains(p, "unit=thz") {
		t.Errorf("parameters %q do not state the resolved unit", p)
	}
}

// TestInvalidModelOverGRPC: an invalid model is refused with
// INVALID_ARGUMENT and a BadRequest naming every bad field.
func TestInvalidModelOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	c := &modegridv1.Crystal{
		Lattice: []*modegridv1.Vec3{{X: 1}, {X: 2}}, // parallel: degenerate
		Sites: []*modegridv1.Site{
			{Label: "A", MassAmu: -1, Frac: []float64{0, 0}},
			{Label: "B", MassAmu: math.NaN(), Frac: []float64{0.5, 0.5}},
		},
		Springs: []*modegridv1.Spring{{FromSite: 0, ToSite: 7, Cell: []int32{0, 0}, KLong: 1}},
	}
	_, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(c), Qpoints: qlist(0), Unit: 99})
	fields := badFields(t, err)
	for _, want := range []string{"model.crystal.lattice", "model.crystal.sites[0].mass_amu", "model.crystal.sites[1].mass_amu", "model.crystal.springs[0].to_site", "unit"} {
		if _, ok := fields[want]; !ok {
			t.Errorf("violations %v do not name %s", fields, want)
		}
	}
}

var _ = physics.NuUnitTHz
