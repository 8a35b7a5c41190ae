package server

import (
	"context"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/server/cache"
)

// protoCodec stores results of one message type in the Backend as
// serialised protobuf.
func protoCodec[M proto.Message](newMsg func() M) *cache.Codec {
	return &cache.Codec{
		Encode: func(v any) ([]byte, error) { return proto.Marshal(v.(proto.Message)) },
		Decode: func(b []byte) (any, int64, error) {
			m := newMsg()
			if err := proto.Unmarshal(b, m); err != nil {
				return nil, 0, err
			}
			return m, resultBytes(m), nil
		},
	}
}

// resultBytes charges a response message its wire size plus the Go
// overhead of its slices and headers (a rough 2×, floats dominate).
func resultBytes(m proto.Message) int64 { return int64(256 + 2*proto.Size(m)) }

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
		vs.add(field, "%s makes a response of about %.0f bytes, over this server's cap max-msg-bytes=%d", what, bytes, s.cfg.MaxMsgBytes)
	}
}
