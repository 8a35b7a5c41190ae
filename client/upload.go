package client

import (
	"context"
	"crypto/sha256"
	"errors"
	"fmt"
	"slices"
	"strings"
	"sync"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// maxUploadChunk is the payload of one upload message: 32 KiB, or half
// the Client's largest message when that is smaller. Small enough for any
// server cap a deployment would set (the server's cap is not known here,
// and a chunk over it fails the upload), large enough that the framing
// of a message (a few bytes) is nothing: HTTP/2 carries data in frames
// of 16 KiB anyway.
const maxUploadChunk = 32 << 10

// UploadModel sends the inline model of src (its crystal, with its
// enforce_sum_rule, symmetry_tolerance_a and symmetrize options) to the
// server in chunks through the UploadModel stream, whatever its size, and
// returns the server's answer: the model hash under which it holds the
// model (the hash an inline request with the same model and options
// gets), and its sizes. The Client remembers the hash, so later requests
// carrying the same model inline go by reference.
//
// Requests whose inline model is too large for one message are uploaded
// this way by every typed helper on its own; call UploadModel to send a
// model ahead of the requests, or to learn its hash.
func (c *Client) UploadModel(ctx context.Context, src *modegridv1.ModelSource, opts ...CallOption) (*modegridv1.UploadModelResponse, error) {
	if src.GetCrystal() == nil {
		return nil, errors.New("modegrid client: UploadModel needs a model source with an inline crystal")
	}
	api := c.api
	if !c.affinity {
		var err error
		if api, err = c.pinned(); err != nil {
			return nil, err
		}
	}
	resp, err := c.upload(ctx, api, src, "", collectOptions(opts))
	if err != nil {
		return nil, err
	}
	if k, ok := keyOf(src); ok {
		c.refs.remember(k, src, resp.GetModelHash(), !c.affinity)
	}
	return resp, nil
}

// upload sends src's crystal through one UploadModel stream on api, carrying the
// affinity header for hash when it is known, and sends it again when a
// stream broken after it began (UNAVAILABLE) can be resent.
func (c *Client) upload(ctx context.Context, api modegridv1.ModegridServiceClient, src *modegridv1.ModelSource, hash string, o callOptions) (*modegridv1.UploadModelResponse, error) {
	payload, err := proto.MarshalOptions{Deterministic: true}.Marshal(src.GetCrystal())
	if err != nil {
		return nil, fmt.Errorf("modegrid client: encode the model for upload: %w", err)
	}
	sum := sha256.Sum256(payload)
	h := &modegridv1.UploadModelHeader{
		SizeBytes: uint64(len(payload)),
		Encoding:  modegridv1.ModelEncoding_MODEL_ENCODING_PROTOBUF_BINARY,
		Sha256:    sum[:],
		Model: &modegridv1.ModelSource{
			EnforceSumRule:     src.GetEnforceSumRule(),
			SymmetryToleranceA: src.GetSymmetryToleranceA(),
			Symmetrize:         src.GetSymmetrize(),
		},
	}
	if c.affinity && hash != "" {
		ctx = withAffinity(ctx, hash)
	}
	for resends := 0; ; resends++ {
		resp, err := c.uploadOnce(ctx, api, h, payload, o)
		if err == nil || resends >= c.maxResends || !broken(ctx, err, true) {
			return resp, err
		}
	}
}

// uploadOnce runs one UploadModel stream: the header, the payload in
// chunks, then the server's answer. A send that fails means the server
// has ended the stream; its status is then what CloseAndRecv returns.
func (c *Client) uploadOnce(ctx context.Context, api modegridv1.ModegridServiceClient, h *modegridv1.UploadModelHeader, payload []byte, o callOptions) (*modegridv1.UploadModelResponse, error) {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel() // ends an abandoned stream
	stream, err := api.UploadModel(ctx, o.grpcOpts...)
	if err != nil {
		return nil, err
	}
	err = stream.Send(&modegridv1.UploadModelRequest{Part: &modegridv1.UploadModelRequest_Header{Header: h}})
	size := max(1, min(maxUploadChunk, c.maxMsg/2))
	for err == nil && len(payload) > 0 {
		n := min(size, len(payload))
		err = stream.Send(&modegridv1.UploadModelRequest{Part: &modegridv1.UploadModelRequest_Chunk{Chunk: payload[:n]}})
		payload = payload[n:]
	}
	return stream.CloseAndRecv()
}

// tooBig reports whether req, as it would be sent with its model inline,
// exceeds the size from which the Client uploads the model first.
func (c *Client) tooBig(req proto.Message) bool {
	return proto.Size(req) > c.uploadAt
}

// overServerCap reports whether err is a server's refusal of a request
// message over its own message cap (gRPC's RESOURCE_EXHAUSTED "received
// message larger than max"): a server whose cap is below this Client's.
func overServerCap(err error) bool {
	st, ok := status.FromError(err)
	return ok && st.Code() == codes.ResourceExhausted && strings.Contains(st.Message(), "received message larger than max")
}

// pinned returns the stub of the Client's pinned connection, dialled on
// first use: the same target and options with gRPC's pick_first balancer
// (the address list shuffled, so that clients spread over the replicas),
// which keeps every call on one replica while it serves. Without model
// affinity, uploads and the calls that name an uploaded model go on it: a
// replica holds the models uploaded to it, and round_robin would send the
// next call to another (with two replicas, every reference would reach
// the one that did not receive the upload). When that replica goes away,
// pick_first moves to another, which answers NOT_FOUND once and is sent
// the model again.
func (c *Client) pinned() (modegridv1.ModegridServiceClient, error) {
	c.pin.once.Do(func() {
		sc, err := serviceConfig(false, c.pin.maxAttempts, c.pin.health, c.pin.waitForReady, true)
		if err != nil {
			c.pin.err = fmt.Errorf("modegrid client: %w", err)
			return
		}
		opts := append(slices.Clip(c.pin.dopts), grpc.WithDefaultServiceConfig(sc))
		conn, err := grpc.NewClient(c.pin.target, opts...)
		if err != nil {
			c.pin.err = fmt.Errorf("modegrid client: %w", err)
			return
		}
		c.pin.conn, c.pin.api = conn, modegridv1.NewModegridServiceClient(conn)
	})
	return c.pin.api, c.pin.err
}

// pinnedConn is the Client's pinned connection (see pinned) and what it
// is dialled with.
type pinnedConn struct {
	target       string
	dopts        []grpc.DialOption
	maxAttempts  int
	health       bool
	waitForReady bool

	once sync.Once
	conn *grpc.ClientConn // nil until dialled
	api  modegridv1.ModegridServiceClient
	err  error
}
