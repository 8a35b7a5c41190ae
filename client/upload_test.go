package client_test

import (
	"context"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
	"time"

	"go.uber.org/goleak"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/resolver"
	"google.golang.org/grpc/resolver/manual"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
	"github.com/materials-lab/modegrid/server"
)

// smallCap is the message cap of the servers (and clients) that must take
// big models by upload: 64 KiB, so a model of a few hundred KB is over it
// while the tests stay fast.
const smallCap = 64 << 10

// smallServer is a server whose message cap is smallCap.
var smallServer = server.Config{MaxMsgBytes: smallCap, MaxChunkBytes: smallCap / 4}

// chainSupercell is the diatomic chain example (20 and 50 amu, nearest-
// neighbour springs K = 2 eV/Å², a = 5 Å) written as a supercell
// force-constant set of cells primitive cells, every pair of its N = 2·cells
// atoms given: Φ_xx(i,i) = 2K, Φ_xx(i,i±1 mod N) = −K. At 32 cells it is
// about 300 KB on the wire (Φ: 64²·9 doubles), over smallCap.
func chainSupercell(t testing.TB, cells int) *modegridv1.Crystal {
	t.Helper()
	c := example(t, "diatomic-chain")
	c.Springs = nil
	n := 2 * cells
	fc := &modegridv1.SupercellForceConstants{Matrix: []int32{int32(cells)}}
	for i := range n {
		fc.Atoms = append(fc.Atoms, &modegridv1.SupercellAtom{Position: []float64{2.5 * float64(i), 0, 0}})
	}
	fc.Phi = make([]float64, 9*n*n)
	for i := range n {
		for j := range n {
			switch {
			case i == j:
				fc.Phi[9*(i*n+j)] = 4
			case (i-j+n)%n == 1 || (j-i+n)%n == 1:
				fc.Phi[9*(i*n+j)] = -2
			}
		}
	}
	c.SupercellFc = fc
	return c
}

// methods lists the modegrid methods a recorder saw, short names, with
// "+inline" or "+ref" for a model that came inline or by reference.
func methods(r *recorder) []string {
	var out []string
	for _, c := range r.snapshot() {
		m := c.method[strings.LastIndex(c.method, "/")+1:]
		switch {
		case c.inline:
			m += "+inline"
		case c.ref != "":
			m += "+ref"
		}
		out = append(out, m)
	}
	return out
}

// TestTransparentUpload: a client whose message cap is the server's
// 64 KiB sends a 300 KB model through the upload stream, then by
// reference, with no inline attempt; a second request of the same model
// uploads nothing; the results equal, number for number, those of the
// model sent inline to a server with the default cap. Without the client,
// the same request inline is refused by the cap.
func TestTransparentUpload(t *testing.T) {
	var rec recorder
	addr, _, _ := startServerConfig(t, "", smallServer, rec.options()...)
	bigAddr, _ := startServer(t, "")
	c := dial(t, addr, client.WithMaxMessageBytes(smallCap))
	ref := dial(t, bigAddr)
	ctx := testContext(t)
	model := chainSupercell(t, 32)
	if proto.Size(model) <= smallCap {
		t.Fatalf("the model is %d bytes, not over the %d-byte cap", proto.Size(model), smallCap)
	}
	req := &modegridv1.ComputeModesRequest{Model: client.Inline(model), Qpoints: client.QList([3]float64{0.1, 0, 0}, [3]float64{0.5, 0, 0})}

	raw, err := c.Raw().ComputeModes(ctx, req)
	if err == nil {
		_, err = raw.Recv()
	}
	if status.Code(err) != codes.ResourceExhausted {
		t.Fatalf("inline without the client's upload: %v; want RESOURCE_EXHAUSTED", err)
	}

	got, err := c.Modes(ctx, req)
	if err != nil {
		t.Fatalf("through the client: %v", err)
	}
	want, err := ref.Modes(ctx, req)
	if err != nil {
		t.Fatal(err)
	}
	if got.GetModelHash() != want.GetModelHash() {
		t.Errorf("hash by upload %s, inline %s; want equal", got.GetModelHash(), want.GetModelHash())
	}
	for i, p := range want.GetPoints() {
		for m, f := range p.GetFrequencies() {
			if g := got.GetPoints()[i].GetFrequencies()[m]; g != f {
				t.Errorf("point %d mode %d: by upload %.17g, inline %.17g; want identical", i, m, g, f)
			}
		}
	}
	dos := &modegridv1.ComputeDosRequest{Model: client.Inline(model), Qpoints: client.Grid(16)}
	if _, err := c.DOS(ctx, dos); err != nil {
		t.Fatalf("second request: %v", err)
	}
	chk, err := c.Check(ctx, &modegridv1.CheckModelRequest{Model: client.Inline(model)})
	if err != nil || !chk.GetValid() || chk.GetModelHash() != want.GetModelHash() || chk.GetSupercellFold().GetAtomsMapped() != 64 {
		t.Errorf("check: %v, %v; want valid, hash %s, 64 atoms mapped", chk.GetModelHash(), err, want.GetModelHash())
	}
	if got, want := strings.Join(methods(&rec), " "), "UploadModel ComputeModes+ref ComputeDos+ref CheckModel+ref"; got != want {
		t.Errorf("server saw %s; want %s", got, want)
	}
	if req.GetModel().GetCrystal() != model {
		t.Error("the caller's request was modified")
	}
}

// TestUploadWhenTheServerCapIsSmaller: a client with the default 16 MiB
// cap sends the model inline; the server, capped at 64 KiB, refuses it
// (RESOURCE_EXHAUSTED, before any handler); the client then uploads it and
// the call succeeds.
func TestUploadWhenTheServerCapIsSmaller(t *testing.T) {
	var rec recorder
	addr, _, _ := startServerConfig(t, "", smallServer, rec.options()...)
	c := dial(t, addr)
	resp, err := c.Dispersion(testContext(t), &modegridv1.ComputeDispersionRequest{
		Model: client.Inline(chainSupercell(t, 32)), Path: []*modegridv1.PathPoint{{Label: "G"}, {Label: "X"}}, Points: 5})
	if err != nil {
		t.Fatalf("dispersion: %v", err)
	}
	if len(resp.GetSamples()) != 5 {
		t.Errorf("%d samples; want 5", len(resp.GetSamples()))
	}
	if got, want := strings.Join(methods(&rec), " "), "UploadModel ComputeDispersion+ref"; got != want {
		t.Errorf("server saw %s; want %s", got, want)
	}
}

// TestReuploadOnNotFound: a server restarted on the same address (empty
// cache) answers the model's reference with NOT_FOUND; the client uploads
// the model again, once, and the call succeeds — for the caller's inline
// model and for the caller's own reference.
func TestReuploadOnNotFound(t *testing.T) {
	addr, kill, _ := startServerConfig(t, "", smallServer)
	c := dial(t, addr, client.WithMaxMessageBytes(smallCap))
	model := chainSupercell(t, 32)
	req := &modegridv1.ComputeModesRequest{Model: client.Inline(model), Qpoints: client.QList([3]float64{0.25, 0, 0})}
	first, err := c.Modes(testContext(t), req)
	if err != nil {
		t.Fatal(err)
	}
	wait := client.GRPCCallOptions(grpc.WaitForReady(true))
	byRef := &modegridv1.ComputeModesRequest{
		Model:   &modegridv1.ModelSource{Source: &modegridv1.ModelSource_ModelHash{ModelHash: first.GetModelHash()}},
		Qpoints: req.GetQpoints(),
	}
	for _, tc := range []struct {
		name string
		req  *modegridv1.ComputeModesRequest
	}{{"inline", req}, {"reference", byRef}} {
		kill()
		var rec recorder
		_, kill, _ = startServerConfig(t, addr, smallServer, rec.options()...)
		again, err := c.Modes(testContext(t), tc.req, wait)
		if err != nil {
			t.Fatalf("%s after restart: %v", tc.name, err)
		}
		if again.GetModelHash() != first.GetModelHash() || again.GetPoints()[0].GetFrequencies()[1] != first.GetPoints()[0].GetFrequencies()[1] {
			t.Errorf("%s after restart: %v; want the first answer", tc.name, again.GetPoints())
		}
		if got, want := strings.Join(methods(&rec), " "), "ComputeModes+ref UploadModel ComputeModes+ref"; got != want {
			t.Errorf("%s: restarted server saw %s; want %s", tc.name, got, want)
		}
	}
}

// TestUploadModelExplicit: UploadModel answers the hash an inline check
// gets (with the model's options), and a later request carrying the same
// model goes by reference without sending it.
func TestUploadModelExplicit(t *testing.T) {
	var rec recorder
	addr, _ := startServer(t, "", rec.options()...)
	c := dial(t, addr)
	ctx := testContext(t)
	src := client.Inline(example(t, "rocksalt-like"))
	src.SymmetryToleranceA = 1e-3
	up, err := c.UploadModel(ctx, src)
	if err != nil {
		t.Fatal(err)
	}
	if up.GetSites() != 2 || up.GetReceivedBytes() != uint64(proto.Size(src.GetCrystal())) {
		t.Errorf("upload answered %v; want 2 sites, %d bytes", up, proto.Size(src.GetCrystal()))
	}
	chk, err := c.Raw().CheckModel(ctx, &modegridv1.CheckModelRequest{Model: src})
	if err != nil {
		t.Fatal(err)
	}
	if up.GetModelHash() != chk.GetModelHash() {
		t.Errorf("upload hash %s, inline check %s; want equal", up.GetModelHash(), chk.GetModelHash())
	}
	if _, err := c.DOS(ctx, &modegridv1.ComputeDosRequest{Model: src, Qpoints: client.Grid(4, 4, 4)}); err != nil {
		t.Fatal(err)
	}
	if got, want := strings.Join(methods(&rec), " "), "UploadModel CheckModel+inline ComputeDos+ref"; got != want {
		t.Errorf("server saw %s; want %s", got, want)
	}
	if _, err := c.UploadModel(ctx, &modegridv1.ModelSource{Source: &modegridv1.ModelSource_ModelHash{ModelHash: up.GetModelHash()}}); err == nil {
		t.Error("UploadModel of a reference: no error")
	}
	if v := client.FieldViolations(func() error {
		bad := example(t, "chain")
		bad.Sites[0].MassAmu = -1
		_, err := c.UploadModel(ctx, client.Inline(bad))
		return err
	}()); len(v) != 1 || v[0].GetField() != "model.crystal.sites[0].mass_amu" {
		t.Errorf("invalid model uploaded: violations %v; want model.crystal.sites[0].mass_amu, as inline", v)
	}
}

// TestUploadAffinity: with model affinity over three replicas, each big
// model's compute calls all reach one replica carrying the model's hash,
// which holds the model after at most one more upload (the first upload
// cannot be routed: its hash is not known yet).
func TestUploadAffinity(t *testing.T) {
	var addrs []string
	var recs []*recorder
	for range 3 {
		rec := &recorder{}
		addr, _, _ := startServerConfig(t, "", smallServer, rec.options()...)
		addrs, recs = append(addrs, addr), append(recs, rec)
	}
	res := staticResolver(addrs)
	c := dial(t, "replicas:///modegrid", client.WithDialOptions(res), client.WithModelAffinity(), client.WithMaxMessageBytes(smallCap))
	ctx := testContext(t)
	for i := range 4 {
		m := chainSupercell(t, 32)
		m.Sites[0].MassAmu = 20 + float64(i) // four distinct models
		req := &modegridv1.ComputeModesRequest{Model: client.Inline(m), Qpoints: client.QList([3]float64{0.5, 0, 0})}
		for range 2 {
			if _, err := c.Modes(ctx, req); err != nil {
				t.Fatalf("model %d: %v", i, err)
			}
		}
	}
	owner := map[string]int{}
	uploads := 0
	for ri, r := range recs {
		for _, cl := range r.snapshot() {
			if strings.HasSuffix(cl.method, "/UploadModel") {
				uploads++
				continue
			}
			if cl.affinity == "" || cl.ref == "" {
				t.Errorf("replica %d: %s without the model's hash (affinity %q, ref %q)", ri, cl.method, cl.affinity, cl.ref)
				continue
			}
			if o, ok := owner[cl.affinity]; ok && o != ri {
				t.Errorf("model %.12s reached replicas %d and %d", cl.affinity, o, ri)
			}
			owner[cl.affinity] = ri
		}
	}
	if len(owner) != 4 || uploads < 4 || uploads > 8 {
		t.Errorf("%d models owned, %d uploads; want 4 models, 4 to 8 uploads", len(owner), uploads)
	}
}

// TestUploadCancelled: a caller that cancels in the middle of an upload
// (after the server received its first chunk) gets CANCELED; the server
// ends the upload (counted as canceled, nothing in flight) and every
// goroutine of the call ends with it.
func TestUploadCancelled(t *testing.T) {
	ignore := goleak.IgnoreCurrent()
	t.Cleanup(func() { goleak.VerifyNone(t, ignore) }) // after the server's own cleanup
	ctx, cancel := context.WithCancel(testContext(t))
	defer cancel()
	chunks := 0
	cancelAfterChunk := grpc.ChainStreamInterceptor(func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, h grpc.StreamHandler) error {
		return h(srv, &cancellingStream{ServerStream: ss, after: func() {
			if chunks++; chunks == 2 { // the header, then one chunk
				cancel()
			}
		}})
	})
	addr, _, srv := startServerConfig(t, "", smallServer, cancelAfterChunk)
	c := dial(t, addr, client.WithMaxMessageBytes(smallCap))
	_, err := c.UploadModel(ctx, client.Inline(chainSupercell(t, 64)))
	if status.Code(err) != codes.Canceled {
		t.Fatalf("cancelled upload: %v; want CANCELED", err)
	}
	deadline := time.Now().Add(time.Minute) // a hang limit, not a time bound
	for metricValue(t, srv, "modegrid_uploads_total", "result", "canceled") != 1 || metricValue(t, srv, "modegrid_uploads_in_flight", "", "") != 0 {
		if time.Now().After(deadline) {
			t.Fatal("the server did not end the cancelled upload")
		}
		runtime.Gosched()
	}
}

// cancellingStream calls after once per message the server receives.
type cancellingStream struct {
	grpc.ServerStream
	after func()
}

func (s *cancellingStream) RecvMsg(m any) error {
	err := s.ServerStream.RecvMsg(m)
	if err == nil {
		s.after()
	}
	return err
}

// metricValue is the value of the sample of family name with label
// key=value (any sample when key is empty) on srv's registry; −1 if none.
func metricValue(t *testing.T, srv *server.Server, name, key, value string) float64 {
	t.Helper()
	mfs, err := srv.Registry().Gather()
	if err != nil {
		t.Fatal(err)
	}
	for _, mf := range mfs {
		if mf.GetName() != name {
			continue
		}
		for _, m := range mf.GetMetric() {
			match := key == ""
			for _, l := range m.GetLabel() {
				match = match || (l.GetName() == key && l.GetValue() == value)
			}
			if !match {
				continue
			}
			if m.GetCounter() != nil {
				return m.GetCounter().GetValue()
			}
			return m.GetGauge().GetValue()
		}
	}
	return -1
}

// TestLoadModelByExtension: LoadModel reads .json as protobuf JSON and .pb
// and .binpb as protobuf binary of the same Crystal, refuses .npz (read by
// the command, not the library) and says which decoding failed.
func TestLoadModelByExtension(t *testing.T) {
	dir := t.TempDir()
	want := chainSupercell(t, 2)
	write := func(name string, b []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, b, 0o600); err != nil {
			t.Fatal(err)
		}
		return p
	}
	bin, err := proto.Marshal(want)
	if err != nil {
		t.Fatal(err)
	}
	js, err := jsonOf(want)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range []string{write("m.json", js), write("m.pb", bin), write("M.BINPB", bin)} {
		got, err := client.LoadModel(p)
		if err != nil || !proto.Equal(got, want) {
			t.Errorf("%s: %v (err %v); want the model", filepath.Base(p), got, err)
		}
	}
	for _, tc := range []struct{ name, want string }{
		{"garbage.pb", "protobuf binary of modegrid.v1.Crystal"},
		{"garbage.json", "parse model"},
		{"set.npz", "read by the modegrid command"},
	} {
		if _, err := client.LoadModel(write(tc.name, []byte{0xff, 0xff, 0xff})); err == nil || !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), tc.name) {
			t.Errorf("%s: err %v; want one naming the file and saying %q", tc.name, err, tc.want)
		}
	}
}

// staticResolver resolves "replicas:///…" to addrs.
func staticResolver(addrs []string) grpc.DialOption {
	r := manual.NewBuilderWithScheme("replicas")
	var state resolver.State
	for _, a := range addrs {
		state.Addresses = append(state.Addresses, resolver.Address{Addr: a})
	}
	r.InitialState(state)
	return grpc.WithResolvers(r)
}

// jsonOf is the protobuf JSON of c, as a model file holds it.
func jsonOf(c *modegridv1.Crystal) ([]byte, error) { return protojson.Marshal(c) }

// TestUploadRoundRobin: without affinity, over two replicas balanced
// round_robin, a big model's upload and every call naming it reach one
// replica (the Client's pinned connection), so no reference meets a
// replica that never received the model; a small model's calls still
// spread over both.
func TestUploadRoundRobin(t *testing.T) {
	var addrs []string
	var recs []*recorder
	for range 2 {
		rec := &recorder{}
		addr, _, _ := startServerConfig(t, "", smallServer, rec.options()...)
		addrs, recs = append(addrs, addr), append(recs, rec)
	}
	c := dial(t, "replicas:///modegrid", client.WithDialOptions(staticResolver(addrs)), client.WithMaxMessageBytes(smallCap))
	ctx := testContext(t)
	big := &modegridv1.ComputeModesRequest{Model: client.Inline(chainSupercell(t, 32)), Qpoints: client.QList([3]float64{0.5, 0, 0})}
	small := &modegridv1.ComputeModesRequest{Model: client.Inline(example(t, "chain")), Qpoints: client.QList([3]float64{0.5, 0, 0})}
	var bigHash string
	for i := range 6 {
		resp, err := c.Modes(ctx, big)
		if err != nil {
			t.Fatalf("big model, call %d: %v", i, err)
		}
		bigHash = resp.GetModelHash()
		if _, err := c.Modes(ctx, small); err != nil {
			t.Fatalf("small model, call %d: %v", i, err)
		}
	}
	count := func() (bigOn, smallOn map[int]int) {
		bigOn, smallOn = map[int]int{}, map[int]int{}
		for ri, r := range recs {
			for _, cl := range r.snapshot() {
				if strings.HasSuffix(cl.method, "/UploadModel") || cl.ref == bigHash {
					bigOn[ri]++
				} else {
					smallOn[ri]++
				}
			}
		}
		return bigOn, smallOn
	}
	// round_robin picks among the replicas connected at the time: on a
	// loaded machine the second may connect only after the first calls,
	// so more small calls are made (at most 100) until both have had one.
	bigOn, smallOn := count()
	for i := 0; len(smallOn) < 2 && i < 100; i++ {
		if _, err := c.Modes(ctx, small); err != nil {
			t.Fatalf("small model, extra call %d: %v", i, err)
		}
		bigOn, smallOn = count()
	}
	if len(bigOn) != 1 {
		t.Errorf("the big model's upload and calls reached replicas %v; want one", bigOn)
	}
	if len(smallOn) != 2 {
		t.Errorf("the small model's calls reached replicas %v; want both (round_robin)", smallOn)
	}
}
