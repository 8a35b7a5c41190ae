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

// violations is the engine's collector, used as is: one Violation type
// and one collector from the engine's checks to the BadRequest. Its Err is
// a *physics.ValidationError, which toStatus turns into INVALID_ARGUMENT.
type violations = physics.Violations

// invalidArgument builds an INVALID_ARGUMENT status carrying every
// violation as a google.rpc.BadRequest field violation. prefix is joined to
// each field path.
func invalidArgument(prefix string, vs []physics.Violation) error {
	br := &errdetails.BadRequest{}
	var msg strings.Builder
	msg.WriteString("invalid request: ")
	for i, v := range vs {
		f := physics.JoinField(prefix, v.Field)
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
	st, err := status.New(codes.NotFound, fmt.Sprintf("model %s is not known to this server (never sent or evicted): send it inline, or upload it (UploadModel) when it is too large for one message", hash)).
		WithDetails(&errdetails.ResourceInfo{ResourceType: "modegrid.v1.Crystal", ResourceName: hash, Description: "resend the model inline in ModelSource.crystal, or through UploadModel"})
	if err != nil {
		return status.Error(codes.NotFound, "model "+hash+" is not known to this server: send it inline or upload it")
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

// fieldMap maps the engine's field paths, relative to an option struct,
// onto a request's paths: each entry maps a leading engine field name
// ("width", "temperatures_k") to the request path it came from. One table
// per RPC; a name missing from the table maps to itself.
type fieldMap map[string]string

// addEngine records the violations of err, a check of the engine's (a
// *physics.ValidationError, or any error as one violation of fallback),
// under the request's paths. Violations of a field in skip are dropped: the
// conversion from the request already reported that field in the request's
// own terms (an unknown enum value, say).
func (fm fieldMap) addEngine(vs *violations, err error, fallback string, skip map[string]bool) {
	var ve *physics.ValidationError
	if !errors.As(err, &ve) {
		vs.AddErr("", fallback, err)
		return
	}
	for _, v := range ve.Violations {
		head, rest := splitField(v.Field)
		if skip[head] {
			continue
		}
		if to, ok := fm[head]; ok {
			head = to
		}
		vs.Add(physics.JoinField(head, rest), "%s", v.Description)
	}
}

// splitField splits "temperatures_k[3]" into "temperatures_k" and "[3]",
// "range.step_k" into "range" and "step_k".
func splitField(f string) (head, rest string) {
	i := strings.IndexAny(f, ".[")
	switch {
	case i < 0:
		return f, ""
	case f[i] == '.':
		return f[:i], f[i+1:]
	default:
		return f[:i], f[i:]
	}
}

// violatedFields is the set of leading field names in a
// *physics.ValidationError (none for nil or another error).
func violatedFields(err error) map[string]bool {
	out := map[string]bool{}
	var ve *physics.ValidationError
	if errors.As(err, &ve) {
		for _, v := range ve.Violations {
			head, _ := splitField(v.Field)
			out[head] = true
		}
	}
	return out
}
