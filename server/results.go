package server

import (
	"context"
	"fmt"
	"reflect"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	"github.com/materials-lab/modegrid/server/cache"
)

// protoCodec stores results of one message type in the Backend as
// serialised protobuf. Every cached response names the model hash and the
// canonical parameters it answers; a decoded response whose own
// model_hash or parameters differ from the key it was read under is
// refused.
func protoCodec[M proto.Message](newMsg func() M) *cache.Codec {
	return &cache.Codec{
		Version: 1,
		Verify:  verifyResult,
		Encode:  func(v any) ([]byte, error) { return proto.Marshal(v.(proto.Message)) },
		Decode: func(_ context.Context, b []byte) (any, int64, error) {
			m := newMsg()
			if err := proto.Unmarshal(b, m); err != nil {
				return nil, 0, err
			}
			return m, resultBytes(m), nil
		},
	}
}

// verifyResult checks that a response's model_hash and parameters fields
// are the model hash and canonical parameters of key k.
func verifyResult(k cache.Key, v any) error {
	m := v.(proto.Message).ProtoReflect()
	for _, f := range []struct{ name, want string }{{"model_hash", k.Model}, {"parameters", k.Params}} {
		fd := m.Descriptor().Fields().ByName(protoreflect.Name(f.name))
		if fd == nil {
			return fmt.Errorf("%s has no field %s to check", m.Descriptor().FullName(), f.name)
		}
		if got := m.Get(fd).String(); got != f.want {
			return fmt.Errorf("response %s is %q, key has %q", f.name, abbreviate(got), abbreviate(f.want))
		}
	}
	return nil
}

// abbreviate shortens s for an error message.
func abbreviate(s string) string {
	if len(s) > 80 {
		return s[:80] + "…"
	}
	return s
}

// entryOverhead is what a cache entry costs besides its value: its key
// strings (the 64-digit hash and the canonical parameters), the LRU list
// element and the map slot, bytes.
const entryOverhead = 256

// resultBytes charges a cached response the memory it holds (see
// messageBytes) plus entryOverhead. (Its wire size is no measure: a
// dispersion sample holds three times its wire size in Go structs, a DOS
// about its wire size.)
func resultBytes(m proto.Message) int64 { return entryOverhead + messageBytes(m.ProtoReflect()) }

// messageBytes is the memory a message holds, bytes: the Go struct of the
// message and of every message in it, the backing arrays of its repeated
// fields and the bytes of its strings, each rounded up as the allocator
// rounds (allocBytes). It reads the lengths only, not the elements of
// scalar lists, so it is cheap even for a 10⁶-sample DOS.
func messageBytes(m protoreflect.Message) int64 {
	n := allocBytes(int64(reflect.TypeOf(m.Interface()).Elem().Size()))
	m.Range(func(fd protoreflect.FieldDescriptor, v protoreflect.Value) bool {
		switch {
		case fd.IsList() && fd.Message() != nil:
			l := v.List()
			n += allocBytes(10 * int64(l.Len())) // pointers, and room a decoder's appends leave
			for i := range l.Len() {
				n += messageBytes(l.Get(i).Message())
			}
		case fd.IsList() && (fd.Kind() == protoreflect.StringKind || fd.Kind() == protoreflect.BytesKind):
			l := v.List()
			n += allocBytes(24 * int64(l.Len()))
			for i := range l.Len() {
				n += allocBytes(int64(len(l.Get(i).String())))
			}
		case fd.IsList():
			n += allocBytes(8 * int64(v.List().Len())) // 8: the widest scalar
		case fd.IsMap():
			n += 64 * int64(v.Map().Len()) // no map in our messages; a rough charge
		case fd.Message() != nil:
			n += messageBytes(v.Message())
		case fd.Kind() == protoreflect.StringKind || fd.Kind() == protoreflect.BytesKind:
			n += allocBytes(int64(len(v.String())))
		}
		return true
	})
	return n
}

// allocBytes rounds an allocation of b bytes up as Go's allocator may:
// to its size classes (at most 1/8 apart, at least 16 bytes) below
// 32 KiB, to 8 KiB pages above.
func allocBytes(b int64) int64 {
	switch {
	case b == 0:
		return 0
	case b > 32<<10:
		return (b + 8191) &^ 8191
	}
	g := int64(16)
	for g*16 <= b { // granule b/8 or more, a power of two
		g *= 2
	}
	return (b + g - 1) / g * g
}

// cachedResult returns the response of kind for (model hash, canonical
// parameters): from the cache, or computed once for all concurrent
// identical requests and cached. The response is shared: callers must not
// modify it (gRPC only reads it to send).
func cachedResult[M proto.Message](ctx context.Context, s *Service, kind, hash, params string, codec *cache.Codec, compute func(ctx context.Context) (M, error)) (M, error) {
	var zero M
	v, src, err := s.cache.Do(ctx, cache.Key{Kind: kind, Model: hash, Params: params}, codec, func(ctx context.Context) (any, int64, error) {
		m, err := compute(ctx)
		if err != nil {
			return nil, 0, err
		}
		if n := proto.Size(m); n > s.cfg.MaxMsgBytes {
			// Estimates before the work refuse most of these; this is the
			// safety net, and the oversized answer is not kept.
			return nil, 0, status.Errorf(codes.ResourceExhausted,
				"the response would be %d bytes, over this server's cap max-msg-bytes=%d: ask for fewer samples, temperatures or sites", n, s.cfg.MaxMsgBytes)
		}
		if at := nonFinite(m.ProtoReflect(), ""); at != "" {
			// The engine refuses what overflows before this; a number that
			// still is not finite is a bug, kept from the client and the cache.
			s.log.Error("non-finite number in a result", "kind", kind, "model", hash, "params", params, "field", at)
			return nil, 0, status.Errorf(codes.Internal, "internal error: the result held a number that is not finite at %s; nothing was sent (logged on the server)", at)
		}
		return m, resultBytes(m), nil
	})
	noteCache(ctx, src.String())
	if err != nil {
		return zero, err
	}
	return v.(M), nil
}

// checkResponseSize adds a violation of field when an answer of about
// bytes would exceed the message cap.
func (s *Service) checkResponseSize(vs *violations, field string, bytes float64, what string) {
	if bytes > float64(s.cfg.MaxMsgBytes) {
		vs.Add(field, "%s makes a response of about %.0f bytes, over this server's cap max-msg-bytes=%d", what, bytes, s.cfg.MaxMsgBytes)
	}
}
