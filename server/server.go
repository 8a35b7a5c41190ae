// Package server implements the modegrid gRPC service. Handlers convert
// protobuf messages to physics types at the edge, call package physics, and
// convert back; they are the only place that makes gRPC status errors.
package server

import (
	"context"
	"fmt"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/status"

	"github.com/materials-lab/modegrid/physics"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// Service implements modegridv1.ModegridServiceServer.
type Service struct {
	modegridv1.UnimplementedModegridServiceServer
}

// NewService returns a ready Service.
func NewService() *Service { return &Service{} }

// Register adds the modegrid service and the standard health service to s,
// and returns the health server so the caller can follow readiness.
func Register(s *grpc.Server, svc *Service) *health.Server {
	modegridv1.RegisterModegridServiceServer(s, svc)
	h := health.NewServer()
	healthpb.RegisterHealthServer(s, h)
	h.SetServingStatus("", healthpb.HealthCheckResponse_SERVING)
	h.SetServingStatus(modegridv1.ModegridService_ServiceDesc.ServiceName, healthpb.HealthCheckResponse_SERVING)
	return h
}

func (s *Service) model(src *modegridv1.ModelSource) (*physics.Model, error) {
	if src.GetCrystal() == nil {
		return nil, invalidArgument("", []physics.Violation{{Field: "model", Description: "a model is required"}})
	}
	m, err := physics.Compile(crystalFromProto(src.GetCrystal()), physics.Options{EnforceSumRule: src.GetEnforceSumRule()})
	if err != nil {
		return nil, compileError("model.crystal.", err)
	}
	return m, nil
}

// ComputeModes streams the modes at the requested q-points.
func (s *Service) ComputeModes(req *modegridv1.ComputeModesRequest, stream grpc.ServerStreamingServer[modegridv1.ComputeModesResponse]) error {
	m, err := s.model(req.GetModel())
	if err != nil {
		return err
	}
	list := req.GetQpoints().GetList()
	if list == nil {
		return invalidArgument("", []physics.Violation{{Field: "qpoints", Description: "an explicit q-point list is required"}})
	}
	var vs []physics.Violation
	for i, q := range list.GetPoints() {
		for k, x := range []float64{q.GetQ1(), q.GetQ2(), q.GetQ3()} {
			if k >= m.Dim() && x != 0 {
				vs = append(vs, physics.Violation{Field: fmt.Sprintf("qpoints.list.points[%d].q%d", i, k+1), Description: fmt.Sprintf("must be 0 for a %d-dimensional crystal, got %v", m.Dim(), x)})
			}
		}
	}
	if len(vs) > 0 {
		return invalidArgument("", vs)
	}
	unit := unitFromProto(req.GetUnit())
	resp := &modegridv1.ComputeModesResponse{Total: uint32(len(list.GetPoints())), Unit: req.GetUnit()}
	for _, q := range list.GetPoints() {
		if err := stream.Context().Err(); err != nil {
			return status.FromContextError(err).Err()
		}
		f := m.FrequenciesTHz([3]float64{q.GetQ1(), q.GetQ2(), q.GetQ3()})
		for k := range f {
			f[k] = unit.FromTHz(f[k])
		}
		resp.Points = append(resp.Points, &modegridv1.Modes{Q: q, Weight: 1, Frequencies: f})
	}
	return stream.Send(resp)
}

func unitFromProto(u modegridv1.FrequencyUnit) physics.Unit {
	switch u {
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV:
		return physics.MeV
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1:
		return physics.CM1
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_RAD_PER_S:
		return physics.RadPerS
	default:
		return physics.THz
	}
}

var _ = context.Background
var _ = codes.OK
