// Package client is a thin Go client for the modegrid gRPC service. It
// depends only on the generated protobuf package.
package client

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/protobuf/encoding/protojson"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// Client calls a modegrid server. It is safe for concurrent use.
type Client struct {
	conn *grpc.ClientConn
	api  modegridv1.ModegridServiceClient
}

// Option configures Dial.
type Option func(*options)

type options struct {
	dialOpts []grpc.DialOption
}

// WithDialOptions appends raw gRPC dial options.
func WithDialOptions(o ...grpc.DialOption) Option {
	return func(opts *options) { opts.dialOpts = append(opts.dialOpts, o...) }
}

// Dial creates a client for target (any gRPC target, e.g. "127.0.0.1:7420"
// or "dns:///modegrid.lab.svc:7420"). The connection is made lazily.
func Dial(target string, opt ...Option) (*Client, error) {
	var o options
	for _, f := range opt {
		f(&o)
	}
	dopts := append([]grpc.DialOption{grpc.WithTransportCredentials(insecure.NewCredentials())}, o.dialOpts...)
	conn, err := grpc.NewClient(target, dopts...)
	if err != nil {
		return nil, fmt.Errorf("modegrid client: %w", err)
	}
	return &Client{conn: conn, api: modegridv1.NewModegridServiceClient(conn)}, nil
}

// Close closes the connection.
func (c *Client) Close() error { return c.conn.Close() }

// Modes calls ComputeModes and collects the whole stream into one response.
func (c *Client) Modes(ctx context.Context, req *modegridv1.ComputeModesRequest) (*modegridv1.ComputeModesResponse, error) {
	stream, err := c.api.ComputeModes(ctx, req)
	if err != nil {
		return nil, err
	}
	var all *modegridv1.ComputeModesResponse
	for {
		chunk, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, err
		}
		if all == nil {
			all = chunk
			continue
		}
		all.Points = append(all.Points, chunk.GetPoints()...)
	}
	if all == nil {
		all = &modegridv1.ComputeModesResponse{}
	}
	return all, nil
}

// LoadModel reads a model file (the protobuf JSON of modegrid.v1.Crystal).
func LoadModel(path string) (*modegridv1.Crystal, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("read model: %w", err)
	}
	return ParseModel(b)
}

// ParseModel parses the protobuf JSON of a modegrid.v1.Crystal.
func ParseModel(b []byte) (*modegridv1.Crystal, error) {
	var c modegridv1.Crystal
	if err := protojson.Unmarshal(b, &c); err != nil {
		return nil, fmt.Errorf("parse model: %w", err)
	}
	return &c, nil
}
