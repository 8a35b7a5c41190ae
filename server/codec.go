package server

import (
	"fmt"
	"strings"
	"sync"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/encoding"
	"google.golang.org/grpc/mem"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"
)

// Requests whose bytes do not decode as their protobuf message.
//
// grpc-go answers a codec's Unmarshal error with INTERNAL before any
// interceptor runs (for unary calls; rpc_util.go, "failed to unmarshal the
// received message"), so such a request would reach neither the logs nor
// the request metrics, and its client would read a server fault. The
// server's codec therefore does not fail: it leaves the message empty and
// records the decoding error against the message; the server's interceptor
// (unary) or its stream wrapper (RecvMsg) finds the record, counts
// modegrid_requests_undecodable_total{grpc_service,grpc_method}, logs a warning and answers
// INVALID_ARGUMENT — a client's mistake, which the request metrics then
// count with that code.

// maxPendingUndecodable bounds the records waiting for their interceptor.
// Every record is taken by the call that made it, so the map holds at most
// one per call being decoded; past the bound (an embedder's outer
// interceptor that never calls in) the codec fails as grpc-go would.
const maxPendingUndecodable = 4096

// undecodable holds decoding errors by the message they were meant for,
// from the codec's Unmarshal until the call's interceptor takes them.
type undecodable struct {
	mu      sync.Mutex    // protects pending
	pending map[any]error // message pointer → decoding error
}

func newUndecodable() *undecodable { return &undecodable{pending: map[any]error{}} }

// put records err for msg; false when full.
func (u *undecodable) put(msg any, err error) bool {
	u.mu.Lock()
	defer u.mu.Unlock()
	if len(u.pending) >= maxPendingUndecodable {
		return false
	}
	u.pending[msg] = err
	return true
}

// take returns and forgets the decoding error recorded for msg, if any.
func (u *undecodable) take(msg any) error {
	u.mu.Lock()
	defer u.mu.Unlock()
	err, ok := u.pending[msg]
	if ok {
		delete(u.pending, msg)
	}
	return err
}

// countingCodec is the protobuf codec, with Unmarshal failures recorded
// in failed instead of returned (see above).
type countingCodec struct {
	base   encoding.CodecV2
	failed *undecodable
}

func (c countingCodec) Marshal(v any) (mem.BufferSlice, error) { return c.base.Marshal(v) }

func (c countingCodec) Unmarshal(data mem.BufferSlice, v any) error {
	err := c.base.Unmarshal(data, v)
	if err == nil {
		return nil
	}
	if r, ok := v.(interface{ Reset() }); ok && c.failed.put(v, err) {
		r.Reset() // no half-decoded fields reach anyone
		return nil
	}
	return err
}

func (c countingCodec) Name() string { return c.base.Name() }

// reportUndecodable counts and logs a request the codec could not decode
// and returns the INVALID_ARGUMENT status its client gets.
func (s *Server) reportUndecodable(method string, msg any, err error) error {
	svc, name, _ := strings.Cut(strings.TrimPrefix(method, "/"), "/")
	s.svc.met.undecodable.WithLabelValues(svc, name).Inc()
	typ := fmt.Sprintf("%T", msg)
	if m, ok := msg.(proto.Message); ok {
		typ = string(m.ProtoReflect().Descriptor().FullName())
	}
	s.cfg.Logger.Warn("undecodable request", "method", method, "message", typ, "err", err.Error())
	desc := fmt.Sprintf("the bytes received are not a valid %s: %v", typ, err)
	// The violation names no field (the empty path: the request as a
	// whole), since nothing of it could be read.
	st, e := status.New(codes.InvalidArgument, "invalid request: "+desc).WithDetails(&errdetails.BadRequest{
		FieldViolations: []*errdetails.BadRequest_FieldViolation{{Field: "", Description: desc}},
	})
	if e != nil {
		return status.Error(codes.InvalidArgument, "invalid request: "+desc)
	}
	return st.Err()
}

// decodeCheckedStream reports undecodable messages a streaming handler
// receives.
type decodeCheckedStream struct {
	*contextStream
	s      *Server
	method string
}

func (d *decodeCheckedStream) RecvMsg(m any) error {
	if err := d.contextStream.RecvMsg(m); err != nil {
		return err
	}
	if err := d.s.undecodable.take(m); err != nil {
		return d.s.reportUndecodable(d.method, m, err)
	}
	return nil
}
