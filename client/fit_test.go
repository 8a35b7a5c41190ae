package client_test

import (
	"math"
	"testing"

	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// TestFit: the Fit helper over real gRPC recovers the monatomic chain's
// spring constant from its own frequencies (ω = 2 sqrt(K/M)|sin(πq)|,
// Kittel ch. 4), hands every progress message to the callback, and
// remembers the fitted model: sending it inline afterwards goes by hash.
func TestFit(t *testing.T) {
	var rec recorder
	addr, _ := startServer(t, "", rec.options()...)
	c := dial(t, addr)
	chain := example(t, "chain")
	K, M := chain.GetSprings()[0].GetKLong(), chain.GetSites()[0].GetMassAmu()
	var data []*modegridv1.FrequencyDatum
	for _, q := range []float64{0.1, 0.2, 0.35, 0.5} {
		nu := 2 * math.Sqrt(K/M) * math.Sin(math.Pi*q) * thzPerSqrtEVPerA2Amu
		data = append(data, &modegridv1.FrequencyDatum{Q: &modegridv1.QPoint{Q1: q}, FrequencyThz: nu, SigmaThz: 0.01})
	}
	start := proto.Clone(chain).(*modegridv1.Crystal)
	start.Springs[0].KLong = 0.6 * K
	var progress int
	resp, err := c.Fit(testContext(t), &modegridv1.FitRequest{Model: client.Inline(start),
		Free: []*modegridv1.FitParameter{{Path: "springs[0].k_long"}}, Frequencies: data},
		func(*modegridv1.FitProgress) { progress++ })
	if err != nil {
		t.Fatal(err)
	}
	res := resp.GetResult()
	if got := res.GetParameters()[0].GetValue(); math.Abs(got-K) > 1e-8*K {
		t.Errorf("K = %.12g; want %v (relative 1e-8)", got, K)
	}
	if progress < 2 {
		t.Errorf("%d progress messages; want at least 2", progress)
	}
	if _, err := c.Check(testContext(t), &modegridv1.CheckModelRequest{Model: client.Inline(res.GetFitted())}); err != nil {
		t.Fatal(err)
	}
	calls := rec.snapshot()
	last := calls[len(calls)-1]
	if last.inline || last.ref != res.GetFittedModelHash() {
		t.Errorf("the fitted model sent after the fit: inline %v, ref %q; want its hash %s", last.inline, last.ref, res.GetFittedModelHash())
	}
}
