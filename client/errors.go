package client

import (
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// FieldViolations returns the bad fields an INVALID_ARGUMENT error carries
// in its google.rpc.BadRequest details (field paths like
// "model.crystal.sites[2].mass_amu"), or nil for any other error.
func FieldViolations(err error) []*modegridv1.FieldViolation {
	st, ok := status.FromError(err)
	if !ok || st.Code() != codes.InvalidArgument {
		return nil
	}
	var out []*modegridv1.FieldViolation
	for _, d := range st.Details() {
		if br, ok := d.(*errdetails.BadRequest); ok {
			for _, v := range br.GetFieldViolations() {
				out = append(out, &modegridv1.FieldViolation{Field: v.GetField(), Description: v.GetDescription()})
			}
		}
	}
	return out
}

// IsUnreachable reports whether err means no server could be reached, as
// opposed to a server that answered: UNAVAILABLE (after every retry, or
// when no server became ready within the ready wait), or DEADLINE_EXCEEDED
// reached while the call was still waiting for a ready server.
func IsUnreachable(err error) bool {
	return status.Code(err) == codes.Unavailable || waitedOut(err)
}
