package server

import (
	"context"
	"crypto/sha256"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/physics"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// uploadInput is a fuzz input of FuzzUploadModel: the first byte says how
// the stream is sent, the rest is the payload.
//
//	bit 0    send the payload's SHA-256
//	bit 1    with bit 0: flip a bit of it
//	bits 2–3 declared size: exact, one byte short, one byte over, 0
//	bits 4–5 chunk size: 1, 7, 64 or 4096 bytes (at least 1/256 of the payload)
//	bit 6    enforce_sum_rule
//	bit 7    symmetry_tolerance_a = 1e-3 and symmetrize
type uploadInput struct {
	ctl     byte
	payload []byte
}

func parseUploadInput(b []byte) uploadInput {
	if len(b) == 0 {
		return uploadInput{}
	}
	return uploadInput{ctl: b[0], payload: b[1:]}
}

// header is the header the input declares and honest reports whether it
// declares the payload as it is (size, digest).
func (in uploadInput) header() (h *modegridv1.UploadModelHeader, honest bool) {
	h = &modegridv1.UploadModelHeader{SizeBytes: uint64(len(in.payload)), Model: in.options()}
	honest = true
	if in.ctl&1 != 0 {
		sum := sha256.Sum256(in.payload)
		if in.ctl&2 != 0 {
			sum[0] ^= 1
			honest = false
		}
		h.Sha256 = sum[:]
	}
	switch (in.ctl >> 2) & 3 {
	case 1:
		h.SizeBytes--
		honest = false
	case 2:
		h.SizeBytes++
		honest = false
	case 3:
		h.SizeBytes = 0
		honest = false
	}
	return h, honest && len(in.payload) > 0
}

func (in uploadInput) options() *modegridv1.ModelSource {
	o := &modegridv1.ModelSource{EnforceSumRule: in.ctl&(1<<6) != 0}
	if in.ctl&(1<<7) != 0 {
		o.SymmetryToleranceA, o.Symmetrize = 1e-3, true
	}
	return o
}

// chunk is the chunk size, at least 1/256 of the payload (so that no
// input takes more than about 256 messages).
func (in uploadInput) chunk() int {
	return max([4]int{1, 7, 64, 4096}[(in.ctl>>4)&3], len(in.payload)/256)
}

func (in uploadInput) bytes() []byte { return append([]byte{in.ctl}, in.payload...) }

// uploadSeeds are the seed inputs of FuzzUploadModel: every example
// crystal the fuzz server accepts and a supercell set, each sent honestly
// in several ways, and the stream's faults (sizes, digest, payload).
func uploadSeeds(tb testing.TB) [][]byte {
	var payloads [][]byte
	for _, src := range fuzzModels(tb) {
		if c := src.GetCrystal(); c != nil {
			b, err := proto.MarshalOptions{Deterministic: true}.Marshal(c)
			if err != nil {
				tb.Fatal(err)
			}
			payloads = append(payloads, b)
		}
	}
	set := example(tb, "diatomic-chain")
	set.Springs = nil
	set.SupercellFc = &modegridv1.SupercellForceConstants{Matrix: []int32{2}, PrimitiveAtoms: []uint32{0, 1}}
	for i := range 4 {
		set.SupercellFc.Atoms = append(set.SupercellFc.Atoms, &modegridv1.SupercellAtom{Position: []float64{2.5 * float64(i), 0, 0}})
	}
	for s := range 2 { // rows of atoms 0 and 1: springs K = 2 eV/Å² to both neighbours
		row := make([]float64, 36)
		row[9*s], row[9*((s+1)%4)], row[9*((s+3)%4)] = 4, -2, -2
		set.SupercellFc.Phi = append(set.SupercellFc.Phi, row...)
	}
	b, err := proto.MarshalOptions{Deterministic: true}.Marshal(set)
	if err != nil {
		tb.Fatal(err)
	}
	payloads = append(payloads, b)
	var out [][]byte
	for _, p := range payloads {
		// With the digest: 4096-byte chunks; 7-byte chunks and the sum
		// rule; 64-byte chunks and symmetrisation.
		for _, ctl := range []byte{0x31, 0x51, 0xa1} {
			out = append(out, uploadInput{ctl: ctl, payload: p}.bytes())
		}
	}
	chain := payloads[0]
	for _, ctl := range []byte{0x03, 0x05, 0x09, 0x0c, 0x20} { // bad digest, short, over, size 0, no digest
		out = append(out, uploadInput{ctl: ctl, payload: chain}.bytes())
	}
	return append(out, uploadInput{ctl: 0x01, payload: []byte{0xff, 0xff, 0xff, 0x0f}}.bytes(), []byte{0x01})
}

// FuzzUploadModel: arbitrary payloads, declared honestly or not, sent in
// chunks through a real UploadModel stream on loopback. An upload is
// accepted only when the header declares the payload as it is, and then
// gets the hash the compile of an inline request with the same model and
// options gives; every refusal is INVALID_ARGUMENT naming fields that exist
// (under "model." those of an inline request's ModelSource, the rest of
// UploadModelRequest); nothing panics or hangs, and no upload is left
// holding a slot or memory.
func FuzzUploadModel(f *testing.F) {
	fs := newFuzzServer(f)
	api := modegridv1.NewModegridServiceClient(fs.conn)
	streamDesc := (&modegridv1.UploadModelRequest{}).ProtoReflect().Descriptor()
	inlineDesc := (&modegridv1.CheckModelRequest{}).ProtoReflect().Descriptor()
	f.Fuzz(func(t *testing.T, b []byte) {
		if len(b) > fuzzInputMax {
			return
		}
		in := parseUploadInput(b)
		h, honest := in.header()
		ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		defer cancel()
		resp, err := rawUpload(ctx, api, h, in.payload, in.chunk())
		st := status.Convert(err)
		switch st.Code() {
		case codes.OK:
			if !honest {
				t.Fatalf("accepted a stream whose header does not declare its payload (size %d of %d)", h.GetSizeBytes(), len(in.payload))
			}
			checkUploadHash(t, in, resp.GetModelHash())
		case codes.InvalidArgument:
			var model, stream []string
			for _, f := range badRequest(t, st) {
				if strings.HasPrefix(f, "model.") || f == "model" {
					model = append(model, f)
				} else {
					stream = append(stream, f)
				}
			}
			if len(model) > 0 {
				checkFieldNames(t, inlineDesc, model)
			}
			if len(stream) > 0 {
				checkFieldNames(t, streamDesc, stream)
			}
		default:
			t.Fatalf("upload: %v; want OK or INVALID_ARGUMENT with fields", err)
		}
		svc := fs.srv.svc
		waitFor(t, "the upload released", func() bool { return len(svc.uploads.slots) == 0 && svc.budget.inUse.Load() == 0 })
	})
}

// checkUploadHash fails unless hash is the one the server's compile of the
// same model and options, the path of an inline request, gives (in
// process: an inline CheckModel would add its stability scan, whose
// eigensolver is not under test here).
func checkUploadHash(t *testing.T, in uploadInput, hash string) {
	t.Helper()
	var c modegridv1.Crystal
	if err := proto.Unmarshal(in.payload, &c); err != nil {
		t.Fatalf("accepted a payload that does not decode: %v", err)
	}
	src := in.options()
	src.Source = &modegridv1.ModelSource_Crystal{Crystal: &c}
	norm, raw, _, err := inlineKey(src)
	if err != nil {
		t.Fatal(err)
	}
	e, err := compileEntry(context.Background(), norm, raw, physics.Limits{MaxSites: fuzzConfig.MaxSites}, 0)
	if err != nil {
		t.Fatalf("an uploaded model does not compile inline: %v", err)
	}
	if e.hash != hash {
		t.Fatalf("upload hash %s; inline compile %s", hash, e.hash)
	}
}
