package server

import (
	"context"
	"math"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// TestNonFinite: a NaN or ±Inf of a response, at any depth, single
// or repeated, is named by its path; a response of finite numbers gives "".
func TestNonFinite(t *testing.T) {
	resp := func() *modegridv1.ComputeScatteringResponse {
		return &modegridv1.ComputeScatteringResponse{
			Energies: []float64{0, 1, 2},
			Points:   []*modegridv1.ScatteringPoint{{S: []float64{1, 2}}, {S: []float64{3, 4, 5}, QFrac: &modegridv1.QVector{Q1: 0.5}}},
			Powder:   []*modegridv1.PowderRow{{QInvA: 1, S: []float64{0}, Change: 0.01}},
			Sites:    []*modegridv1.SiteScattering{{UA2: make([]float64, 9)}},
		}
	}
	for _, tc := range []struct {
		name  string
		spoil func(r *modegridv1.ComputeScatteringResponse)
		want  string
	}{
		{"finite", func(*modegridv1.ComputeScatteringResponse) {}, ""},
		{"repeated in a repeated message", func(r *modegridv1.ComputeScatteringResponse) { r.Points[1].S[2] = math.NaN() }, "points[1].s[2]"},
		{"single in a nested message", func(r *modegridv1.ComputeScatteringResponse) { r.Points[1].QFrac.Q3 = math.Inf(-1) }, "points[1].q_frac.q3"},
		{"single in a repeated message", func(r *modegridv1.ComputeScatteringResponse) { r.Powder[0].Change = math.Inf(1) }, "powder[0].change"},
		{"top level", func(r *modegridv1.ComputeScatteringResponse) { r.Energies[1] = math.NaN() }, "energies[1]"},
		{"one of two", func(r *modegridv1.ComputeScatteringResponse) {
			r.Points[0].S[1] = math.NaN()
			r.Sites[0].UA2[4] = math.Inf(1)
		}, "points[0].s[1]|sites[0].u_a2[4]"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			r := resp()
			tc.spoil(r)
			// Range's field order is not defined: either of two may be named.
			if got := nonFinite(r.ProtoReflect(), ""); got != tc.want && !(got != "" && strings.Contains("|"+tc.want+"|", "|"+got+"|")) {
				t.Errorf("nonFinite = %q; want %q", got, tc.want)
			}
		})
	}
}

// TestNonFiniteResultRefused: a computation whose result holds a NaN gets
// INTERNAL naming the field, and the result is not cached (the next call
// computes again).
func TestNonFiniteResultRefused(t *testing.T) {
	s := NewService()
	calls := 0
	compute := func(context.Context) (*modegridv1.ComputeScatteringResponse, error) {
		calls++
		return &modegridv1.ComputeScatteringResponse{ModelHash: strings.Repeat("a", 64), Parameters: "p", Energies: []float64{0, math.NaN()}}, nil
	}
	for i := 0; i < 2; i++ {
		_, err := cachedResult(testContext(t), s, kindScatter, strings.Repeat("a", 64), "p", scatterCodec, compute)
		if status.Code(err) != codes.Internal || !strings.Contains(status.Convert(err).Message(), "energies[1]") {
			t.Fatalf("call %d: %v; want INTERNAL naming energies[1]", i, err)
		}
	}
	if calls != 2 {
		t.Errorf("computed %d times; want 2 (a refused result is not cached)", calls)
	}
}
