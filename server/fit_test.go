package server

import (
	"errors"
	"io"
	"math"
	"sort"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// fitQ are wavevectors of the rock-salt-like example (fcc): along Γ–X, at
// X, L and K, and a general point: 42 frequencies.
var fitQ = [][3]float64{{0.1, 0, 0.1}, {0.25, 0, 0.25}, {0.5, 0, 0.5}, {0.2, 0.2, 0.2}, {0.5, 0.5, 0.5}, {0.375, 0.375, 0.75}, {0.15, 0.05, 0.3}}

// fitPaths are the four shell constants fitted on the rock-salt-like
// example.
var fitPaths = []string{"shells[0].k_long", "shells[0].k_trans", "shells[1].k_long", "shells[2].k_long"}

// measured asks the server for the frequencies of model at fitQ and
// returns them as fit data (σ = 0.05 THz, unlabelled).
func measured(t *testing.T, ts *testServer, model *modegridv1.Crystal) []*modegridv1.FrequencyDatum {
	t.Helper()
	return measuredFor(t, ts, model)
}

// measuredFor is measured for tests and benchmarks.
func measuredFor(t testing.TB, ts *testServer, model *modegridv1.Crystal) []*modegridv1.FrequencyDatum {
	t.Helper()
	var pts []*modegridv1.QPoint
	for _, q := range fitQ {
		pts = append(pts, &modegridv1.QPoint{Q1: q[0], Q2: q[1], Q3: q[2]})
	}
	stream, err := ts.api.ComputeModes(testContext(t), &modegridv1.ComputeModesRequest{Model: inline(model),
		Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: &modegridv1.QPointList{Points: pts}}}})
	if err != nil {
		t.Fatal(err)
	}
	var out []*modegridv1.FrequencyDatum
	for {
		chunk, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			return out
		}
		if err != nil {
			t.Fatal(err)
		}
		for _, p := range chunk.GetPoints() {
			for _, f := range p.GetFrequencies() {
				if f > 0 {
					out = append(out, &modegridv1.FrequencyDatum{Q: p.GetQ(), FrequencyThz: f, SigmaThz: 0.05})
				}
			}
		}
	}
}

// runFit calls Fit and returns its progress messages and its result.
func runFit(t *testing.T, ts *testServer, req *modegridv1.FitRequest) ([]*modegridv1.FitResponse, *modegridv1.FitResponse, error) {
	t.Helper()
	stream, err := ts.api.Fit(testContext(t), req)
	if err != nil {
		return nil, nil, err
	}
	var progress []*modegridv1.FitResponse
	var last *modegridv1.FitResponse
	for {
		msg, err := stream.Recv()
		if errors.Is(err, io.EOF) {
			return progress, last, nil
		}
		if err != nil {
			return progress, nil, err
		}
		if msg.GetProgress() != nil {
			progress = append(progress, msg)
		}
		last = msg
	}
}

// perturbed is the rock-salt-like example with its four fitted constants
// moved 10–30 % off.
func perturbed(t testing.TB) (start, truth *modegridv1.Crystal) {
	truth = example(t, "rocksalt-like")
	start = proto.Clone(truth).(*modegridv1.Crystal)
	start.Shells[0].KLong *= 1.3
	start.Shells[0].KTrans *= 0.7
	start.Shells[1].KLong *= 1.2
	start.Shells[2].KLong *= 0.9
	return start, truth
}

func freeParams(paths ...string) []*modegridv1.FitParameter {
	var out []*modegridv1.FitParameter
	for _, p := range paths {
		out = append(out, &modegridv1.FitParameter{Path: p})
	}
	return out
}

// TestFitRPC: over real gRPC, a fit to the rock-salt-like example's own
// frequencies (from ComputeModes) streams its progress with a falling χ²
// and returns the four constants to 1e-8, with errors and a fitted model
// whose hash ComputeDispersion accepts at once, and which equals the hash
// of the returned model sent inline.
func TestFitRPC(t *testing.T) {
	ts := startServer(t, Config{MetricsListen: "off"})
	start, truth := perturbed(t)
	req := &modegridv1.FitRequest{Model: inline(start), Free: freeParams(fitPaths...), Frequencies: measured(t, ts, truth)}
	progress, last, err := runFit(t, ts, req)
	if err != nil {
		t.Fatal(err)
	}
	res := last.GetResult()
	if res == nil || len(progress) < 2 {
		t.Fatalf("%d progress messages and result %v; want progress then a result", len(progress), res)
	}
	for i := 1; i < len(progress); i++ {
		if progress[i].GetProgress().GetChiSquare() > progress[i-1].GetProgress().GetChiSquare() {
			t.Errorf("χ² rose from %v to %v", progress[i-1].GetProgress().GetChiSquare(), progress[i].GetProgress().GetChiSquare())
		}
	}
	want := []float64{truth.Shells[0].KLong, truth.Shells[0].KTrans, truth.Shells[1].KLong, truth.Shells[2].KLong}
	for i, p := range res.GetParameters() {
		if p.GetPath() != fitPaths[i] || math.Abs(p.GetValue()-want[i]) > 1e-8*want[i] || !p.GetDetermined() || !(p.GetStdErrorUnscaled() > 0) {
			t.Errorf("parameter %d: %+v; want %s = %v, determined, with an error", i, p, fitPaths[i], want[i])
		}
	}
	if len(res.GetResiduals()) != len(req.GetFrequencies()) || res.GetDegreesOfFreedom() != uint32(len(req.GetFrequencies())-4) ||
		len(res.GetCorrelation()) != 16 || !res.GetConverged() {
		t.Errorf("residuals %d, dof %d, correlation %d, converged %v", len(res.GetResiduals()), res.GetDegreesOfFreedom(), len(res.GetCorrelation()), res.GetConverged())
	}
	if math.Abs(res.GetFitted().GetShells()[0].GetKLong()-want[0]) > 1e-8*want[0] || res.GetFitted().GetName() != start.GetName() {
		t.Errorf("fitted model shells[0] %v, name %q", res.GetFitted().GetShells()[0], res.GetFitted().GetName())
	}
	disp, err := ts.api.ComputeDispersion(testContext(t), &modegridv1.ComputeDispersionRequest{Model: byHash(res.GetFittedModelHash()),
		Path: []*modegridv1.PathPoint{{Label: "G"}, {Label: "X"}}, Points: 5})
	if err != nil {
		t.Fatalf("the fitted model's hash: %v", err)
	}
	chk, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: inline(res.GetFitted())})
	if err != nil || chk.GetModelHash() != res.GetFittedModelHash() || disp.GetModelHash() != res.GetFittedModelHash() {
		t.Errorf("hashes: fitted %s, dispersion %s, the fitted model inline %s (%v)", res.GetFittedModelHash(), disp.GetModelHash(), chk.GetModelHash(), err)
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_computations_total", map[string]string{"kind": kindFit}); n != 1 {
		t.Errorf("fit computations counted %v; want 1", n)
	}
	if last.GetModelHash() == res.GetFittedModelHash() || !isHash(last.GetModelHash()) {
		t.Errorf("response model hash %q: want the starting model's", last.GetModelHash())
	}
}

// TestFitRPCByHash: a starting model sent by hash is fitted from its
// stored source; an unknown hash is NOT_FOUND.
func TestFitRPCByHash(t *testing.T) {
	ts := startServer(t, Config{MetricsListen: "off"})
	start, truth := perturbed(t)
	chk, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: inline(start)})
	if err != nil {
		t.Fatal(err)
	}
	req := &modegridv1.FitRequest{Model: byHash(chk.GetModelHash()), Free: freeParams(fitPaths[:2]...), Frequencies: measured(t, ts, truth)[:12],
		Ties: []*modegridv1.FitTie{{Path: "shells[2].k_long", To: "shells[0].k_long", Ratio: 0.1}}}
	_, last, err := runFit(t, ts, req)
	if err != nil || last.GetResult() == nil {
		t.Fatalf("fit by hash: %v, %v", last, err)
	}
	if ties := last.GetResult().GetTies(); len(ties) != 1 || ties[0].GetValue() != 0.1*last.GetResult().GetParameters()[0].GetValue() {
		t.Errorf("ties %v", ties)
	}
	req.Model = byHash(strings.Repeat("ab", 32))
	if _, _, err := runFit(t, ts, req); status.Code(err) != codes.NotFound {
		t.Errorf("unknown hash: %v; want NOT_FOUND", err)
	}
}

// TestFitRPCValidation: a request wrong everywhere is refused
// INVALID_ARGUMENT naming every bad field, with the request's paths (the
// model's own under model.crystal), before any computation.
func TestFitRPCValidation(t *testing.T) {
	ts := startServer(t, Config{MetricsListen: "off"})
	bad := example(t, "chain")
	bad.Sites[0].MassAmu = -1
	one := func(v float64) *float64 { return &v }
	req := &modegridv1.FitRequest{
		Model: inline(bad),
		Free:  []*modegridv1.FitParameter{{Path: "springs[0].k_long", Lower: one(2), Upper: one(1)}, {Path: "shells[4].k_long"}},
		Ties:  []*modegridv1.FitTie{{Path: "springs[0].k_trans", To: "springs[0].k_trans"}},
		Frequencies: []*modegridv1.FrequencyDatum{
			{Q: &modegridv1.QPoint{Q1: 0.1, Q2: 0.3}, FrequencyThz: 1, SigmaThz: -1},
			{Q: &modegridv1.QPoint{Q1: 0.2}, FrequencyThz: math.Inf(1), SigmaThz: 1, Polarization: 9}},
		GammaFrequencies: []*modegridv1.GammaFrequencyDatum{{FrequencyThz: 1, SigmaThz: 1, Branch: 1}},
		SoundVelocities:  []*modegridv1.SoundVelocityDatum{{KmS: 1, SigmaKmS: 1}},
		ElasticConstants: []*modegridv1.ElasticConstantDatum{{Ij: 17, Gpa: 1, SigmaGpa: 1}},
		HeatCapacities: []*modegridv1.HeatCapacityData{
			{Basis: 7, Points: []*modegridv1.HeatCapacityPoint{{TemperatureK: -3, Value: 1, Sigma: 1}}},
			{Grid: &modegridv1.MonkhorstPackGrid{Mesh: []uint32{5000000}}, Points: []*modegridv1.HeatCapacityPoint{{TemperatureK: 3, Value: 1, Sigma: 1}}}},
		MaxEvaluations: 20000,
	}
	_, _, err := runFit(t, ts, req)
	got := badFields(t, err)
	want := []string{
		"elastic_constants[0]", "elastic_constants[0].ij",
		"free[0].upper", "free[1].path",
		"frequencies[0].q.q2", "frequencies[0].sigma_thz", "frequencies[1].frequency_thz", "frequencies[1].polarization",
		"gamma_frequencies[0].branch",
		"heat_capacities[0].basis", "heat_capacities[0].grid", "heat_capacities[0].points[0].temperature_k", "heat_capacities[1].grid.mesh[0]",
		"max_evaluations", "model.crystal.sites[0].mass_amu",
		"sound_velocities[0].direction", "ties[0].to",
	}
	var fields []string
	for f := range got {
		fields = append(fields, f)
	}
	sort.Strings(fields)
	if strings.Join(fields, " ") != strings.Join(want, " ") {
		t.Errorf("fields\n got %v\nwant %v", fields, want)
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_computations_total", map[string]string{"kind": kindFit}); n != 0 {
		t.Errorf("fit computations %v after a refusal; want 0", n)
	}

	for name, src := range map[string]*modegridv1.ModelSource{
		"model.symmetrize":           {Source: &modegridv1.ModelSource_Crystal{Crystal: example(t, "chain")}, Symmetrize: true},
		"model.crystal.supercell_fc": inline(&modegridv1.Crystal{Lattice: bad.Lattice, Sites: bad.Sites, SupercellFc: &modegridv1.SupercellForceConstants{}}),
	} {
		_, _, err := runFit(t, ts, &modegridv1.FitRequest{Model: src, Free: freeParams("springs[0].k_long"),
			Frequencies: []*modegridv1.FrequencyDatum{{Q: &modegridv1.QPoint{Q1: 0.1}, FrequencyThz: 1, SigmaThz: 1}}})
		if _, ok := badFields(t, err)[name]; !ok {
			t.Errorf("%s: %v; want a violation of %s", name, err, name)
		}
	}
}

// TestFitRPCRefusedBeforeWork: a fit whose estimated work exceeds the
// server's compute-time bound (a heat-capacity grid of 40³ points summed
// at each of 10 000 evaluations) is refused on max_evaluations before any
// computation, the model not even compiled.
func TestFitRPCRefusedBeforeWork(t *testing.T) {
	ts := startServer(t, Config{MetricsListen: "off", MaxComputeSeconds: 10})
	req := &modegridv1.FitRequest{Model: inline(example(t, "rocksalt-like")), Free: freeParams(fitPaths...), MaxEvaluations: 10000,
		HeatCapacities: []*modegridv1.HeatCapacityData{{Grid: &modegridv1.MonkhorstPackGrid{Mesh: []uint32{40, 40, 40}},
			Points: []*modegridv1.HeatCapacityPoint{{TemperatureK: 100, Value: 20, Sigma: 1}}}}}
	_, _, err := runFit(t, ts, req)
	got := badFields(t, err)
	if d, ok := got["max_evaluations"]; !ok || !strings.Contains(d, "at least") {
		t.Errorf("violations %v; want max_evaluations refused from the request (at least …)", got)
	}
	for _, kind := range []string{kindCompile, kindFit} {
		if n := metric(t, ts.srv.Registry(), "modegrid_computations_total", map[string]string{"kind": kind}); n != 0 {
			t.Errorf("%s computations %v; want 0", kind, n)
		}
	}
}
