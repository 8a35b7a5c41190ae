package client

import (
	"context"
	"errors"
	"fmt"
	"io"
	"slices"
	"strings"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// CallOption configures one call of a typed helper.
type CallOption func(*callOptions)

type callOptions struct {
	progress func(done, total int)
	grpcOpts []grpc.CallOption
}

// Progress calls fn after each chunk of a streamed result with the number of
// points received so far and the total. fn runs on the calling goroutine.
func Progress(fn func(done, total int)) CallOption {
	return func(o *callOptions) { o.progress = fn }
}

// GRPCCallOptions passes raw gRPC call options (for example
// grpc.Header(&md)) to every attempt of the call.
func GRPCCallOptions(opts ...grpc.CallOption) CallOption {
	return func(o *callOptions) { o.grpcOpts = append(o.grpcOpts, opts...) }
}

func collectOptions(opts []CallOption) callOptions {
	var o callOptions
	for _, f := range opts {
		f(&o)
	}
	return o
}

// maxResends bounds how often one call is sent again after UNAVAILABLE broke
// it once the server had begun to answer (a modes stream: resumed after the
// points it delivered). gRPC's retry policy stops at that point, because the
// call is committed; every modegrid call is a pure computation on its
// request, so sending it again is harmless. WithMaxAttempts(1) turns this
// off with the other retries.
const maxResends = 3

// broken reports whether err is an UNAVAILABLE that ended a call after the
// server had begun to answer (begun: the last attempt received response
// headers or points; gRPC's retry policy covered every failure before
// that), and the caller still waits.
func broken(ctx context.Context, err error, begun bool) bool {
	return begun && status.Code(err) == codes.Unavailable && !waitedOut(err) && ctx.Err() == nil
}

// answered reports whether the response headers hdr show that the server
// had begun to answer: headers of their own, not the trailers of a
// trailers-only response (which gRPC may hand back as the header metadata
// of a call that failed before any answer — one its retry policy already
// covered).
func answered(hdr, trl metadata.MD) bool {
	for k, v := range hdr {
		// gRPC's own keys (grpc-accept-encoding, …) come with any
		// response; only application metadata says the handler answered.
		if !strings.HasPrefix(k, "grpc-") && !slices.Equal(trl[k], v) {
			return true
		}
	}
	return false
}

// Check calls CheckModel. An invalid model is not an error: the response has
// Valid false and lists every violation of the crystal (paths relative to
// Crystal). A bad option of the model source (SymmetryToleranceA) is
// INVALID_ARGUMENT, as in every call.
func (c *Client) Check(ctx context.Context, req *modegridv1.CheckModelRequest, opts ...CallOption) (*modegridv1.CheckModelResponse, error) {
	return unary(ctx, c, req, modegridv1.ModegridServiceClient.CheckModel, false, collectOptions(opts))
}

// Dispersion calls ComputeDispersion.
func (c *Client) Dispersion(ctx context.Context, req *modegridv1.ComputeDispersionRequest, opts ...CallOption) (*modegridv1.ComputeDispersionResponse, error) {
	return unary(ctx, c, req, modegridv1.ModegridServiceClient.ComputeDispersion, c.affinity, collectOptions(opts))
}

// DOS calls ComputeDos.
func (c *Client) DOS(ctx context.Context, req *modegridv1.ComputeDosRequest, opts ...CallOption) (*modegridv1.ComputeDosResponse, error) {
	return unary(ctx, c, req, modegridv1.ModegridServiceClient.ComputeDos, c.affinity, collectOptions(opts))
}

// Thermal calls ComputeThermal.
func (c *Client) Thermal(ctx context.Context, req *modegridv1.ComputeThermalRequest, opts ...CallOption) (*modegridv1.ComputeThermalResponse, error) {
	return unary(ctx, c, req, modegridv1.ModegridServiceClient.ComputeThermal, c.affinity, collectOptions(opts))
}

// Infrared calls ComputeInfrared.
func (c *Client) Infrared(ctx context.Context, req *modegridv1.ComputeInfraredRequest, opts ...CallOption) (*modegridv1.ComputeInfraredResponse, error) {
	return unary(ctx, c, req, modegridv1.ModegridServiceClient.ComputeInfrared, c.affinity, collectOptions(opts))
}

// Scattering calls ComputeScattering (single-crystal S(Q, E), powder map
// or neutron-weighted DOS).
func (c *Client) Scattering(ctx context.Context, req *modegridv1.ComputeScatteringRequest, opts ...CallOption) (*modegridv1.ComputeScatteringResponse, error) {
	return unary(ctx, c, req, modegridv1.ModegridServiceClient.ComputeScattering, c.affinity, collectOptions(opts))
}

// Modes calls ComputeModes and collects the whole stream into one response
// (offset 0, every point in q order).
func (c *Client) Modes(ctx context.Context, req *modegridv1.ComputeModesRequest, opts ...CallOption) (*modegridv1.ComputeModesResponse, error) {
	var all *modegridv1.ComputeModesResponse
	err := c.StreamModes(ctx, req, func(chunk *modegridv1.ComputeModesResponse) error {
		if all == nil {
			all = &modegridv1.ComputeModesResponse{
				ModelHash:  chunk.GetModelHash(),
				Parameters: chunk.GetParameters(),
				Total:      chunk.GetTotal(),
				Unit:       chunk.GetUnit(),
			}
		}
		all.Points = append(all.Points, chunk.GetPoints()...)
		return nil
	}, opts...)
	if err != nil {
		return nil, err
	}
	if all == nil {
		all = &modegridv1.ComputeModesResponse{Unit: req.GetUnit()}
	}
	return all, nil
}

// StreamModes calls ComputeModes and hands each chunk to fn, in q order,
// each point exactly once: a stream broken by UNAVAILABLE is reopened and
// points already delivered are skipped. An error from fn stops the stream
// and is returned.
func (c *Client) StreamModes(ctx context.Context, req *modegridv1.ComputeModesRequest, fn func(*modegridv1.ComputeModesResponse) error, opts ...CallOption) error {
	caller := collectOptions(opts)
	s, err := c.newSender(ctx, req, c.affinity)
	if err != nil {
		return err
	}
	ctx, cancel := context.WithCancel(ctx)
	defer cancel() // ends an abandoned stream
	delivered := 0
	resumes := 0
	var hdr, trl metadata.MD
	o := caller
	o.grpcOpts = append(slices.Clip(o.grpcOpts), grpc.Header(&hdr), grpc.Trailer(&trl))
	for {
		if err := s.prepare(ctx, caller); err != nil {
			return err
		}
		hdr, trl = nil, nil
		err := s.streamOnce(ctx, o, &delivered, fn)
		if err == nil {
			return nil
		}
		var fe fnError
		if errors.As(err, &fe) {
			return fe.err
		}
		switch {
		case delivered == 0 && s.fallback(err):
			continue
		case errors.Is(err, errEmptyStream):
			// Not resent: gRPC has already retried the call (see
			// errEmptyStream).
			return err
		case resumes < c.maxResends && broken(ctx, err, answered(hdr, trl) || delivered > 0):
			resumes++
			continue
		case delivered > 0 && s.fallback(err):
			// A resumed stream reached a replica without the model.
			continue
		}
		return err
	}
}

// fnError marks an error returned by the caller's chunk function.
type fnError struct{ err error }

func (e fnError) Error() string { return e.err.Error() }

// errEmptyStream: a stream that ended cleanly before its first message.
// The server sends at least one message (the model hash) on every
// successful stream, so this is never an empty result: it is reported as
// UNAVAILABLE at once. It was seen across a server's graceful stop and, 1
// run in 100 under the race detector, when gRPC's retries of a stream
// refused with a trailers-only UNAVAILABLE were exhausted: the last
// attempt's Recv returned io.EOF, trailers holding only the content type.
// It used to be resent like a broken stream, which repeated the whole
// retry sequence (the server saw 6 attempts of a 3-attempt limit); gRPC
// has retried by then, so it is not resent.
var errEmptyStream = status.Error(codes.Unavailable, "modegrid client: the stream ended before its first message")

// streamOnce runs one attempt of a ComputeModes stream, skipping points
// before *delivered and advancing it.
func (s *sender) streamOnce(ctx context.Context, o callOptions, delivered *int, fn func(*modegridv1.ComputeModesResponse) error) error {
	sctx, cancel := context.WithCancel(s.outgoing(ctx))
	defer cancel()
	req := s.request().(*modegridv1.ComputeModesRequest)
	api, err := s.api()
	if err != nil {
		return err
	}
	stream, err := api.ComputeModes(sctx, req, o.grpcOpts...)
	if err != nil {
		return err
	}
	first := true
	for {
		chunk, err := stream.Recv()
		if errors.Is(err, io.EOF) && first {
			return errEmptyStream
		}
		if errors.Is(err, io.EOF) {
			return nil
		}
		if err != nil {
			return err
		}
		if first {
			s.succeeded(chunk.GetModelHash())
			first = false
		}
		pts := chunk.GetPoints()
		off := int(chunk.GetOffset())
		if skip := *delivered - off; skip > 0 {
			if skip >= len(pts) {
				continue
			}
			out := &modegridv1.ComputeModesResponse{
				ModelHash: chunk.GetModelHash(), Parameters: chunk.GetParameters(),
				Offset: uint32(*delivered), Total: chunk.GetTotal(), Unit: chunk.GetUnit(),
				Points: pts[skip:],
			}
			chunk, pts = out, out.Points
		} else if skip < 0 {
			return fmt.Errorf("modegrid client: stream skipped points %d to %d", *delivered, off)
		}
		if err := fn(chunk); err != nil {
			return fnError{err}
		}
		*delivered += len(pts)
		if o.progress != nil {
			o.progress(*delivered, int(chunk.GetTotal()))
		}
	}
}

// hashed is a response that names the model hash that produced it.
type hashed interface {
	proto.Message
	GetModelHash() string
}

// unary runs one unary call with the model reference logic.
func unary[Req proto.Message, Resp hashed](ctx context.Context, c *Client, req Req,
	call func(modegridv1.ModegridServiceClient, context.Context, Req, ...grpc.CallOption) (Resp, error), learn bool, o callOptions) (Resp, error) {
	s, err := c.newSender(ctx, req, learn)
	if err != nil {
		var zero Resp
		return zero, err
	}
	var hdr, trl metadata.MD
	opts := append(slices.Clip(o.grpcOpts), grpc.Header(&hdr), grpc.Trailer(&trl))
	resends := 0
	for {
		if err := s.prepare(ctx, o); err != nil {
			var zero Resp
			return zero, err
		}
		hdr, trl = nil, nil
		api, err := s.api()
		if err != nil {
			var zero Resp
			return zero, err
		}
		resp, err := call(api, s.outgoing(ctx), s.request().(Req), opts...)
		if err == nil {
			s.succeeded(resp.GetModelHash())
			return resp, nil
		}
		switch {
		case s.fallback(err):
		case resends < c.maxResends && broken(ctx, err, answered(hdr, trl)):
			resends++
		default:
			return resp, err
		}
	}
}

// sender decides, for one logical call, whether the model goes inline or
// by reference, and which affinity header the call carries.
type sender struct {
	c      *Client
	req    proto.Message           // the caller's request, never modified
	src    *modegridv1.ModelSource // the caller's model source (nil: none)
	key    modelKey                // client-side key of the inline model
	hasKey bool
	inline *modegridv1.ModelSource // an inline source for this model, if known
	ref    string                  // hash to send as a reference; "" sends inline
	hash   string                  // hash for the affinity header; "" unknown
	resent bool                    // the NOT_FOUND fallback has been used
	// upload is true when the model cannot go inline (its request is
	// over the Client's upload threshold, or a server refused it as over
	// its message cap): it goes by reference, uploaded first when the
	// server may not hold it (prepare).
	upload bool
}

func (c *Client) newSender(ctx context.Context, req proto.Message, learn bool) (*sender, error) {
	s := &sender{c: c, req: req, src: sourceOf(req)}
	switch {
	case s.src.GetCrystal() != nil:
		s.inline = s.src
		s.key, s.hasKey = keyOf(s.src)
		s.upload = c.tooBig(req)
		if !s.hasKey {
			break
		}
		e, ok := c.refs.lookupKey(s.key)
		if !ok && learn && !s.upload {
			// Ask once for the hash so that even the first compute call is
			// routed to the replica that will own the model.
			// INVALID_ARGUMENT (a bad option of the model source, a check
			// over the server's bounds) is left to the call itself, which
			// lists every problem of its own request.
			resp, err := c.api.CheckModel(ctx, &modegridv1.CheckModelRequest{Model: s.src})
			if code := status.Code(err); err != nil && code != codes.Unimplemented && code != codes.InvalidArgument {
				return nil, err
			}
			if resp.GetValid() && resp.GetModelHash() != "" {
				c.refs.remember(s.key, s.src, resp.GetModelHash(), false)
				e, ok = c.refs.lookupKey(s.key)
			}
		}
		if ok {
			s.hash = e.hash
			if e.sent {
				s.ref = e.hash
			}
		}
	case s.src.GetModelHash() != "":
		s.hash = s.src.GetModelHash()
		s.ref = s.hash
		if e, ok := c.refs.lookupHash(s.hash); ok {
			s.inline = e.inline
			s.key, s.hasKey = keyOf(e.inline)
			s.upload = c.tooBig(withSource(req, e.inline))
		}
	}
	return s, nil
}

// request returns the request to send now.
func (s *sender) request() proto.Message {
	switch {
	case s.ref != "" && s.src.GetModelHash() == s.ref:
		return s.req // the caller's own reference
	case s.ref != "":
		return withSource(s.req, reference(s.ref, s.inline))
	default:
		return s.inlineRequest()
	}
}

// inlineRequest is the request with the model inline: the caller's own
// inline model (or no model), or a remembered model resent.
func (s *sender) inlineRequest() proto.Message {
	if s.src.GetCrystal() != nil || s.inline == nil {
		return s.req
	}
	return withSource(s.req, s.inline)
}

// prepare uploads the model when the request is to carry it but it
// cannot go inline: it then goes by the hash the upload answers. The
// upload carries the affinity header when the hash is known (a model
// uploaded again after a NOT_FOUND); an upload without it may land on
// another replica than the hash routes to, and is remembered as not yet
// sent there.
func (s *sender) prepare(ctx context.Context, o callOptions) error {
	if s.ref != "" || s.inline == nil {
		return nil
	}
	if !s.upload && !s.c.tooBig(s.inlineRequest()) {
		return nil
	}
	s.upload = true
	api, err := s.api()
	if err != nil {
		return err
	}
	resp, err := s.c.upload(ctx, api, s.inline, s.hash, o)
	if err != nil {
		return err
	}
	h := resp.GetModelHash()
	if s.hasKey {
		s.c.refs.remember(s.key, s.inline, h, !s.c.affinity || s.hash == h)
	}
	s.hash, s.ref = h, h
	return nil
}

// api is the connection the call goes on: the pinned one for a model
// that goes by upload without affinity (so that its calls reach the
// replica its upload reached), else the Client's own.
func (s *sender) api() (modegridv1.ModegridServiceClient, error) {
	if s.upload && !s.c.affinity {
		return s.c.pinned()
	}
	return s.c.api, nil
}

// outgoing adds the affinity header when it applies.
func (s *sender) outgoing(ctx context.Context) context.Context {
	if !s.c.affinity || s.hash == "" {
		return ctx
	}
	return withAffinity(ctx, s.hash)
}

// withAffinity adds the affinity header for model hash h.
func withAffinity(ctx context.Context, h string) context.Context {
	return metadata.AppendToOutgoingContext(ctx, AffinityHeader, h)
}

// fallback reports whether err calls for sending the model again, and
// switches how: a NOT_FOUND for a model sent by reference is resent once
// (inline, or uploaded again when it cannot go inline); a model inline
// that a server refused as over its message cap is uploaded.
func (s *sender) fallback(err error) bool {
	switch {
	case !s.resent && s.ref != "" && s.inline != nil && status.Code(err) == codes.NotFound:
		s.c.refs.unsent(s.ref)
		s.ref = ""
		s.resent = true
		return true
	case !s.upload && s.ref == "" && s.inline != nil && overServerCap(err):
		s.upload = true
		return true
	}
	return false
}

// succeeded records the server's hash after a successful call.
func (s *sender) succeeded(h string) {
	if h == "" || !s.hasKey || s.inline == nil {
		return
	}
	// With affinity, only a call routed by the hash header has left the
	// model on the replica that owns it.
	routed := !s.c.affinity || s.hash != ""
	s.c.refs.remember(s.key, s.inline, h, routed)
	if s.hash == "" {
		s.hash = h
	}
}

// Gruneisen calls ComputeGruneisen. Its models go inline (or by hash) as
// the request gives them: a request of several models is not rewritten.
func (c *Client) Gruneisen(ctx context.Context, req *modegridv1.ComputeGruneisenRequest, opts ...CallOption) (*modegridv1.ComputeGruneisenResponse, error) {
	return unary(ctx, c, req, modegridv1.ModegridServiceClient.ComputeGruneisen, false, collectOptions(opts))
}

// QuasiHarmonic calls ComputeQuasiHarmonic (models sent as given, as for
// Gruneisen).
func (c *Client) QuasiHarmonic(ctx context.Context, req *modegridv1.ComputeQuasiHarmonicRequest, opts ...CallOption) (*modegridv1.ComputeQuasiHarmonicResponse, error) {
	return unary(ctx, c, req, modegridv1.ModegridServiceClient.ComputeQuasiHarmonic, false, collectOptions(opts))
}

// Conductivity calls ComputeConductivity.
func (c *Client) Conductivity(ctx context.Context, req *modegridv1.ComputeConductivityRequest, opts ...CallOption) (*modegridv1.ComputeConductivityResponse, error) {
	return unary(ctx, c, req, modegridv1.ModegridServiceClient.ComputeConductivity, c.affinity, collectOptions(opts))
}

// Fit calls Fit and returns its last message, the one carrying the result
// (FitResponse.GetResult). progress, when not nil, is called with every
// progress message on the calling goroutine. A fit broken by UNAVAILABLE
// after it began is sent again from the start (it is a pure computation),
// and a model sent by reference that the server no longer holds is sent
// again inline. The fitted model is remembered like a model the caller
// sent: using FitResult.fitted inline in a later call sends its hash.
func (c *Client) Fit(ctx context.Context, req *modegridv1.FitRequest, progress func(*modegridv1.FitProgress), opts ...CallOption) (*modegridv1.FitResponse, error) {
	o := collectOptions(opts)
	s, err := c.newSender(ctx, req, c.affinity)
	if err != nil {
		return nil, err
	}
	var hdr, trl metadata.MD
	o.grpcOpts = append(slices.Clip(o.grpcOpts), grpc.Header(&hdr), grpc.Trailer(&trl))
	resends := 0
	for {
		hdr, trl = nil, nil
		last, begun, err := s.fitOnce(ctx, o, progress)
		if err == nil {
			c.rememberFitted(req.GetModel(), last.GetResult())
			return last, nil
		}
		switch {
		case !begun && s.fallback(err):
		case resends < c.maxResends && broken(ctx, err, begun || answered(hdr, trl)):
			resends++
		default:
			return nil, err
		}
	}
}

// fitOnce runs one attempt of a Fit stream; begun reports that a message
// arrived.
func (s *sender) fitOnce(ctx context.Context, o callOptions, progress func(*modegridv1.FitProgress)) (*modegridv1.FitResponse, bool, error) {
	sctx, cancel := context.WithCancel(s.outgoing(ctx))
	defer cancel()
	stream, err := s.c.api.Fit(sctx, s.request().(*modegridv1.FitRequest), o.grpcOpts...)
	if err != nil {
		return nil, false, err
	}
	var last *modegridv1.FitResponse
	for {
		msg, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			if last.GetResult() == nil {
				return nil, last != nil, fmt.Errorf("modegrid client: the fit stream ended without a result")
			}
			return last, true, nil
		}
		if err != nil {
			return nil, last != nil, err
		}
		if last == nil {
			s.succeeded(msg.GetModelHash())
		}
		last = msg
		if p := msg.GetProgress(); p != nil && progress != nil {
			progress(p)
		}
	}
}

// rememberFitted records the fitted model of a fit as an inline model of
// the caller's with its hash, under the starting model's options.
func (c *Client) rememberFitted(start *modegridv1.ModelSource, r *modegridv1.FitResult) {
	if r.GetFitted() == nil || r.GetFittedModelHash() == "" {
		return
	}
	src := &modegridv1.ModelSource{
		Source:             &modegridv1.ModelSource_Crystal{Crystal: r.GetFitted()},
		EnforceSumRule:     start.GetEnforceSumRule(),
		SymmetryToleranceA: start.GetSymmetryToleranceA(),
	}
	if k, ok := keyOf(src); ok {
		// With affinity the fitted model lives on the replica that ran the
		// fit, not necessarily the one its hash routes to.
		c.refs.remember(k, src, r.GetFittedModelHash(), !c.affinity)
	}
}
