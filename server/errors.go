package server

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/types/known/durationpb"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/server/cache"
	"github.com/materials-lab/modegrid/server/gate"
)

// violations collects request field violations; the zero value is ready.
type violations struct{ list []physics.Violation }

func (vs *violations) add(field, format string, args ...any) {
	vs.list = append(vs.list, physics.Violation{Field: field, Description: fmt.Sprintf(format, args...)})
}

// addErr adds the violations of a physics validation error under prefix,
// or the error itself as one violation of field.
func (vs *violations) addErr(prefix, field string, err error) {
	var ve *physics.ValidationError
	if errors.As(err, &ve) {
		for _, v := range ve.Violations {
			vs.list = append(vs.list, physics.Violation{Field: joinField(prefix, v.Field), Description: v.Description})
		}
		return
	}
	vs.add(field, "%v", err)
}

// joinField joins a prefix ("model.crystal") and a physics field path
// ("sites[2].mass_amu" or "[3]").
func joinField(prefix, field string) string {
	switch {
	case prefix == "":
		return field
	case field == "":
		return prefix
	case strings.HasPrefix(field, "["):
		return prefix + field
	default:
		return prefix + "." + field
	}
}

func (vs *violations) err() error {
	if len(vs.list) == 0 {
		return nil
	}
	return invalidArgument("", vs.list)
}

// invalidArgument builds an INVALID_ARGUMENT status carrying every
// violation as a google.rpc.BadRequest field violation. prefix is joined to
// each field path.
func invalidArgument(prefix string, vs []physics.Violation) error {
	br := &errdetails.BadRequest{}
	var msg strings.Builder
	msg.WriteString("invalid request: ")
	for i, v := range vs {
		f := joinField(prefix, v.Field)
		br.FieldViolations = append(br.FieldViolations, &errdetails.BadRequest_FieldViolation{Field: f, Description: v.Description})
		if i > 0 {
			msg.WriteString("; ")
		}
		msg.WriteString(f + ": " + v.Description)
	}
	st, err := status.New(codes.InvalidArgument, msg.String()).WithDetails(br)
	if err != nil {
		return status.Error(codes.InvalidArgument, msg.String())
	}
	return st.Err()
}

// errModelNotFound is the status of a reference to a model this server
// does not hold (never sent, or evicted): the client resends it inline.
func errModelNotFound(hash string) error {
	st, err := status.New(codes.NotFound, fmt.Sprintf("model %s is not known to this server (never sent or evicted): send it inline", hash)).
		WithDetails(&errdetails.ResourceInfo{ResourceType: "modegrid.v1.Crystal", ResourceName: hash, Description: "resend the model inline in ModelSource.crystal"})
	if err != nil {
		return status.Error(codes.NotFound, "model "+hash+" is not known to this server: send it inline")
	}
	return st.Err()
}

// toStatus turns any error of a handler into a gRPC status error, choosing
// the code deliberately; plain errors never reach gRPC (they would become
// UNKNOWN). Rejections and panics are counted here.
func (s *Service) toStatus(ctx context.Context, method string, err error) error {
	if err == nil {
		return nil
	}
	if _, ok := status.FromError(err); ok {
		return err
	}
	if st := busyStatus(err); st != nil {
		return st
	}
	var ref *gate.Refusal
	var ve *physics.ValidationError
	var pe *cache.PanicError
	switch {
	case errors.As(err, &pe):
		return s.panicked(method, pe.Value, pe.Stack)
	case errors.Is(err, context.DeadlineExceeded):
		return status.Error(codes.DeadlineExceeded, "deadline exceeded: the computation was stopped")
	case errors.Is(err, context.Canceled):
		if ctx.Err() == nil {
			// The computation's own context ended without the caller's:
			// the server is being stopped.
			return status.Error(codes.Unavailable, "server stopping: computation cancelled")
		}
		return status.Error(codes.Canceled, "cancelled: the computation was stopped")
	case errors.As(err, &ref):
		s.met.rejected.WithLabelValues(ref.Reason).Inc()
		return resourceExhausted(ref)
	case errors.As(err, &ve):
		return invalidArgument("", ve.Violations)
	}
	s.log.Error("internal error", "method", method, "err", err)
	return status.Error(codes.Internal, "internal error (logged on the server)")
}

// resourceExhausted says which cap refused the computation and when to
// retry.
func resourceExhausted(r *gate.Refusal) error {
	st := status.New(codes.ResourceExhausted, r.Error())
	retry := time.Second
	if r.Wait > 0 {
		retry = r.Wait / 10
	}
	if d, err := st.WithDetails(
		&errdetails.QuotaFailure{Violations: []*errdetails.QuotaFailure_Violation{{Subject: "computations", Description: r.Error()}}},
		&errdetails.RetryInfo{RetryDelay: durationpb.New(retry)},
	); err == nil {
		st = d
	}
	return st.Err()
}
