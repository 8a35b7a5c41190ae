package server

import (
	"context"
	"crypto/sha256"
	"math"
	"strings"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/physics"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// smallCap is the message cap of the servers that must take big models by
// upload: 64 KiB, so that a model of a few hundred KB exceeds it while the
// test stays fast.
const smallCap = 64 << 10

// chainSupercell is the diatomic chain example (masses 20 and 50 amu,
// nearest-neighbour springs K = 2 eV/Å², lattice 5 Å) written as a
// supercell force-constant set of cells primitive cells, N = 2·cells atoms
// at 2.5·i Å (listed in reverse), every pair's block given (N×N):
// Φ_xx(i,i) = 2K, Φ_xx(i, i±1 mod N) = −K, the rest 0. At 64 cells its Φ
// alone is 128²·9·8 = 1 179 648 bytes on the wire.
func chainSupercell(t testing.TB, cells int) *modegridv1.Crystal {
	t.Helper()
	c := example(t, "diatomic-chain")
	c.Springs = nil
	n := 2 * cells
	fc := &modegridv1.SupercellForceConstants{Matrix: []int32{int32(cells)}}
	order := make([]int, 0, n)
	for i := n - 1; i >= 0; i-- {
		fc.Atoms = append(fc.Atoms, &modegridv1.SupercellAtom{Position: []float64{2.5 * float64(i), 0, 0}})
		order = append(order, i)
	}
	fc.Phi = ringBlocks(order)
	c.SupercellFc = fc
	return c
}

// payloadOf is the protobuf binary of c, as a client uploads it.
func payloadOf(t testing.TB, c *modegridv1.Crystal) []byte {
	t.Helper()
	b, err := proto.MarshalOptions{Deterministic: true}.Marshal(c)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// headerFor declares payload with its digest and the options of src.
func headerFor(payload []byte, opts *modegridv1.ModelSource) *modegridv1.UploadModelHeader {
	sum := sha256.Sum256(payload)
	return &modegridv1.UploadModelHeader{SizeBytes: uint64(len(payload)), Sha256: sum[:], Model: opts}
}

// rawUpload sends h and then payload in chunks of at most chunk bytes on
// one UploadModel stream, and returns the server's answer.
func rawUpload(ctx context.Context, api modegridv1.ModegridServiceClient, h *modegridv1.UploadModelHeader, payload []byte, chunk int) (*modegridv1.UploadModelResponse, error) {
	stream, err := api.UploadModel(ctx)
	if err != nil {
		return nil, err
	}
	if err := stream.Send(&modegridv1.UploadModelRequest{Part: &modegridv1.UploadModelRequest_Header{Header: h}}); err != nil {
		return stream.CloseAndRecv()
	}
	for len(payload) > 0 {
		n := min(chunk, len(payload))
		if err := stream.Send(&modegridv1.UploadModelRequest{Part: &modegridv1.UploadModelRequest_Chunk{Chunk: payload[:n]}}); err != nil {
			break // the server ended the stream: its status comes below
		}
		payload = payload[n:]
	}
	return stream.CloseAndRecv()
}

// modesOf computes the frequencies of src at qs.
func modesOf(t *testing.T, api modegridv1.ModegridServiceClient, src *modegridv1.ModelSource, qs *modegridv1.QPointSet) ([]*modegridv1.Modes, string) {
	t.Helper()
	chunks, err := collectModes(testContext(t), api, &modegridv1.ComputeModesRequest{Model: src, Qpoints: qs})
	if err != nil {
		t.Fatalf("modes: %v", err)
	}
	return allPoints(chunks), chunks[0].GetModelHash()
}

// TestUploadBigModel: a 64-cell supercell set (about 1.2 MB) is over a
// 64 KiB message cap inline; uploaded in 32 KiB chunks it gets the hash an
// inline request gets from a server with the default cap, its modes by
// reference equal that server's inline modes exactly, and both equal the
// diatomic chain's closed form.
func TestUploadBigModel(t *testing.T) {
	ctx := testContext(t)
	small := startServer(t, Config{MaxMsgBytes: smallCap, MaxChunkBytes: smallCap / 4})
	big := startServer(t, Config{})
	c := chainSupercell(t, 64)
	payload := payloadOf(t, c)
	qs := qlist(0, 0.1, 0.25, 0.37, 0.5)

	_, err := collectModes(ctx, small.api, &modegridv1.ComputeModesRequest{Model: inline(c), Qpoints: qs})
	if st := status.Convert(err); st.Code() != codes.ResourceExhausted || !strings.Contains(st.Message(), "larger than max") {
		t.Fatalf("inline over the cap: %v; want RESOURCE_EXHAUSTED saying the message is larger than the max", err)
	}

	resp, err := rawUpload(ctx, small.api, headerFor(payload, nil), payload, smallCap/2)
	if err != nil {
		t.Fatalf("upload: %v", err)
	}
	if resp.GetReceivedBytes() != uint64(len(payload)) || resp.GetSites() != 2 || resp.GetStoredBytes() == 0 || resp.GetSupercellFold().GetAtomsMapped() != 128 {
		t.Errorf("upload answered %v; want %d bytes received, 2 sites, 128 atoms mapped, a stored size", resp, len(payload))
	}
	if got := metric(t, small.srv.Registry(), "modegrid_upload_received_bytes_total", nil); got != float64(len(payload)) {
		t.Errorf("upload_received_bytes_total = %v; want %d", got, len(payload))
	}
	if got := metric(t, small.srv.Registry(), "modegrid_uploads_total", map[string]string{"result": uploadOK}); got != 1 {
		t.Errorf("uploads_total{result=ok} = %v; want 1", got)
	}

	byRef, h := modesOf(t, small.api, byHash(resp.GetModelHash()), qs)
	want, wantHash := modesOf(t, big.api, inline(c), qs)
	if h != resp.GetModelHash() || wantHash != h {
		t.Errorf("hashes: upload %s, by reference %s, inline %s; want one", resp.GetModelHash(), h, wantHash)
	}
	for i, p := range want {
		for m, f := range p.GetFrequencies() {
			if g := byRef[i].GetFrequencies()[m]; g != f {
				t.Errorf("q=%v mode %d: by upload %.17g, inline %.17g; want identical", p.GetQ().GetQ1(), m, g, f)
			}
			if k := chainClosedForm(p.GetQ().GetQ1(), m); math.Abs(f-k) > 1e-10*math.Max(1, k) {
				t.Errorf("q=%v mode %d: %.15g THz; closed form %.15g", p.GetQ().GetQ1(), m, f, k)
			}
		}
	}
}

// chainClosedForm is branch m (0 acoustic, 1 optical) of the diatomic
// chain, THz, at fractional q: ω² = K(1/M₁ + 1/M₂) ∓ K·sqrt((1/M₁ +
// 1/M₂)² − 4 sin²(πq)/(M₁M₂)) (Kittel, Introduction to Solid State
// Physics, 8th ed., ch. 4, eq. 18, with qa/2 = πq), K = 2 eV/Å², M = 20
// and 50 amu, ν = ω/2π with the engine's unit conversion (CODATA 2018).
func chainClosedForm(q float64, m int) float64 {
	const k, m1, m2 = 2.0, 20.0, 50.0
	s := 1/m1 + 1/m2
	sin := math.Sin(math.Pi * q)
	root := math.Sqrt(s*s - 4*sin*sin/(m1*m2))
	w2 := k * (s - root)
	if m == 1 {
		w2 = k * (s + root)
	}
	return math.Sqrt(math.Max(w2, 0)) * physics.NuUnitTHz
}

// TestUploadHashEqualsInline: with every model option set (the sum rule,
// a symmetry tolerance, symmetrisation) an uploaded model gets the hash an
// inline CheckModel of the same model and options answers, and is then
// checked by that hash as the model those options make.
func TestUploadHashEqualsInline(t *testing.T) {
	ts := startServer(t, Config{})
	ctx := testContext(t)
	for _, name := range []string{"diatomic-chain", "fcc", "rocksalt-like"} {
		for _, opts := range []*modegridv1.ModelSource{
			nil,
			{EnforceSumRule: true},
			{SymmetryToleranceA: 1e-3, Symmetrize: true},
		} {
			c := example(t, name)
			payload := payloadOf(t, c)
			up, err := rawUpload(ctx, ts.api, headerFor(payload, opts), payload, 100)
			if err != nil {
				t.Fatalf("%s %v: upload: %v", name, opts, err)
			}
			src := inline(c)
			if opts != nil {
				src.EnforceSumRule, src.SymmetryToleranceA, src.Symmetrize = opts.EnforceSumRule, opts.SymmetryToleranceA, opts.Symmetrize
			}
			chk, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: src})
			if err != nil {
				t.Fatal(err)
			}
			if up.GetModelHash() != chk.GetModelHash() {
				t.Errorf("%s %v: upload hash %s, inline %s; want equal", name, opts, up.GetModelHash(), chk.GetModelHash())
			}
			byRef, err := ts.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: byHash(up.GetModelHash())})
			if err != nil || byRef.GetModelHash() != up.GetModelHash() || byRef.GetSymmetrized() != src.GetSymmetrize() {
				t.Errorf("%s %v: by reference: hash %s symmetrized %v, %v; want %s, %v", name, opts,
					byRef.GetModelHash(), byRef.GetSymmetrized(), err, up.GetModelHash(), src.GetSymmetrize())
			}
		}
	}
}

// TestUploadRefused: every malformed stream is INVALID_ARGUMENT naming the
// field at fault (every header problem at once), counted by its result,
// and leaves nothing behind: no upload in flight, no memory reserved, no
// model cached.
func TestUploadRefused(t *testing.T) {
	ts := startServer(t, Config{})
	c := example(t, "diatomic-chain")
	payload := payloadOf(t, c)
	good := func() *modegridv1.UploadModelHeader { return headerFor(payload, nil) }
	badMass := example(t, "diatomic-chain")
	badMass.Sites[0].MassAmu = -1
	badMass.Sites[1].Frac = nil
	badPayload := payloadOf(t, badMass)
	tests := []struct {
		name   string
		send   func(api modegridv1.ModegridServiceClient) error
		fields []string
		result string
	}{
		{name: "over the declared size", result: uploadInvalidStream, fields: []string{"chunk"}, send: func(api modegridv1.ModegridServiceClient) error {
			h := good()
			h.SizeBytes--
			h.Sha256 = nil
			_, err := rawUpload(testContext(t), api, h, payload, 7)
			return err
		}},
		{name: "truncated", result: uploadInvalidStream, fields: []string{"header.size_bytes"}, send: func(api modegridv1.ModegridServiceClient) error {
			_, err := rawUpload(testContext(t), api, good(), payload[:len(payload)-3], 7)
			return err
		}},
		{name: "wrong checksum", result: uploadInvalidStream, fields: []string{"header.sha256"}, send: func(api modegridv1.ModegridServiceClient) error {
			h := good()
			h.Sha256[0] ^= 1
			_, err := rawUpload(testContext(t), api, h, payload, 7)
			return err
		}},
		{name: "every header problem at once", result: uploadInvalidStream,
			fields: []string{"header.size_bytes", "header.encoding", "header.sha256", "header.model", "model.symmetry_tolerance_a"},
			send: func(api modegridv1.ModegridServiceClient) error {
				h := &modegridv1.UploadModelHeader{Encoding: 7, Sha256: []byte{1, 2, 3}, Model: &modegridv1.ModelSource{
					Source: &modegridv1.ModelSource_ModelHash{ModelHash: "abc"}, SymmetryToleranceA: 5}}
				_, err := rawUpload(testContext(t), api, h, payload, 7)
				return err
			}},
		{name: "chunk before the header", result: uploadInvalidStream, fields: []string{"header"}, send: func(api modegridv1.ModegridServiceClient) error {
			stream, err := api.UploadModel(testContext(t))
			if err != nil {
				return err
			}
			stream.Send(&modegridv1.UploadModelRequest{Part: &modegridv1.UploadModelRequest_Chunk{Chunk: payload}})
			_, err = stream.CloseAndRecv()
			return err
		}},
		{name: "second header", result: uploadInvalidStream, fields: []string{"header"}, send: func(api modegridv1.ModegridServiceClient) error {
			stream, err := api.UploadModel(testContext(t))
			if err != nil {
				return err
			}
			stream.Send(&modegridv1.UploadModelRequest{Part: &modegridv1.UploadModelRequest_Header{Header: good()}})
			stream.Send(&modegridv1.UploadModelRequest{Part: &modegridv1.UploadModelRequest_Header{Header: good()}})
			_, err = stream.CloseAndRecv()
			return err
		}},
		{name: "malformed payload", result: uploadInvalidModel, fields: []string{"model.crystal"}, send: func(api modegridv1.ModegridServiceClient) error {
			junk := []byte{0xff, 0xff, 0xff, 0xff, 0x0f, 1, 2, 3}
			_, err := rawUpload(testContext(t), api, headerFor(junk, nil), junk, 3)
			return err
		}},
		{name: "invalid model", result: uploadInvalidModel, fields: []string{"model.crystal.sites[0].mass_amu", "model.crystal.sites[1].frac"}, send: func(api modegridv1.ModegridServiceClient) error {
			_, err := rawUpload(testContext(t), api, headerFor(badPayload, nil), badPayload, 5)
			return err
		}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			before := metric(t, ts.srv.Registry(), "modegrid_uploads_total", map[string]string{"result": tc.result})
			got := badFields(t, tc.send(ts.api))
			for _, f := range tc.fields {
				if _, ok := got[f]; !ok {
					t.Errorf("violations %v do not name %s", got, f)
				}
			}
			if len(got) != len(tc.fields) {
				t.Errorf("violations %v; want exactly %v", got, tc.fields)
			}
			if after := metric(t, ts.srv.Registry(), "modegrid_uploads_total", map[string]string{"result": tc.result}); after != before+1 {
				t.Errorf("uploads_total{result=%s} went %v → %v; want +1", tc.result, before, after)
			}
			assertUploadsReleased(t, ts)
		})
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_cache_entries", map[string]string{"kind": kindModel}); n > 0 {
		t.Errorf("%v models cached after refused uploads; want none", n)
	}
}

// assertUploadsReleased waits until no upload holds a slot or memory.
func assertUploadsReleased(t *testing.T, ts *testServer) {
	t.Helper()
	waitFor(t, "uploads released", func() bool {
		return len(ts.srv.svc.uploads.slots) == 0 && ts.srv.svc.budget.inUse.Load() == 0
	})
}

// TestUploadRefusedBeforeReading: an upload over max-upload-bytes, and one
// whose estimated memory is over the whole budget, are refused on their
// header alone: the client sends no chunk and does not close its side, and
// the server reads nothing more.
func TestUploadRefusedBeforeReading(t *testing.T) {
	for _, tc := range []struct {
		name string
		cfg  Config
		size uint64
		want string
	}{
		{"over max-upload-bytes", Config{MaxUploadBytes: 1 << 20}, 1<<20 + 1, "max-upload-bytes=1048576"},
		{"over the memory budget", Config{MemoryBudget: 8 << 20}, 4 << 20, "memory budget 8.0 MiB"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			ts := startServer(t, tc.cfg)
			stream, err := ts.api.UploadModel(testContext(t))
			if err != nil {
				t.Fatal(err)
			}
			if err := stream.Send(&modegridv1.UploadModelRequest{Part: &modegridv1.UploadModelRequest_Header{Header: &modegridv1.UploadModelHeader{SizeBytes: tc.size}}}); err != nil {
				t.Fatal(err)
			}
			err = stream.RecvMsg(&modegridv1.UploadModelResponse{}) // the send side stays open
			if d := badFields(t, err)["header.size_bytes"]; !strings.Contains(d, tc.want) {
				t.Errorf("header.size_bytes: %q; want it to name %q", d, tc.want)
			}
			if got := metric(t, ts.srv.Registry(), "modegrid_uploads_total", map[string]string{"result": uploadTooLarge}); got != 1 {
				t.Errorf("uploads_total{result=too_large} = %v; want 1", got)
			}
			assertUploadsReleased(t, ts)
		})
	}
}

// TestUploadBusy: past max-uploads a new upload is refused at once, and
// an upload whose estimate does not fit beside another's in the memory
// budget waits the queue timeout, then is refused; both RESOURCE_EXHAUSTED
// naming the cap, neither read.
func TestUploadBusy(t *testing.T) {
	payload := payloadOf(t, example(t, "fcc"))
	for _, tc := range []struct {
		name, subject string
		cfg           Config
	}{
		{"max-uploads", "max-uploads", Config{MaxUploads: 1}},
		// The first upload (256 KiB) reserves 4·256 KiB + 1 MiB = 2 MiB of
		// the 2.5 MiB, the second (a few KB) just over 1 MiB more.
		{"memory budget", "memory-budget", Config{MemoryBudget: 5 << 19, QueueTimeout: 20 * time.Millisecond}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			ts := startServer(t, tc.cfg)
			ctx, cancel := context.WithCancel(testContext(t))
			defer cancel()
			first, err := ts.api.UploadModel(ctx)
			if err != nil {
				t.Fatal(err)
			}
			h := &modegridv1.UploadModelHeader{SizeBytes: 256 << 10}
			if err := first.Send(&modegridv1.UploadModelRequest{Part: &modegridv1.UploadModelRequest_Header{Header: h}}); err != nil {
				t.Fatal(err)
			}
			waitFor(t, "the first upload admitted", func() bool { return ts.srv.svc.budget.inUse.Load() > 0 })
			_, err = rawUpload(testContext(t), ts.api, headerFor(payload, nil), payload, 1024)
			st := status.Convert(err)
			if st.Code() != codes.ResourceExhausted || quotaSubject(st) != tc.subject {
				t.Fatalf("second upload: %v; want RESOURCE_EXHAUSTED with a quota failure on %s", err, tc.subject)
			}
			if got := metric(t, ts.srv.Registry(), "modegrid_uploads_total", map[string]string{"result": uploadBusy}); got != 1 {
				t.Errorf("uploads_total{result=busy} = %v; want 1", got)
			}
			cancel()
			assertUploadsReleased(t, ts)
		})
	}
}

func quotaSubject(st *status.Status) string {
	for _, d := range st.Details() {
		if q, ok := d.(*errdetails.QuotaFailure); ok && len(q.GetViolations()) > 0 {
			return q.GetViolations()[0].GetSubject()
		}
	}
	return ""
}

// TestUploadCancelledMidStream: a client that cancels after half of its
// chunks, and one that stops sending (abandoned after the idle timeout),
// leave no upload in flight, no memory reserved and no model cached; the
// goroutines they used end (TestMain's leak check).
func TestUploadCancelledMidStream(t *testing.T) {
	ts := startServer(t, Config{UploadIdleTimeout: 50 * time.Millisecond})
	payload := payloadOf(t, chainSupercell(t, 16))
	half := func(ctx context.Context) modegridv1.ModegridService_UploadModelClient {
		stream, err := ts.api.UploadModel(ctx)
		if err != nil {
			t.Fatal(err)
		}
		stream.Send(&modegridv1.UploadModelRequest{Part: &modegridv1.UploadModelRequest_Header{Header: headerFor(payload, nil)}})
		stream.Send(&modegridv1.UploadModelRequest{Part: &modegridv1.UploadModelRequest_Chunk{Chunk: payload[:len(payload)/2]}})
		return stream
	}

	ctx, cancel := context.WithCancel(testContext(t))
	half(ctx)
	waitFor(t, "half the payload received", func() bool {
		return metric(t, ts.srv.Registry(), "modegrid_upload_received_bytes_total", nil) == float64(len(payload)/2)
	})
	cancel()
	waitFor(t, "the cancelled upload counted", func() bool {
		return metric(t, ts.srv.Registry(), "modegrid_uploads_total", map[string]string{"result": uploadCanceled}) == 1
	})
	assertUploadsReleased(t, ts)

	stream := half(testContext(t))
	err := stream.RecvMsg(&modegridv1.UploadModelResponse{})
	if st := status.Convert(err); st.Code() != codes.DeadlineExceeded || !strings.Contains(st.Message(), "upload-idle-timeout") {
		t.Fatalf("silent upload: %v; want DEADLINE_EXCEEDED naming upload-idle-timeout", err)
	}
	if got := metric(t, ts.srv.Registry(), "modegrid_uploads_total", map[string]string{"result": uploadIdle}); got != 1 {
		t.Errorf("uploads_total{result=idle_timeout} = %v; want 1", got)
	}
	assertUploadsReleased(t, ts)
	if n := metric(t, ts.srv.Registry(), "modegrid_cache_entries", map[string]string{"kind": kindModel}); n > 0 {
		t.Errorf("%v models cached after unfinished uploads; want none", n)
	}
}

// TestUploadBounds: an uploaded model goes through the same pre-compile
// bound as an inline one (a fold over max-compute-seconds is refused on
// model.crystal.supercell_fc before compiling), and a compiled model the
// cache cannot hold for reference is refused RESOURCE_EXHAUSTED on
// cache-bytes rather than answered with a hash that would be NOT_FOUND.
func TestUploadBounds(t *testing.T) {
	c := chainSupercell(t, 8)
	payload := payloadOf(t, c)

	slow := startServer(t, Config{MaxComputeSeconds: 1e-9})
	_, err := rawUpload(testContext(t), slow.api, headerFor(payload, nil), payload, 4096)
	if _, ok := badFields(t, err)["model.crystal.supercell_fc"]; !ok {
		t.Errorf("fold over the bound: %v; want model.crystal.supercell_fc named", err)
	}
	if got := metric(t, slow.srv.Registry(), "modegrid_computations_total", map[string]string{"kind": kindCompile}); got != 0 {
		t.Errorf("%v compiles ran for a refused upload; want 0", got)
	}

	tiny := startServer(t, Config{CacheBytes: 1 << 10})
	_, err = rawUpload(testContext(t), tiny.api, headerFor(payload, nil), payload, 4096)
	if st := status.Convert(err); st.Code() != codes.ResourceExhausted || quotaSubject(st) != "cache-bytes" {
		t.Errorf("model over the cache: %v; want RESOURCE_EXHAUSTED on cache-bytes", err)
	}
}
