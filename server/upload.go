package server

// Models by upload. A model larger than the message cap cannot go inline;
// UploadModel receives it as a client stream (a header, then chunks of
// its protobuf binary), compiles it exactly as an inline model (the same
// validation, fold, pre-compile bound, compile and cache entries, so the
// same model hash) and answers the hash, which every other RPC then takes
// by reference.
//
// Admission, in order, before the payload is read:
//
//   - an upload slot (max-uploads at once; past them RESOURCE_EXHAUSTED at
//     once, no queue: an upload holds a connection's worth of buffers,
//     not a computation);
//   - the header: the declared size against max-upload-bytes and its
//     estimated memory (uploadCost) against the whole memory budget
//     (INVALID_ARGUMENT on header.size_bytes when it could never fit),
//     every other header problem listed with it;
//   - the estimate is then reserved from the budget for the whole call,
//     waiting like a computation (RESOURCE_EXHAUSTED when it stays busy).
//
// While reading, bytes are counted as they arrive: a stream that goes
// past its declared size is refused at the first chunk over it, one that
// ends short of it at its end, and an upload silent for longer than
// upload-idle-timeout is abandoned (DEADLINE_EXCEEDED). The client's own
// deadline or cancellation ends it at once (its receiver stops with the
// stream). Nothing is kept of an upload that did not finish: the payload
// is a local buffer, and only a compiled model enters the cache.

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/durationpb"

	"github.com/materials-lab/modegrid/physics"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// Upload results: the values of the "result" label of
// modegrid_uploads_total. A fixed, small set.
const (
	uploadOK            = "ok"             // compiled and held under its hash
	uploadTooLarge      = "too_large"      // over max-upload-bytes, the memory budget, the compile bound or the model cache
	uploadBusy          = "busy"           // no upload slot, or the memory budget stayed busy
	uploadInvalidStream = "invalid_stream" // a bad header, a stream longer or shorter than declared, a digest that differs
	uploadInvalidModel  = "invalid_model"  // a payload that does not decode, or a model that does not validate
	uploadIdle          = "idle_timeout"   // no message within upload-idle-timeout
	uploadCanceled      = "canceled"       // the client cancelled or passed its deadline
	uploadFailed        = "failed"         // anything else (logged)
)

var uploadResults = []string{uploadOK, uploadTooLarge, uploadBusy, uploadInvalidStream, uploadInvalidModel, uploadIdle, uploadCanceled, uploadFailed}

// uploads bounds and counts the uploads of one Service.
type uploads struct {
	slots    chan struct{} // one token per upload being received
	results  *prometheus.CounterVec
	received prometheus.Counter
}

// newUploads makes the upload slots and registers the upload metrics on
// reg, every result created at 0.
func newUploads(cfg Config, reg prometheus.Registerer) *uploads {
	u := &uploads{slots: make(chan struct{}, cfg.MaxUploads)}
	u.results = prometheus.NewCounterVec(prometheus.CounterOpts{
		Namespace: "modegrid", Name: "uploads_total",
		Help: "UploadModel calls, by result (ok, too_large, busy, invalid_stream, invalid_model, idle_timeout, canceled, failed).",
	}, []string{"result"})
	for _, r := range uploadResults {
		u.results.WithLabelValues(r)
	}
	u.received = prometheus.NewCounter(prometheus.CounterOpts{
		Namespace: "modegrid", Name: "upload_received_bytes_total",
		Help: "Payload bytes received by UploadModel, counted as they arrive (finished or not).",
	})
	reg.MustRegister(u.results, u.received, prometheus.NewGaugeFunc(prometheus.GaugeOpts{
		Namespace: "modegrid", Name: "uploads_in_flight",
		Help: "UploadModel calls being received or compiled now.",
	}, func() float64 { return float64(len(u.slots)) }))
	return u
}

// uploadOverhead is the fixed part of an upload's memory estimate: the
// header, the response, the model's conversion to the engine's types and
// the compiled model's own arrays beyond its blocks (a fraction of a MiB
// at the default caps).
const uploadOverhead = 1 << 20

// uploadCost is the estimated peak memory of an upload of size payload
// bytes: the payload buffer (1×); the decoded message (1×: packed
// doubles, the bulk of any large model, take 8 bytes on the wire and in
// memory); its deterministic serialisation, which keys the compile and is
// the stored model's source (1×); and 1× for the folded blocks and the
// compiled force constants of a model whose size is its blocks. Measured
// with the collector off (growth of MemStats.TotalAlloc from the
// assembled payload to the compiled model), supercell sets of 32, 128 and
// 256 atoms given as N×N blocks (75 KB, 1.2 MB, 4.7 MB) allocate 0.59,
// 4.3 and 15.7 MB: this estimate is 2.3, 1.3 and 1.3 times that. A set
// given as n×N blocks is small on the wire and its fold and compile
// allocate more than 4× its payload (0.2–1.7 MB for 6–44 KB); that work
// is bounded like an inline model's (the pre-compile bound of
// precompile.go, max-sites), not by this estimate.
func uploadCost(size int64) physics.Cost {
	return physics.Cost{Bytes: 4*size + uploadOverhead}
}

// UploadModel receives a model in chunks, compiles it like an inline model
// and answers the hash under which the server holds it.
func (s *Service) UploadModel(stream grpc.ClientStreamingServer[modegridv1.UploadModelRequest, modegridv1.UploadModelResponse]) error {
	ctx := stream.Context()
	resp, result, err := s.uploadModel(ctx, stream)
	s.uploads.results.WithLabelValues(result).Inc()
	if err != nil {
		return s.toStatus(ctx, "UploadModel", err)
	}
	return stream.SendAndClose(resp)
}

// uploadModel is UploadModel before the conversion of errors to
// statuses; result labels the outcome for the metrics.
func (s *Service) uploadModel(ctx context.Context, stream grpc.ClientStreamingServer[modegridv1.UploadModelRequest, modegridv1.UploadModelResponse]) (*modegridv1.UploadModelResponse, string, error) {
	select {
	case s.uploads.slots <- struct{}{}:
		defer func() { <-s.uploads.slots }()
	default:
		return nil, uploadBusy, errUploadsBusy(s.cfg.MaxUploads)
	}
	rx := startReceiver(stream, s.cfg.UploadIdleTimeout)
	defer rx.stop()
	first, err := rx.next(ctx)
	if err != nil {
		return nil, rx.result(err), err
	}
	h, result, err := s.admitUpload(first)
	if err != nil {
		return nil, result, err
	}
	release, err := s.budget.reserve(ctx, uploadCost(int64(h.GetSizeBytes())).Bytes)
	if err != nil {
		return nil, uploadResultOf(ctx, err), err
	}
	defer release()
	payload, result, err := s.receivePayload(ctx, rx, h)
	if err != nil {
		return nil, result, err
	}
	return s.compileUpload(ctx, h, payload)
}

// admitUpload checks the first message of an upload: a header whose
// declared size fits max-upload-bytes and the memory budget, a known
// encoding, a digest of the right length, options as an inline model
// takes them. Every problem is reported at once.
func (s *Service) admitUpload(first *modegridv1.UploadModelRequest) (*modegridv1.UploadModelHeader, string, error) {
	var vs violations
	h := first.GetHeader()
	if h == nil {
		vs.Add("header", "the first message of an upload must carry the header (size_bytes, encoding, the model's options), then the chunks follow")
		return nil, uploadInvalidStream, vs.Err()
	}
	result := uploadInvalidStream
	switch size := h.GetSizeBytes(); {
	case size == 0:
		vs.Add("header.size_bytes", "must be > 0 (the payload's size in bytes)")
	case size > uint64(s.cfg.MaxUploadBytes):
		vs.Add("header.size_bytes", "%d bytes exceed this server's cap max-upload-bytes=%d", size, s.cfg.MaxUploadBytes)
		result = uploadTooLarge
	default:
		if c := uploadCost(int64(size)); c.Bytes > s.budget.total {
			s.budget.refused.WithLabelValues(reasonMemoryNeverFits).Inc()
			vs.Add("header.size_bytes", "receiving, decoding and compiling %s of model takes an estimated %s of memory, over this server's memory budget %s (memory-budget); send a smaller model",
				fmtBytes(int64(size)), fmtBytes(c.Bytes), fmtBytes(s.budget.total))
			result = uploadTooLarge
		}
	}
	switch h.GetEncoding() {
	case modegridv1.ModelEncoding_MODEL_ENCODING_UNSPECIFIED, modegridv1.ModelEncoding_MODEL_ENCODING_PROTOBUF_BINARY:
	default:
		vs.Add("header.encoding", "unknown encoding %d (MODEL_ENCODING_PROTOBUF_BINARY is the one known)", h.GetEncoding())
	}
	if n := len(h.GetSha256()); n != 0 && n != sha256.Size {
		vs.Add("header.sha256", "must be empty or a SHA-256 digest of %d bytes, got %d bytes", sha256.Size, n)
	}
	if h.GetModel().GetSource() != nil {
		vs.Add("header.model", "carries the model's options only: leave crystal and model_hash empty (the model comes in the chunks)")
	}
	checkSymTol(&vs, h.GetModel().GetSymmetryToleranceA())
	if err := vs.Err(); err != nil {
		return nil, result, err
	}
	return h, "", nil
}

// receivePayload reads the chunks that follow the header into one buffer
// of the declared size, refusing a stream longer or shorter than declared
// and a payload whose digest is not the one declared.
func (s *Service) receivePayload(ctx context.Context, rx *receiver, h *modegridv1.UploadModelHeader) ([]byte, string, error) {
	size := int(h.GetSizeBytes())
	buf := make([]byte, 0, size)
	for {
		m, err := rx.next(ctx)
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, rx.result(err), err
		}
		var vs violations
		if m.GetHeader() != nil {
			vs.Add("header", "only the first message of an upload carries the header; the rest are chunks")
			return nil, uploadInvalidStream, vs.Err()
		}
		chunk := m.GetChunk()
		s.uploads.received.Add(float64(len(chunk)))
		if len(chunk) > size-len(buf) {
			vs.Add("chunk", "the stream goes past the %d bytes declared in header.size_bytes (%d received)", size, len(buf)+len(chunk))
			return nil, uploadInvalidStream, vs.Err()
		}
		buf = append(buf, chunk...)
	}
	var vs violations
	if len(buf) < size {
		vs.Add("header.size_bytes", "the stream ended after %d of the %d bytes declared", len(buf), size)
		return nil, uploadInvalidStream, vs.Err()
	}
	if want := h.GetSha256(); len(want) > 0 {
		if got := sha256.Sum256(buf); string(got[:]) != string(want) {
			vs.Add("header.sha256", "the payload's SHA-256 is %s, not the %s declared: the bytes were changed on the way, or the digest is of other bytes",
				hex.EncodeToString(got[:]), hex.EncodeToString(want))
			return nil, uploadInvalidStream, vs.Err()
		}
	}
	return buf, "", nil
}

// compileUpload decodes the payload and compiles it as an inline model
// with the header's options: the pre-compile bound, the validation and
// fold, the compile (holding a computation slot) and the cache entries
// under the inline key and the model hash are those of resolveInline.
func (s *Service) compileUpload(ctx context.Context, h *modegridv1.UploadModelHeader, payload []byte) (*modegridv1.UploadModelResponse, string, error) {
	var vs violations
	received := uint64(len(payload))
	c := &modegridv1.Crystal{}
	if err := proto.Unmarshal(payload, c); err != nil {
		vs.Add("model.crystal", "the payload is not the protobuf binary of a modegrid.v1.Crystal: %v", err)
		return nil, uploadInvalidModel, vs.Err()
	}
	payload = nil // the decoded message is all that is needed from here on
	src := &modegridv1.ModelSource{
		Source:             &modegridv1.ModelSource_Crystal{Crystal: c},
		EnforceSumRule:     h.GetModel().GetEnforceSumRule(),
		SymmetryToleranceA: h.GetModel().GetSymmetryToleranceA(),
		Symmetrize:         h.GetModel().GetSymmetrize(),
	}
	if r, ok := s.rawModelOf(src); ok && s.valid(r) {
		if s.checkCompile(&vs, r); vs.Len() > 0 {
			return nil, uploadTooLarge, vs.Err()
		}
	}
	e, err := s.resolveInline(ctx, src, &vs)
	if err != nil {
		return nil, uploadResultOf(ctx, err), err
	}
	if err := vs.Err(); err != nil {
		return nil, uploadInvalidModel, err
	}
	if !s.cache.Contains(modelKey(e.hash)) && s.cfg.Backend == nil {
		return nil, uploadTooLarge, errNotHeld(e.size(), s.cache.MaxBytes())
	}
	return &modegridv1.UploadModelResponse{
		ModelHash:     e.hash,
		ReceivedBytes: received,
		Sites:         uint32(e.m.Sites()),
		Interactions:  uint32(e.m.Interactions()),
		StoredBytes:   uint64(e.size()),
		SupercellFold: e.fold,
	}, uploadOK, nil
}

// uploadResultOf labels an error met after the payload's admission.
func uploadResultOf(ctx context.Context, err error) string {
	switch {
	case ctx.Err() != nil:
		return uploadCanceled
	case busyStatus(err) != nil:
		return uploadBusy
	case isValidation(err):
		return uploadInvalidModel
	}
	var ref interface{ GRPCStatus() *status.Status }
	if errors.As(err, &ref) && ref.GRPCStatus().Code() == codes.ResourceExhausted {
		return uploadBusy
	}
	return uploadFailed
}

// errUploadsBusy refuses an upload past max-uploads.
func errUploadsBusy(slots int) error {
	msg := fmt.Sprintf("server busy: %d uploads already being received (cap max-uploads=%d); retry later", slots, slots)
	st := status.New(codes.ResourceExhausted, msg)
	if d, err := st.WithDetails(
		&errdetails.QuotaFailure{Violations: []*errdetails.QuotaFailure_Violation{{Subject: "max-uploads", Description: msg}}},
		&errdetails.RetryInfo{RetryDelay: durationpb.New(time.Second)},
	); err == nil {
		st = d
	}
	return st.Err()
}

// errNotHeld refuses an upload whose compiled model this server cannot
// keep for reference: larger than its whole model cache, or no cache.
func errNotHeld(size, cacheBytes int64) error {
	msg := fmt.Sprintf("the compiled model (%s) cannot be held for reference: this server's cache holds %s (cache-bytes)", fmtBytes(size), fmtBytes(max(cacheBytes, 0)))
	st := status.New(codes.ResourceExhausted, msg)
	if d, err := st.WithDetails(&errdetails.QuotaFailure{Violations: []*errdetails.QuotaFailure_Violation{{Subject: "cache-bytes", Description: msg}}}); err == nil {
		st = d
	}
	return st.Err()
}
