package server

import (
	"context"
	"errors"
	"fmt"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// receiver reads an upload stream on a goroutine of its own, so that the
// handler can stop waiting for a client that went silent: gRPC's Recv
// returns only with a message, the stream's end or the stream's context,
// and that context ends only when the handler returns. The goroutine
// stops at the stream's first error (io.EOF included) or, once the
// handler has returned (stop), at the Recv that the stream's end then
// interrupts.
type receiver struct {
	msgs chan received
	done chan struct{} // closed by stop
	idle time.Duration
	t    *time.Timer // the idle timer, reset for every message
}

// received is one result of Recv.
type received struct {
	m   *modegridv1.UploadModelRequest
	err error
}

func startReceiver(stream grpc.ClientStreamingServer[modegridv1.UploadModelRequest, modegridv1.UploadModelResponse], idle time.Duration) *receiver {
	r := &receiver{msgs: make(chan received), done: make(chan struct{}), idle: idle}
	go func() {
		for {
			m, err := stream.Recv()
			select {
			case r.msgs <- received{m, err}:
			case <-r.done:
				return
			}
			if err != nil {
				return
			}
		}
	}()
	return r
}

// errUploadIdle is the end of an upload whose client sent nothing for the
// idle timeout.
type errUploadIdle struct{ idle time.Duration }

func (e *errUploadIdle) Error() string {
	return fmt.Sprintf("no upload message for %v (upload-idle-timeout): the upload was abandoned; send the chunks without pauses", e.idle)
}

// GRPCStatus makes the abandonment DEADLINE_EXCEEDED: the server's own
// deadline for the next message passed.
func (e *errUploadIdle) GRPCStatus() *status.Status {
	return status.New(codes.DeadlineExceeded, e.Error())
}

// next returns the next message, io.EOF at the stream's end, an
// *errUploadIdle when none came within the idle timeout, or ctx.Err().
func (r *receiver) next(ctx context.Context) (*modegridv1.UploadModelRequest, error) {
	if r.t == nil {
		r.t = time.NewTimer(r.idle)
	} else {
		r.t.Reset(r.idle)
	}
	select {
	case x := <-r.msgs:
		return x.m, x.err
	case <-r.t.C:
		return nil, &errUploadIdle{idle: r.idle}
	case <-ctx.Done():
		return nil, ctx.Err()
	}
}

// result labels an error of next for the metrics.
func (r *receiver) result(err error) string {
	var idle *errUploadIdle
	switch {
	case errors.As(err, &idle):
		return uploadIdle
	case errors.Is(err, context.Canceled), errors.Is(err, context.DeadlineExceeded):
		return uploadCanceled
	}
	switch status.Code(err) {
	case codes.Canceled, codes.DeadlineExceeded:
		return uploadCanceled
	case codes.InvalidArgument: // a message that did not decode
		return uploadInvalidStream
	}
	return uploadFailed
}

// stop lets the goroutine end and the idle timer go.
func (r *receiver) stop() {
	close(r.done)
	if r.t != nil {
		r.t.Stop()
	}
}
