package server

import (
	"context"
	"math"
	"net"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/proto/examples"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// startServer serves the service on a real loopback TCP port and returns a
// client stub connected to it.
func startServer(t *testing.T) modegridv1.ModegridServiceClient {
	t.Helper()
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	gs := grpc.NewServer()
	Register(gs, NewService())
	go gs.Serve(lis)
	t.Cleanup(gs.Stop)
	conn, err := grpc.NewClient(lis.Addr().String(), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close() })
	return modegridv1.NewModegridServiceClient(conn)
}

func testContext(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	t.Cleanup(cancel)
	return ctx
}

func inline(c *modegridv1.Crystal) *modegridv1.ModelSource {
	return &modegridv1.ModelSource{Source: &modegridv1.ModelSource_Crystal{Crystal: c}}
}

func qlist(qs ...float64) *modegridv1.QPointSet {
	var pts []*modegridv1.QPoint
	for _, q := range qs {
		pts = append(pts, &modegridv1.QPoint{Q1: q})
	}
	return &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: pts}}}
}

func collectModes(t *testing.T, api modegridv1.ModegridServiceClient, req *modegridv1.ComputeModesRequest) ([]*modegridv1.Modes, error) {
	t.Helper()
	stream, err := api.ComputeModes(testContext(t), req)
	if err != nil {
		return nil, err
	}
	var pts []*modegridv1.Modes
	for {
		r, err := stream.Recv()
		if err != nil {
			if status.Code(err) == codes.OK || err.Error() == "EOF" {
				return pts, nil
			}
			return pts, err
		}
		pts = append(pts, r.GetPoints()...)
	}
}

// TestChainOverGRPC: the monatomic chain over real loopback gRPC gives
// ω(q) = 2 sqrt(K/m) |sin(qa/2)| (Kittel, Introduction to Solid State
// Physics, ch. 4; Ashcroft & Mermin, ch. 22) to 1e-9 relative, with the
// unit factor sqrt(eV/Å²/amu) from CODATA 2018 constants.
func TestChainOverGRPC(t *testing.T) {
	api := startServer(t)
	c, err := examples.Load("chain")
	if err != nil {
		t.Fatal(err)
	}
	K, m := c.GetSprings()[0].GetKLong(), c.GetSites()[0].GetMassAmu()
	// ν [THz] = sqrt(λ [eV/Å²/amu]) · sqrt(e/(1e-20 m_u)) / (2π · 1e12)
	// with e = 1.602176634e-19 C and m_u = 1.66053906660e-27 kg (CODATA 2018).
	unit := math.Sqrt(1.602176634e-19/(1e-20*1.66053906660e-27)) / (2 * math.Pi * 1e12)
	qs := []float64{0, 0.1, 0.2, 0.25, 0.37, 0.5, -0.3}
	pts, err := collectModes(t, api, &modegridv1.ComputeModesRequest{Model: inline(c), Qpoints: qlist(qs...)})
	if err != nil {
		t.Fatal(err)
	}
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
}

// TestInvalidModelOverGRPC: an invalid model is refused with
// INVALID_ARGUMENT and a BadRequest naming every bad field.
func TestInvalidModelOverGRPC(t *testing.T) {
	api := startServer(t)
	c := &modegridv1.Crystal{
		Lattice: []*modegridv1.Vec3{{X: 1}, {X: 2}}, // parallel: degenerate
		Sites: []*modegridv1.Site{
			{Label: "A", MassAmu: -1, Frac: []float64{0, 0}},
			{Label: "B", MassAmu: math.NaN(), Frac: []float64{0.5, 0.5}},
		},
		Springs: []*modegridv1.Spring{{From: 0, To: 7, Cell: []int32{0, 0}, KLong: 1}},
	}
	_, err := collectModes(t, api, &modegridv1.ComputeModesRequest{Model: inline(c), Qpoints: qlist(0)})
	st := status.Convert(err)
	if st.Code() != codes.InvalidArgument {
		t.Fatalf("got %v; want InvalidArgument", err)
	}
	var fields []string
	for _, d := range st.Details() {
		if br, ok := d.(*errdetails.BadRequest); ok {
			for _, v := range br.GetFieldViolations() {
				fields = append(fields, v.GetField())
			}
		}
	}
	for _, want := range []string{"model.crystal.lattice", "model.crystal.sites[0].mass_amu", "model.crystal.sites[1].mass_amu", "model.crystal.springs[0].to"} {
		found := false
		for _, f := range fields {
			found = found || f == want
		}
		if !found {
			t.Errorf("violations %v do not name %s", fields, want)
		}
	}
}

var _ = physics.NuUnitTHz
