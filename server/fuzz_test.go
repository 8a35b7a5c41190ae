package server

// Fuzz targets (issue 9): the model JSON decoder with validation and
// compilation, and every RPC handler fed arbitrary bytes as its request
// message through a real server on loopback TCP.
//
// Invariants checked on every input: no panic (a panic in a handler is
// recovered as INTERNAL, which fails the target), no hang (each input has
// a 10 s bound; the caps below keep inputs to milliseconds), every
// rejection of a decodable request is INVALID_ARGUMENT with
// google.rpc.BadRequest naming fields of the request (or NOT_FOUND for an
// unknown model reference, FAILED_PRECONDITION for thermal properties of
// an unstable model), and every accepted request gives finite numbers.
//
// Seed corpora are in testdata/fuzz/<target>/ (every example crystal, and
// requests built from them); `go test` runs them as ordinary tests,
// `make fuzz-short` fuzzes each target for a few seconds and `make fuzz`
// for FUZZTIME (10 min) each. Regenerate the committed seeds with
//
//	go test ./server -run TestFuzzCorpus -update-fuzz-corpus

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"net"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/proto/examples"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

var updateFuzzCorpus = flag.Bool("update-fuzz-corpus", false, "rewrite the committed fuzz seed corpora in testdata/fuzz")

// fuzzLimits bound the models of FuzzModelJSON so that every input compiles
// in milliseconds (the neighbour search grows with the cell-offset limit
// cubed and the sites squared; see shellSearchCost).
var fuzzLimits = physics.Limits{MaxSites: 8, MaxInteractions: 2000, MaxCellOffset: 8}

// fuzzConfig is the server the RPC targets call: small caps so that every
// accepted request runs in milliseconds.
var fuzzConfig = Config{
	MaxQPoints: 512, MaxSites: 4, MaxTemps: 64, MaxPathPoints: 512, MaxPathCorners: 16,
	MaxDOSBins: 4096, MaxMsgBytes: 1 << 20, StabilityMesh: 4, CacheBytes: 16 << 20,
	MetricsListen: "off",
}

// fuzzInputMax is the largest input considered, bytes.
const fuzzInputMax = 64 << 10

// fieldPath is the shape of a violation's field: dotted proto field names
// with optional [index] parts, e.g. "model.crystal.sites[2].frac[0]".
var fieldPath = regexp.MustCompile(`^[a-z][a-z0-9_]*(\[\d+\])*(\.[a-z][a-z0-9_]*(\[\d+\])*)*$`)

// checkFieldNames fails unless every violation names a field that exists
// in msg's schema: each dotted part is a field of the message reached so
// far (a description may explain more, but the path must lead somewhere).
func checkFieldNames(t *testing.T, md protoreflect.MessageDescriptor, fields []string) {
	t.Helper()
	if len(fields) == 0 {
		t.Fatal("a rejection with no field violation")
	}
	for _, f := range fields {
		if !fieldPath.MatchString(f) {
			t.Fatalf("violation field %q is not a field path", f)
		}
		d := md
		for _, part := range strings.Split(f, ".") {
			name, _, _ := strings.Cut(part, "[")
			if d == nil {
				t.Fatalf("violation field %q: %q is below a scalar field", f, name)
			}
			fd := d.Fields().ByName(protoreflect.Name(name))
			if fd == nil {
				t.Fatalf("violation field %q: %s has no field %q", f, d.FullName(), name)
			}
			d = fd.Message()
		}
	}
}

// badRequest returns the field violations of an INVALID_ARGUMENT status,
// failing when a violation has an empty field or description.
func badRequest(t *testing.T, st *status.Status) []string {
	t.Helper()
	var fields []string
	for _, d := range st.Details() {
		br, ok := d.(*errdetails.BadRequest)
		if !ok {
			continue
		}
		for _, v := range br.GetFieldViolations() {
			if v.GetField() == "" || v.GetDescription() == "" {
				t.Fatalf("violation with an empty field or description: %v", v)
			}
			fields = append(fields, v.GetField())
		}
	}
	return fields
}

// fuzzCase is the input being fuzzed, for the known-issue filter of
// finite.
type fuzzCase struct {
	t       *testing.T
	crystal *modegridv1.Crystal // the inline model, if any
}

// finite fails on the first NaN or infinity in xs, unless the input's
// model is one of the known overflowing ones (extremeModel).
func (fc fuzzCase) finite(what string, xs ...float64) {
	fc.t.Helper()
	for i, x := range xs {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			if extremeModel(fc.crystal) {
				fc.t.Skip("known issue: masses or force constants past ±1e100 overflow (reported to the physics owner)")
			}
			fc.t.Fatalf("%s[%d] = %v; an accepted request must give finite numbers", what, i, x)
		}
	}
}

// extremeModel reports whether c has a number far outside any real
// crystal's range that passes validation but breaks the arithmetic (known
// issues, reported to the physics owner in /work/coord/requests.md):
//
//   - a mass, spring constant or force-constant element outside
//     1e-100…1e100 in magnitude (zero allowed for force constants): the
//     mass weighting 1/sqrt(m_i·m_j) is infinite for masses below about
//     1e-154 amu, and k/m past about 1e300 overflows D(q), giving NaN or
//     infinite frequencies;
//   - a fractional coordinate beyond ±1e6: positions lose their digits,
//     a bond's length rounds to 0 and its direction is 0/0 = NaN;
//   - a lattice component beyond 1e100 Å.
func extremeModel(c *modegridv1.Crystal) bool {
	out := func(x float64, zeroOK bool) bool {
		a := math.Abs(x)
		return a > 1e100 || (a < 1e-100 && !(zeroOK && a == 0))
	}
	for _, v := range c.GetLattice() {
		if out(v.GetX(), true) || out(v.GetY(), true) || out(v.GetZ(), true) {
			return true
		}
	}
	for _, s := range c.GetSites() {
		if out(s.GetMassAmu(), false) {
			return true
		}
		for _, x := range s.GetFrac() {
			if math.Abs(x) > 1e6 {
				return true
			}
		}
	}
	for _, s := range c.GetSprings() {
		if out(s.GetKLong(), true) || out(s.GetKTrans(), true) {
			return true
		}
	}
	for _, s := range c.GetShells() {
		if out(s.GetKLong(), true) || out(s.GetKTrans(), true) {
			return true
		}
	}
	for _, b := range c.GetBlocks() {
		for _, x := range b.GetPhi() {
			if out(x, true) {
				return true
			}
		}
	}
	return false
}

// withinTime runs fn and fails the test if it has not returned after d
// (a hang; fn is left running).
func withinTime(t *testing.T, d time.Duration, what string, fn func()) {
	t.Helper()
	done := make(chan struct{})
	go func() {
		defer close(done)
		fn()
	}()
	timer := time.NewTimer(d)
	defer timer.Stop()
	select {
	case <-done:
	case <-timer.C:
		t.Fatalf("%s did not return within %v", what, d)
	}
}

// FuzzModelJSON: a model file as the client reads it (protobuf JSON,
// client.ParseModel), converted at the server's edge and compiled. A
// compilation error is a *physics.ValidationError whose every violation
// names a field of modegrid.v1.Crystal and becomes INVALID_ARGUMENT with
// BadRequest details; an accepted model has a hash, a reproducible one,
// and finite frequencies at Γ, a zone-boundary point and a generic point
// and on a coarse stability grid.
func FuzzModelJSON(f *testing.F) {
	crystal := (&modegridv1.Crystal{}).ProtoReflect().Descriptor()
	f.Fuzz(func(t *testing.T, b []byte) {
		if len(b) > fuzzInputMax {
			return
		}
		var c modegridv1.Crystal
		if protojson.Unmarshal(b, &c) != nil {
			return // not a model file: the client's ParseModel reports it
		}
		fc := fuzzCase{t: t, crystal: &c}
		sumRule := len(b)%2 == 1 // both settings, deterministically per input
		var m *physics.Model
		var err error
		withinTime(t, 10*time.Second, "Compile", func() {
			m, err = physics.Compile(crystalFromProto(&c), physics.Options{EnforceSumRule: sumRule, Limits: fuzzLimits})
		})
		if err != nil {
			ve, ok := err.(*physics.ValidationError)
			if !ok || len(ve.Violations) == 0 {
				t.Fatalf("Compile: %v (%T); want a *physics.ValidationError with violations", err, err)
			}
			var fields []string
			for _, v := range ve.Violations {
				if v.Description == "" {
					t.Fatalf("violation %q without a description", v.Field)
				}
				fields = append(fields, v.Field)
			}
			checkFieldNames(t, crystal, fields)
			st := status.Convert(invalidArgument("model.crystal", ve.Violations))
			if st.Code() != codes.InvalidArgument || len(badRequest(t, st)) != len(ve.Violations) {
				t.Fatalf("status %v; want INVALID_ARGUMENT with %d field violations", st, len(ve.Violations))
			}
			return
		}
		if !isHash(m.Hash()) {
			t.Fatalf("hash %q is not 64 hex digits", m.Hash())
		}
		again, err := physics.Compile(crystalFromProto(&c), physics.Options{EnforceSumRule: sumRule, Limits: fuzzLimits})
		if err != nil || again.Hash() != m.Hash() {
			t.Fatalf("compiling again: %v, hash %s; want %s", err, again.Hash(), m.Hash())
		}
		for _, q := range [][3]float64{{}, {0.5, 0.5, 0.5}, {0.13, -0.29, 0.41}} {
			for k := m.Dim(); k < 3; k++ {
				q[k] = 0
			}
			fc.finite(fmt.Sprintf("frequencies at %v", q), m.FrequenciesTHz(q)...)
		}
		ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		defer cancel()
		lo, hi, _, err := m.Stability(ctx, 3)
		if err != nil {
			t.Fatalf("Stability: %v", err)
		}
		fc.finite("stability range", lo, hi)
	})
}

// rawCodec sends a request's bytes exactly as given (the server decodes
// them with its own codec) and decodes responses as protobuf.
type rawCodec struct{}

// rawRequest is a request message as bytes.
type rawRequest []byte

func (rawCodec) Marshal(v any) ([]byte, error) { return []byte(v.(rawRequest)), nil }
func (rawCodec) Unmarshal(b []byte, v any) error {
	return proto.Unmarshal(b, v.(proto.Message))
}
func (rawCodec) Name() string { return "proto" }

// fuzzServer is the server of the RPC targets, one per fuzzing process.
type fuzzServer struct {
	srv  *Server
	conn *grpc.ClientConn
}

// newFuzzServer starts a server with fuzzConfig on loopback, warmed with
// every example crystal so that seeds may refer to them by hash.
func newFuzzServer(f *testing.F) *fuzzServer {
	f.Helper()
	srv, err := New(fuzzConfig)
	if err != nil {
		f.Fatal(err)
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		f.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- srv.Serve(lis) }()
	conn, err := grpc.NewClient(lis.Addr().String(), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		f.Fatal(err)
	}
	f.Cleanup(func() {
		conn.Close()
		ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		defer cancel()
		srv.Shutdown(ctx)
		<-done
	})
	api := modegridv1.NewModegridServiceClient(conn)
	for _, name := range examples.Names() {
		c := example(f, name)
		if len(c.GetSites()) > fuzzConfig.MaxSites {
			continue
		}
		ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		_, err := api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: inline(c)})
		cancel()
		if err != nil {
			f.Fatalf("warming %s: %v", name, err)
		}
	}
	return &fuzzServer{srv: srv, conn: conn}
}

// shellSearchBudget bounds the estimated work of the neighbour search of
// a fuzzed inline model (site pairs × cells examined, as physics.Compile
// does it). The search has no bound of its own yet (reported to the
// physics owner in /work/coord/requests.md): a model of 64 sites with
// shell 20 takes minutes and tens of GB. Inputs above the budget are
// skipped so that fuzzing measures everything else.
const shellSearchBudget = 2e6

// shellSearchCost estimates the pair-distance evaluations physics.Compile
// makes for c's shells in its first search radius (1.5 × the longest
// lattice vector × the shell number), with the default cell-offset limit.
func shellSearchCost(c *modegridv1.Crystal) float64 {
	d := len(c.GetLattice())
	if d < 1 || d > 3 || len(c.GetShells()) == 0 {
		return 0
	}
	var a [3][3]float64
	maxLen := 0.0
	for k, v := range c.GetLattice() {
		a[k] = [3]float64{v.GetX(), v.GetY(), v.GetZ()}
		maxLen = math.Max(maxLen, math.Sqrt(a[k][0]*a[k][0]+a[k][1]*a[k][1]+a[k][2]*a[k][2]))
	}
	// |b_k|/2π = sqrt((G⁻¹)_kk), G the Gram matrix of the lattice vectors.
	var g [3][3]float64
	for i := range d {
		for j := range d {
			g[i][j] = a[i][0]*a[j][0] + a[i][1]*a[j][1] + a[i][2]*a[j][2]
		}
	}
	inv := invertGram(g, d)
	count := map[string]float64{}
	for _, s := range c.GetSites() {
		count[s.GetLabel()]++
	}
	total := 0.0
	for _, sh := range c.GetShells() {
		radius := 1.5 * maxLen * float64(sh.GetShell())
		cellsN := 1.0
		for k := range d {
			r := math.Ceil(radius*math.Sqrt(math.Abs(inv[k][k]))) + 1
			if !(r <= physics.DefaultMaxCellOffset) {
				r = physics.DefaultMaxCellOffset
			}
			cellsN *= 2*r + 1
		}
		total += cellsN * count[sh.GetFromLabel()] * count[sh.GetToLabel()]
	}
	return total
}

// invertGram inverts the leading d×d block of g (zeros when singular: the
// model is then rejected by validation before any search).
func invertGram(g [3][3]float64, d int) [3][3]float64 {
	var inv [3][3]float64
	switch d {
	case 1:
		if g[0][0] != 0 {
			inv[0][0] = 1 / g[0][0]
		}
	case 2:
		det := g[0][0]*g[1][1] - g[0][1]*g[1][0]
		if det != 0 {
			inv[0][0], inv[1][1] = g[1][1]/det, g[0][0]/det
		}
	case 3:
		det := g[0][0]*(g[1][1]*g[2][2]-g[1][2]*g[2][1]) - g[0][1]*(g[1][0]*g[2][2]-g[1][2]*g[2][0]) + g[0][2]*(g[1][0]*g[2][1]-g[1][1]*g[2][0])
		if det != 0 {
			inv[0][0] = (g[1][1]*g[2][2] - g[1][2]*g[2][1]) / det
			inv[1][1] = (g[0][0]*g[2][2] - g[0][2]*g[2][0]) / det
			inv[2][2] = (g[0][0]*g[1][1] - g[0][1]*g[1][0]) / det
		}
	}
	return inv
}

// rpcTarget describes one RPC for fuzzRPC.
type rpcTarget struct {
	method string                          // full method name
	req    func() proto.Message            // a new request message
	stream bool                            // server-streaming (ComputeModes)
	check  func(fuzzCase, []proto.Message) // invariants of an accepted call's responses
	// allowed codes besides OK and INVALID_ARGUMENT.
	allowed []codes.Code
}

// fuzzRPC fuzzes one RPC: the input bytes are sent as the request
// message. The seeds are the committed corpus (TestFuzzCorpus).
func fuzzRPC(f *testing.F, tg rpcTarget) {
	fs := newFuzzServer(f)
	reqDesc := tg.req().ProtoReflect().Descriptor()
	f.Fuzz(func(t *testing.T, b []byte) {
		if len(b) > fuzzInputMax {
			return
		}
		req := tg.req()
		decodable := proto.Unmarshal(b, req) == nil
		fc := fuzzCase{t: t}
		if r, ok := req.(interface {
			GetModel() *modegridv1.ModelSource
		}); ok && decodable {
			fc.crystal = r.GetModel().GetCrystal()
			if shellSearchCost(fc.crystal) > shellSearchBudget {
				t.Skip("neighbour search over the budget (known, see shellSearchBudget)")
			}
		}
		ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		defer cancel()
		var resps []proto.Message
		var err error
		if tg.stream {
			err = callStream(ctx, fs.conn, tg, b, &resps)
		} else {
			resp := respFor(tg.method)
			err = fs.conn.Invoke(ctx, tg.method, rawRequest(b), resp, grpc.ForceCodec(rawCodec{}))
			if err == nil {
				resps = append(resps, resp)
			}
		}
		st := status.Convert(err)
		switch {
		case st.Code() == codes.OK:
			if !decodable {
				t.Fatal("the server accepted bytes that do not decode as the request")
			}
			tg.check(fc, resps)
		case st.Code() == codes.Internal && !decodable && strings.Contains(st.Message(), "unmarshal"):
			// gRPC's own refusal of bytes that are not the message.
		case st.Code() == codes.InvalidArgument:
			if !decodable {
				t.Fatalf("INVALID_ARGUMENT for undecodable bytes: %v", err)
			}
			checkFieldNames(t, reqDesc, badRequest(t, st))
		case st.Code() == codes.DeadlineExceeded:
			t.Fatalf("no answer within 10 s (a hang): %v", err)
		default:
			for _, c := range tg.allowed {
				if st.Code() == c && decodable {
					return
				}
			}
			t.Fatalf("%s: %v (decodable %v); want OK, INVALID_ARGUMENT with fields, or one of %v", tg.method, err, decodable, tg.allowed)
		}
	})
}

func callStream(ctx context.Context, conn *grpc.ClientConn, tg rpcTarget, b []byte, out *[]proto.Message) error {
	desc := &grpc.StreamDesc{ServerStreams: true}
	cs, err := conn.NewStream(ctx, desc, tg.method, grpc.ForceCodec(rawCodec{}))
	if err != nil {
		return err
	}
	if err := cs.SendMsg(rawRequest(b)); err != nil {
		return err
	}
	if err := cs.CloseSend(); err != nil {
		return err
	}
	for {
		m := &modegridv1.ComputeModesResponse{}
		if err := cs.RecvMsg(m); err != nil {
			if errors.Is(err, io.EOF) {
				return nil
			}
			return err
		}
		*out = append(*out, m)
	}
}

func respFor(method string) proto.Message {
	switch method {
	case modegridv1.ModegridService_CheckModel_FullMethodName:
		return &modegridv1.CheckModelResponse{}
	case modegridv1.ModegridService_ComputeDispersion_FullMethodName:
		return &modegridv1.ComputeDispersionResponse{}
	case modegridv1.ModegridService_ComputeDos_FullMethodName:
		return &modegridv1.ComputeDosResponse{}
	case modegridv1.ModegridService_ComputeThermal_FullMethodName:
		return &modegridv1.ComputeThermalResponse{}
	}
	panic("server fuzz: no response type for " + method)
}

// fuzzModels are the example crystals the server accepts under fuzzConfig,
// inline and by hash.
func fuzzModels(tb testing.TB) []*modegridv1.ModelSource {
	var out []*modegridv1.ModelSource
	for _, name := range examples.Names() {
		c := example(tb, name)
		if len(c.GetSites()) > fuzzConfig.MaxSites {
			continue
		}
		m, err := physics.Compile(crystalFromProto(c), physics.Options{})
		if err != nil {
			tb.Fatal(err)
		}
		out = append(out, inline(c), byHash(m.Hash()))
	}
	return out
}

// dimOf is the dimensionality of an example model source (3 for a hash).
func dimOf(src *modegridv1.ModelSource) int {
	if c := src.GetCrystal(); c != nil {
		return len(c.GetLattice())
	}
	return 3
}

func meshOf(d int, n uint32) []uint32 {
	m := make([]uint32, d)
	for i := range m {
		m[i] = n
	}
	return m
}

func checkSeeds(tb testing.TB) []proto.Message {
	var out []proto.Message
	for _, src := range fuzzModels(tb) {
		out = append(out, &modegridv1.CheckModelRequest{Model: src})
	}
	bad := &modegridv1.Crystal{Lattice: []*modegridv1.Vec3{{X: 1}, {X: 2}}, Sites: []*modegridv1.Site{{Label: "A", MassAmu: -1, Frac: []float64{0}}},
		Springs: []*modegridv1.Spring{{From: 0, To: 3, Cell: []int32{1}}}, Shells: []*modegridv1.Shell{{FromLabel: "A", ToLabel: "B", Shell: 30}}}
	many := &modegridv1.Crystal{Lattice: []*modegridv1.Vec3{{X: 3}}}
	for i := range 6 { // over fuzzConfig.MaxSites
		many.Sites = append(many.Sites, &modegridv1.Site{Label: "A", MassAmu: 1, Frac: []float64{float64(i) / 6}})
	}
	extreme := &modegridv1.Crystal{Lattice: []*modegridv1.Vec3{{X: 1e-3}}, Polarizations: 1, // tiny mass, stiff spring
		Sites:   []*modegridv1.Site{{Label: "A", MassAmu: 1e-300, Frac: []float64{0}}},
		Springs: []*modegridv1.Spring{{From: 0, To: 0, Cell: []int32{1}, KLong: 1e300}}}
	return append(out, &modegridv1.CheckModelRequest{Model: inline(bad)}, &modegridv1.CheckModelRequest{Model: byHash(strings.Repeat("0", 64))},
		&modegridv1.CheckModelRequest{Model: inline(many)}, &modegridv1.CheckModelRequest{Model: inline(extreme)},
		&modegridv1.CheckModelRequest{Model: byHash("NOT-A-HASH")}, &modegridv1.CheckModelRequest{})
}

func modesSeeds(tb testing.TB) []proto.Message {
	var out []proto.Message
	for _, src := range fuzzModels(tb) {
		d := dimOf(src)
		out = append(out,
			&modegridv1.ComputeModesRequest{Model: src, Qpoints: qlist(0, 0.25, 0.5), Eigenvectors: true, GroupVelocities: true},
			&modegridv1.ComputeModesRequest{Model: src, Qpoints: mpGrid(true, meshOf(d, 3)...), Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV, ChunkSize: 2},
			&modegridv1.ComputeModesRequest{Model: src, Qpoints: cells(meshOf(d, 4)...), Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1})
	}
	chain := inline(example(tb, "chain"))
	nan := &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: []*modegridv1.QPoint{{Q1: math.NaN()}, {Q1: 0.1, Q3: 0.2}, {Q1: math.Inf(-1)}}}}}
	return append(out,
		&modegridv1.ComputeModesRequest{Model: chain, Qpoints: nan, Unit: 17},
		&modegridv1.ComputeModesRequest{Model: chain, Qpoints: mpGrid(false, 1<<22, 1<<22, 1<<22)}, // the int-overflow regression
		&modegridv1.ComputeModesRequest{Model: chain, Qpoints: cells(0, 2)},
		&modegridv1.ComputeModesRequest{Model: chain, Qpoints: qlist(make([]float64, 600)...)}) // over the cap
}

func dispersionSeeds(tb testing.TB) []proto.Message {
	var out []proto.Message
	for _, src := range fuzzModels(tb) {
		path := []*modegridv1.PathPoint{{Label: "G", Q: &modegridv1.QPoint{}}, {Label: "X", Q: &modegridv1.QPoint{Q1: 0.5}}, {Label: "G"}, {Label: "Y", Q: &modegridv1.QPoint{Q1: 0.25}, BreakBefore: true}}
		out = append(out,
			&modegridv1.ComputeDispersionRequest{Model: src, Path: path, Points: 40, ConnectBranches: true},
			&modegridv1.ComputeDispersionRequest{Model: src, Path: path[:2], SpacingInvA: 0.05, Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_RAD_PER_S})
	}
	chain := inline(example(tb, "chain"))
	var long []*modegridv1.PathPoint
	for i := range 40 { // over fuzzConfig.MaxPathCorners
		long = append(long, &modegridv1.PathPoint{Label: "P", Q: &modegridv1.QPoint{Q1: float64(i) / 80}})
	}
	return append(out,
		&modegridv1.ComputeDispersionRequest{Model: chain, Path: long},
		&modegridv1.ComputeDispersionRequest{Model: chain, Path: []*modegridv1.PathPoint{{Label: "W"}, {Label: "G", Q: &modegridv1.QPoint{Q2: 1}}}, SpacingInvA: math.NaN()},
		&modegridv1.ComputeDispersionRequest{Model: chain, Path: []*modegridv1.PathPoint{{Label: "G"}, {Label: "X"}}, SpacingInvA: 1e-300},
		&modegridv1.ComputeDispersionRequest{Model: chain, Path: []*modegridv1.PathPoint{{Label: "G"}, {Label: "G"}}, Points: 2})
}

func dosSeeds(tb testing.TB) []proto.Message {
	var out []proto.Message
	for _, src := range fuzzModels(tb) {
		d := dimOf(src)
		out = append(out,
			&modegridv1.ComputeDosRequest{Model: src, Qpoints: mpGrid(false, meshOf(d, 6)...), PerSite: true},
			&modegridv1.ComputeDosRequest{Model: src, Qpoints: mpGrid(true, meshOf(d, 5)...), Method: modegridv1.DosMethod_DOS_METHOD_GAUSSIAN, Width: 0.2, Min: -1, Max: 12, Step: 0.05, Imaginary: modegridv1.ImaginaryModes_IMAGINARY_MODES_NEGATIVE_AXIS},
			&modegridv1.ComputeDosRequest{Model: src, Qpoints: cells(meshOf(d, 4)...), Method: modegridv1.DosMethod_DOS_METHOD_HISTOGRAM, Step: 0.5})
	}
	chain := inline(example(tb, "chain"))
	return append(out,
		&modegridv1.ComputeDosRequest{Model: chain, Qpoints: mpGrid(false, 8), Step: 1e-9},                   // auto window, tiny step
		&modegridv1.ComputeDosRequest{Model: chain, Qpoints: mpGrid(false, 8), Min: -1e308, Max: 1e308},      // huge window
		&modegridv1.ComputeDosRequest{Model: chain, Qpoints: qlist(0.1), Width: -1, Method: 9, Imaginary: 7}, // everything wrong
		&modegridv1.ComputeDosRequest{Model: chain, Qpoints: mpGrid(false, 1), Method: modegridv1.DosMethod_DOS_METHOD_GAUSSIAN, Width: 1e-300})
}

func thermalSeeds(tb testing.TB) []proto.Message {
	var out []proto.Message
	for _, src := range fuzzModels(tb) {
		d := dimOf(src)
		out = append(out,
			&modegridv1.ComputeThermalRequest{Model: src, Qpoints: mpGrid(true, meshOf(d, 4)...), TemperaturesK: []float64{0, 10, 300}, Msd: true},
			&modegridv1.ComputeThermalRequest{Model: src, Qpoints: mpGrid(false, meshOf(d, 5)...), Range: &modegridv1.TemperatureRange{StartK: 5, StopK: 500, StepK: 50},
				Route: modegridv1.ThermalRoute_THERMAL_ROUTE_DOS_INTEGRAL, AllowUnstable: true})
	}
	chain := inline(example(tb, "chain"))
	return append(out,
		&modegridv1.ComputeThermalRequest{Model: chain, Qpoints: mpGrid(false, 8), Range: &modegridv1.TemperatureRange{StopK: 1e6, StepK: 1e-300}}, // the int-overflow regression
		&modegridv1.ComputeThermalRequest{Model: chain, Qpoints: mpGrid(false, 8), TemperaturesK: []float64{-1, math.NaN(), 2e6}},
		&modegridv1.ComputeThermalRequest{Model: chain, Qpoints: mpGrid(false, 8), TemperaturesK: []float64{1e-300, 1e6}, Msd: true},
		&modegridv1.ComputeThermalRequest{Model: chain, Qpoints: mpGrid(false, 1), TemperaturesK: []float64{300}, Route: modegridv1.ThermalRoute_THERMAL_ROUTE_DOS_INTEGRAL})
}

func FuzzCheckModel(f *testing.F) {
	fuzzRPC(f, rpcTarget{
		method: modegridv1.ModegridService_CheckModel_FullMethodName,
		req:    func() proto.Message { return &modegridv1.CheckModelRequest{} },
		check: func(fc fuzzCase, rs []proto.Message) {
			t := fc.t
			r := rs[0].(*modegridv1.CheckModelResponse)
			if !r.GetValid() {
				if len(r.GetViolations()) == 0 {
					t.Fatal("an invalid model without violations")
				}
				var fields []string
				for _, v := range r.GetViolations() {
					if v.GetDescription() == "" {
						t.Fatalf("violation %q without a description", v.GetField())
					}
					fields = append(fields, v.GetField())
				}
				checkFieldNames(t, (&modegridv1.Crystal{}).ProtoReflect().Descriptor(), fields)
				return
			}
			if !isHash(r.GetModelHash()) {
				t.Fatalf("valid model with hash %q", r.GetModelHash())
			}
			fc.finite("check", r.GetMinFrequencyThz(), r.GetMaxFrequencyThz(), r.GetSumRuleViolationEvPerA2())
		},
		allowed: []codes.Code{codes.NotFound},
	})
}

func FuzzComputeModes(f *testing.F) {
	fuzzRPC(f, rpcTarget{
		method: modegridv1.ModegridService_ComputeModes_FullMethodName,
		req:    func() proto.Message { return &modegridv1.ComputeModesRequest{} },
		stream: true,
		check: func(fc fuzzCase, rs []proto.Message) {
			t := fc.t
			next := 0
			for _, m := range rs {
				r := m.(*modegridv1.ComputeModesResponse)
				if int(r.GetOffset()) != next {
					t.Fatalf("chunk at offset %d; want %d", r.GetOffset(), next)
				}
				for _, p := range r.GetPoints() {
					fc.finite("frequencies", p.GetFrequencies()...)
					fc.finite("eigenvectors", p.GetEigenvectors()...)
					fc.finite("group velocities", p.GetGroupVelocitiesKmS()...)
					fc.finite("q and weight", p.GetQ().GetQ1(), p.GetQ().GetQ2(), p.GetQ().GetQ3(), p.GetWeight())
				}
				next += len(r.GetPoints())
				if int(r.GetTotal()) < next {
					t.Fatalf("%d points streamed of a total of %d", next, r.GetTotal())
				}
			}
			if len(rs) > 0 && int(rs[0].(*modegridv1.ComputeModesResponse).GetTotal()) != next {
				t.Fatalf("stream ended after %d of %d points", next, rs[0].(*modegridv1.ComputeModesResponse).GetTotal())
			}
		},
		allowed: []codes.Code{codes.NotFound},
	})
}

func FuzzComputeDispersion(f *testing.F) {
	fuzzRPC(f, rpcTarget{
		method: modegridv1.ModegridService_ComputeDispersion_FullMethodName,
		req:    func() proto.Message { return &modegridv1.ComputeDispersionRequest{} },
		check: func(fc fuzzCase, rs []proto.Message) {
			t := fc.t
			r := rs[0].(*modegridv1.ComputeDispersionResponse)
			last := 0.0
			for i, s := range r.GetSamples() {
				fc.finite("frequencies", s.GetFrequencies()...)
				fc.finite("distance", s.GetDistanceInvA())
				if s.GetDistanceInvA() < last {
					t.Fatalf("sample %d: distance %v after %v; want non-decreasing", i, s.GetDistanceInvA(), last)
				}
				last = s.GetDistanceInvA()
			}
			if len(r.GetSamples()) > fuzzConfig.MaxPathPoints+fuzzConfig.MaxPathCorners {
				t.Fatalf("%d samples; the cap is %d", len(r.GetSamples()), fuzzConfig.MaxPathPoints)
			}
		},
		allowed: []codes.Code{codes.NotFound},
	})
}

func FuzzComputeDos(f *testing.F) {
	fuzzRPC(f, rpcTarget{
		method: modegridv1.ModegridService_ComputeDos_FullMethodName,
		req:    func() proto.Message { return &modegridv1.ComputeDosRequest{} },
		check: func(fc fuzzCase, rs []proto.Message) {
			t := fc.t
			r := rs[0].(*modegridv1.ComputeDosResponse)
			n := len(r.GetFrequencies())
			if n == 0 || n > fuzzConfig.MaxDOSBins || len(r.GetDos()) != n || len(r.GetIntegrated()) != n {
				t.Fatalf("%d frequencies, %d dos, %d integrated; want equal, 1…%d", n, len(r.GetDos()), len(r.GetIntegrated()), fuzzConfig.MaxDOSBins)
			}
			fc.finite("frequencies", r.GetFrequencies()...)
			fc.finite("dos", r.GetDos()...)
			fc.finite("integrated", r.GetIntegrated()...)
			fc.finite("width, states", r.GetWidth(), r.GetStatesPerCell())
			for _, p := range append(r.GetSites(), r.GetLabels()...) {
				fc.finite("projected dos", p.GetDos()...)
			}
		},
		allowed: []codes.Code{codes.NotFound},
	})
}

func FuzzComputeThermal(f *testing.F) {
	fuzzRPC(f, rpcTarget{
		method: modegridv1.ModegridService_ComputeThermal_FullMethodName,
		req:    func() proto.Message { return &modegridv1.ComputeThermalRequest{} },
		check: func(fc fuzzCase, rs []proto.Message) {
			r := rs[0].(*modegridv1.ComputeThermalResponse)
			fc.finite("zero point, elastic θ", r.GetZeroPointEnergyEv(), r.GetZeroPointEnergyKjPerMol(), r.GetDebyeTemperatureElasticK())
			for _, p := range r.GetPoints() {
				fc.finite("thermal point", p.GetTemperatureK(), p.GetInternalEnergyEv(), p.GetFreeEnergyEv(), p.GetEntropyEvPerK(),
					p.GetHeatCapacityEvPerK(), p.GetInternalEnergyKjPerMol(), p.GetFreeEnergyKjPerMol(), p.GetEntropyJPerMolK(),
					p.GetHeatCapacityJPerMolK(), p.GetDebyeTemperatureK())
				for _, d := range p.GetDisplacements() {
					fc.finite("displacements", append(d.GetUA2(), d.GetUIsoA2(), d.GetBA2())...)
				}
			}
		},
		allowed: []codes.Code{codes.NotFound, codes.FailedPrecondition},
	})
}

// corpusTargets maps each server fuzz target to its committed seeds.
func corpusTargets(tb testing.TB) map[string][][]byte {
	out := map[string][][]byte{}
	for _, name := range examples.Names() {
		b, err := examples.JSON(name)
		if err != nil {
			tb.Fatal(err)
		}
		out["FuzzModelJSON"] = append(out["FuzzModelJSON"], b)
	}
	for target, seeds := range map[string][]proto.Message{
		"FuzzCheckModel": checkSeeds(tb), "FuzzComputeModes": modesSeeds(tb), "FuzzComputeDispersion": dispersionSeeds(tb),
		"FuzzComputeDos": dosSeeds(tb), "FuzzComputeThermal": thermalSeeds(tb),
	} {
		for _, s := range seeds {
			b, err := proto.MarshalOptions{Deterministic: true}.Marshal(s)
			if err != nil {
				tb.Fatal(err)
			}
			out[target] = append(out[target], b)
		}
	}
	return out
}

// corpusFile is the content of a seed file in the format of go test's
// fuzzing corpus (one []byte argument).
func corpusFile(b []byte) string { return fmt.Sprintf("go test fuzz v1\n[]byte(%q)\n", b) }

// TestFuzzCorpus: the committed seed corpora hold every example crystal
// and the request seeds built from them, byte for byte (so a changed
// example is a changed seed); -update-fuzz-corpus rewrites them.
func TestFuzzCorpus(t *testing.T) {
	for target, seeds := range corpusTargets(t) {
		dir := filepath.Join("testdata", "fuzz", target)
		for i, b := range seeds {
			name := filepath.Join(dir, fmt.Sprintf("seed-%02d", i))
			if target == "FuzzModelJSON" {
				name = filepath.Join(dir, "example-"+examples.Names()[i])
			}
			want := corpusFile(b)
			if *updateFuzzCorpus {
				if err := os.MkdirAll(dir, 0o755); err != nil {
					t.Fatal(err)
				}
				if err := os.WriteFile(name, []byte(want), 0o644); err != nil {
					t.Fatal(err)
				}
				continue
			}
			got, err := os.ReadFile(name)
			if err != nil {
				t.Errorf("%v (run go test ./server -run TestFuzzCorpus -update-fuzz-corpus)", err)
				continue
			}
			if string(got) != want {
				t.Errorf("%s is stale (run go test ./server -run TestFuzzCorpus -update-fuzz-corpus)", name)
			}
		}
	}
}
