package server

import (
	"context"
	"math"
	"math/cmplx"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/fcimport"
	"github.com/materials-lab/modegrid/physics/polar"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// polarExample is the polar example crystal (Born charges ±1.5, ε∞ 2.8).
func polarExample(t testing.TB) *modegridv1.Crystal { return example(t, "polar-rocksalt-like") }

// TestInfraredOverGRPC: the infrared response of the polar example over
// real gRPC: three acoustic and three active modes at Γ, the
// Lyddane–Sachs–Teller relation (Phys. Rev. 59, 673 (1941)) between the
// highest frequency along the direction, the TO frequency and ε₀/ε∞ to
// 1e-8, R in [0, 1], and a second call served from the cache.
func TestInfraredOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	req := &modegridv1.ComputeInfraredRequest{Model: inline(polarExample(t)), Direction: &modegridv1.Vec3{X: 2},
		Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1, Points: 201}
	resp, err := ts.api.ComputeInfrared(testContext(t), req)
	if err != nil {
		t.Fatal(err)
	}
	if d := resp.GetDirection(); d.GetX() != 1 || d.GetY() != 0 {
		t.Errorf("direction %v; want (1, 0, 0)", d)
	}
	var acoustic, active int
	var to float64
	for _, m := range resp.GetModes() {
		switch {
		case m.GetAcoustic():
			acoustic++
		case m.GetActive():
			active++
			to = m.GetFrequency()
		}
	}
	if acoustic != 3 || active != 3 {
		t.Fatalf("acoustic %d, active %d; want 3 and 3", acoustic, active)
	}
	lo := resp.GetLoFrequencies()[5]
	if got, want := lo*lo/(to*to), resp.GetEpsilonStaticAlong()/resp.GetEpsilonInfAlong(); math.Abs(got-want) > 1e-8*want {
		t.Errorf("ω_LO²/ω_TO² = %.12g, ε₀/ε∞ = %.12g", got, want)
	}
	if len(resp.GetSamples()) != 201 {
		t.Fatalf("%d samples; want 201", len(resp.GetSamples()))
	}
	for _, s := range resp.GetSamples() {
		if !(s.GetReflectivity() >= 0 && s.GetReflectivity() <= 1) || s.GetEpsilonImag() < 0 {
			t.Fatalf("sample %v: R or ε″ out of range", s)
		}
	}
	again, err := ts.api.ComputeInfrared(testContext(t), req)
	if err != nil || !proto.Equal(again, resp) {
		t.Fatalf("second call: %v (equal %v)", err, proto.Equal(again, resp))
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_computations_total", map[string]string{"kind": kindInfrared}); n != 1 {
		t.Errorf("infrared computations %v; want 1 (the second call from the cache)", n)
	}
	if n := metric(t, ts.srv.Registry(), "modegrid_cache_hits_total", map[string]string{"kind": kindInfrared, "level": "memory"}); n != 1 {
		t.Errorf("infrared cache hits %v; want 1", n)
	}
}

// TestInfraredRefusals: every bad field of an infrared request at once,
// a model without charges, and per-mode dampings of the wrong count.
func TestInfraredRefusals(t *testing.T) {
	ts := startServer(t, Config{})
	_, err := ts.api.ComputeInfrared(testContext(t), &modegridv1.ComputeInfraredRequest{Model: inline(polarExample(t)),
		Unit: 9, Min: math.NaN(), Points: 1, Damping: -1})
	fields := badFields(t, err)
	for _, f := range []string{"unit", "direction", "min", "points", "damping"} {
		if _, ok := fields[f]; !ok {
			t.Errorf("violations %v do not name %s", fields, f)
		}
	}
	_, err = ts.api.ComputeInfrared(testContext(t), &modegridv1.ComputeInfraredRequest{Model: inline(polarExample(t)),
		Direction: &modegridv1.Vec3{Z: 1}, Min: 5, Max: 1})
	if f := badFields(t, err); f["max"] == "" {
		t.Errorf("max < min: %v", f)
	}
	_, err = ts.api.ComputeInfrared(testContext(t), &modegridv1.ComputeInfraredRequest{Model: inline(example(t, "rocksalt-like")),
		Direction: &modegridv1.Vec3{Z: 1}})
	if f := badFields(t, err); !strings.Contains(f["model"], "Born effective charges") {
		t.Errorf("model without charges: %v", f)
	}
	_, err = ts.api.ComputeInfrared(testContext(t), &modegridv1.ComputeInfraredRequest{Model: inline(polarExample(t)),
		Direction: &modegridv1.Vec3{Z: 1}, ModeDamping: []float64{1, 2}})
	if f := badFields(t, err); f["mode_damping"] == "" {
		t.Errorf("two dampings for six modes: %v", f)
	}
}

// TestInfraredUnstable: an imaginary active mode at Γ (springs far too
// weak for the charges) is FAILED_PRECONDITION.
func TestInfraredUnstable(t *testing.T) {
	ts := startServer(t, Config{})
	c := polarExample(t)
	for _, s := range c.GetShells() {
		s.KLong, s.KTrans = s.GetKLong()/50, s.GetKTrans()/50
	}
	_, err := ts.api.ComputeInfrared(testContext(t), &modegridv1.ComputeInfraredRequest{Model: inline(c), Direction: &modegridv1.Vec3{X: 1}})
	if st := status.Convert(err); st.Code() != codes.FailedPrecondition {
		t.Fatalf("weak springs: %v; want FAILED_PRECONDITION", err)
	}
}

// TestPolarModelRefusals: bad polar data are INVALID_ARGUMENT with every
// field path at once, and polar data on a 2D model are refused; CheckModel
// lists the same violations in its response.
func TestPolarModelRefusals(t *testing.T) {
	ts := startServer(t, Config{})
	bad := polarExample(t)
	bad.Sites[1].BornCharge = bad.Sites[1].BornCharge[:4]
	bad.Sites[0].BornCharge[8] = math.Inf(1)
	bad.EpsilonInf[4] = -1
	_, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(bad), Qpoints: qlist(0.1)})
	fields := badFields(t, err)
	for _, f := range []string{"model.crystal.sites[0].born_charge[8]", "model.crystal.sites[1].born_charge", "model.crystal.epsilon_inf"} {
		if _, ok := fields[f]; !ok {
			t.Errorf("violations %v do not name %s", fields, f)
		}
	}
	chk, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: inline(bad)})
	if err != nil || chk.GetValid() || len(chk.GetViolations()) != 3 {
		t.Errorf("CheckModel: %v, valid %v, %d violations; want 3", err, chk.GetValid(), len(chk.GetViolations()))
	}
	flat := example(t, "square-net")
	for _, s := range flat.Sites {
		s.BornCharge = []float64{1, 0, 0, 0, 1, 0, 0, 0, 1}
	}
	flat.EpsilonInf = []float64{2, 0, 0, 0, 2, 0, 0, 0, 2}
	_, err = ts.api.ComputeDispersion(testContext(t), &modegridv1.ComputeDispersionRequest{Model: inline(flat),
		Path: []*modegridv1.PathPoint{{Label: "G"}, {Label: "X"}}})
	if f := badFields(t, err); !strings.Contains(f["model.crystal.epsilon_inf"], "three-dimensional") {
		t.Errorf("2D polar model: %v", f)
	}
}

// TestCheckModelPolar: CheckModel reports the charge-neutrality violation
// as given and whether it was enforced; enforcing it changes the model
// (and its hash), and the Ewald sum's size is reported.
func TestCheckModelPolar(t *testing.T) {
	ts := startServer(t, Config{})
	c := polarExample(t)
	c.Sites[0].BornCharge[0] = 1.6 // Σ Z*_xx = 0.1
	src := inline(c)
	plain, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: src})
	if err != nil {
		t.Fatal(err)
	}
	p := plain.GetPolar()
	if math.Abs(p.GetChargeNeutralityViolationE()-0.1) > 1e-12 || p.GetChargeNeutralityEnforced() {
		t.Errorf("polar check %v; want violation 0.1 e, not enforced", p)
	}
	if p.GetEwaldParameterInvA() <= 0 || p.GetEwaldRealTerms() == 0 || p.GetEwaldReciprocalVectors() == 0 {
		t.Errorf("Ewald sizes missing: %v", p)
	}
	src.EnforceChargeNeutrality = true
	enf, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: src})
	if err != nil {
		t.Fatal(err)
	}
	if !enf.GetPolar().GetChargeNeutralityEnforced() || enf.GetPolar().GetChargeNeutralityViolationE() != p.GetChargeNeutralityViolationE() {
		t.Errorf("enforced check %v", enf.GetPolar())
	}
	if enf.GetModelHash() == plain.GetModelHash() {
		t.Error("enforcing a violated charge sum rule kept the hash")
	}
	if other, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: inline(example(t, "rocksalt-like"))}); err != nil || other.GetPolar() != nil {
		t.Errorf("non-polar model: %v, polar %v; want none", err, other.GetPolar())
	}
}

// TestGammaDirectionsOverGRPC: a q-point list's Γ points take their
// directions (LO–TO split, stated in gamma_direction), Γ without one the
// analytic part (gamma_analytic); a direction at a point that is not Γ, or
// a list of the wrong length, is refused.
func TestGammaDirectionsOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	list := &modegridv1.QPointList{
		Points:          []*modegridv1.QPoint{{}, {}, {Q1: 0.5, Q3: 0.5}},
		GammaDirections: []*modegridv1.QPoint{{Q1: 1, Q2: 1}, {}, {}},
	}
	chunks, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(polarExample(t)),
		Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: list}}})
	if err != nil {
		t.Fatal(err)
	}
	pts := allPoints(chunks)
	along, analytic := pts[0], pts[1]
	if along.GetGammaDirection().GetQ1() != 1 || along.GetGammaAnalytic() || !analytic.GetGammaAnalytic() || pts[2].GetGammaAnalytic() {
		t.Errorf("flags: %v / %v / %v", along, analytic, pts[2])
	}
	fa, fn := along.GetFrequencies(), analytic.GetFrequencies()
	if !(fa[5] > fn[5]*1.2) || math.Abs(fa[3]-fn[3]) > 1e-9*fn[3] {
		t.Errorf("Γ along (1,1,0): %v THz; analytic %v: want the LO raised, the TO kept", fa, fn)
	}
	bad := &modegridv1.QPointList{Points: list.Points, GammaDirections: []*modegridv1.QPoint{{}, {}, {Q1: 1}}}
	_, err = collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(polarExample(t)),
		Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: bad}}})
	if f := badFields(t, err); !strings.Contains(f["qpoints.list.gamma_directions[2]"], "not Γ") {
		t.Errorf("direction at X: %v", f)
	}
	short := &modegridv1.QPointList{Points: list.Points, GammaDirections: []*modegridv1.QPoint{{Q1: 1}}}
	_, err = collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(polarExample(t)),
		Qpoints: &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: short}}})
	if f := badFields(t, err); f["qpoints.list.gamma_directions"] == "" {
		t.Errorf("one direction for three points: %v", f)
	}
}

// TestPolarPathAndGridsOverGRPC: a path through Γ samples it from both
// sides (gamma_direction set, one distance), the DOS and thermal replies
// of a polar model say their grid's Γ is analytic, and those of other
// models say nothing of the kind.
func TestPolarPathAndGridsOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	disp, err := ts.api.ComputeDispersion(testContext(t), &modegridv1.ComputeDispersionRequest{Model: inline(polarExample(t)), Points: 21,
		Path: []*modegridv1.PathPoint{{Label: "X"}, {Label: "G"}, {Label: "L"}}})
	if err != nil {
		t.Fatal(err)
	}
	var at []*modegridv1.DispersionSample
	for _, s := range disp.GetSamples() {
		if s.GetLabel() == "G" {
			at = append(at, s)
		}
	}
	if len(disp.GetSamples()) != 22 || len(at) != 2 || at[0].GetDistanceInvA() != at[1].GetDistanceInvA() ||
		at[0].GetGammaDirection() == nil || at[1].GetGammaDirection() == nil {
		t.Fatalf("%d samples, Γ samples %v", len(disp.GetSamples()), at)
	}
	if f := at[0].GetFrequencies(); !(f[5] > f[4]*1.2) {
		t.Errorf("Γ from X: %v; want LO above TO", f)
	}
	for name, want := range map[string]bool{"polar-rocksalt-like": true, "rocksalt-like": false} {
		dos, err := ts.api.ComputeDos(testContext(t), &modegridv1.ComputeDosRequest{Model: inline(example(t, name)), Qpoints: mpGrid(false, 4, 4, 4)})
		if err != nil {
			t.Fatal(err)
		}
		th, err := ts.api.ComputeThermal(testContext(t), &modegridv1.ComputeThermalRequest{Model: inline(example(t, name)), Qpoints: mpGrid(false, 4, 4, 4), TemperaturesK: []float64{300}})
		if err != nil {
			t.Fatal(err)
		}
		if dos.GetGammaAnalytic() != want || th.GetGammaAnalytic() != want {
			t.Errorf("%s: gamma_analytic dos %v thermal %v; want %v", name, dos.GetGammaAnalytic(), th.GetGammaAnalytic(), want)
		}
	}
}

// polarSupercell writes the polar example as a supercell force-constant
// set of its 3×3×3 supercell (54 atoms), computed from the model itself:
// Φ(i, j) = (1/N) Σ_q √(m_i m_j) D(q) e^{−2πi q·(n_j − n_i)} over the 27
// commensurate q (the analytic part at Γ, as a periodic supercell
// calculation holds no macroscopic field), in the model's N/m.
func polarSupercell(t *testing.T) (*modegridv1.Crystal, *physics.Model) {
	t.Helper()
	c := polarExample(t)
	m, err := physics.Compile(context.Background(), crystalFromProto(c), physics.Options{LongRange: polar.Builder()})
	if err != nil {
		t.Fatal(err)
	}
	type atom struct {
		site int
		n    [3]int
	}
	var atoms []atom
	for x := 0; x < 27; x++ {
		for s := 0; s < 2; s++ {
			atoms = append(atoms, atom{s, [3]int{x / 9, x / 3 % 3, x % 3}})
		}
	}
	var qs [][3]float64
	var ds [][]complex128
	for x := 0; x < 27; x++ {
		q := [3]float64{float64(x/9) / 3, float64(x/3%3) / 3, float64(x%3) / 3}
		qs = append(qs, q)
		ds = append(ds, m.DynamicalMatrix(q, nil))
	}
	fc := &modegridv1.SupercellForceConstants{Matrix: []int32{3, 0, 0, 0, 3, 0, 0, 0, 3}, Fractional: true}
	for _, a := range atoms {
		f := c.GetSites()[a.site].GetFrac()
		fc.Atoms = append(fc.Atoms, &modegridv1.SupercellAtom{Position: []float64{(f[0] + float64(a.n[0])) / 3, (f[1] + float64(a.n[1])) / 3, (f[2] + float64(a.n[2])) / 3}})
	}
	for _, ai := range atoms {
		for _, aj := range atoms {
			w := math.Sqrt(m.MassAmu(ai.site)*m.MassAmu(aj.site)) * physics.EVPerA2InNPerM / 27
			for al := 0; al < 3; al++ {
				for be := 0; be < 3; be++ {
					var v complex128
					for x, q := range qs {
						th := -2 * math.Pi * (q[0]*float64(aj.n[0]-ai.n[0]) + q[1]*float64(aj.n[1]-ai.n[1]) + q[2]*float64(aj.n[2]-ai.n[2]))
						v += ds[x][(3*ai.site+al)*6+3*aj.site+be] * cmplx.Rect(w, th)
					}
					fc.Phi = append(fc.Phi, real(v))
				}
			}
		}
	}
	c.Shells, c.SupercellFc = nil, fc
	return c, m
}

// TestPolarSupercellOverGRPC: a polar supercell set (the polar example's
// own force constants, dipole–dipole part included, as a 3×3×3
// calculation would give them) sent with its charges: the server takes
// the dipole part out before the fold and adds it back at every q, so the
// model's frequencies come back everywhere — between the commensurate
// points and along a direction at Γ too — to 1e-8 of the highest. Folding
// the same set without the charges (the dipole part truncated at the
// supercell's images) misses by far more near Γ.
func TestPolarSupercellOverGRPC(t *testing.T) {
	ts := startServer(t, Config{})
	c, m := polarSupercell(t)
	qs := [][3]float64{{0.13, 0.27, -0.31}, {0.05, 0, 0.05}, {1.0 / 3, 0, 0}, {0.5, 0.5, 0.5}, {}}
	list := &modegridv1.QPointList{}
	for _, q := range qs {
		list.Points = append(list.Points, &modegridv1.QPoint{Q1: q[0], Q2: q[1], Q3: q[2]})
		list.GammaDirections = append(list.GammaDirections, &modegridv1.QPoint{})
	}
	list.GammaDirections[4] = &modegridv1.QPoint{Q1: 1}
	set := &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: list}}
	chunks, err := collectModes(testContext(t), ts.api, &modegridv1.ComputeModesRequest{Model: inline(c), Qpoints: set})
	if err != nil {
		t.Fatal(err)
	}
	top := m.FrequenciesTHz([3]float64{})[5]
	for i, p := range allPoints(chunks) {
		want := m.FrequenciesTHz(qs[i])
		if i == 4 {
			want, _ = m.ModesToward(qs[i], m.CartesianQ([3]float64{1, 0, 0}))
		}
		for k, f := range p.GetFrequencies() {
			if math.Abs(f-want[k]) > 1e-8*top {
				t.Errorf("q=%v branch %d: %.12g THz from the supercell set, %.12g from the model", qs[i], k, f, want[k])
			}
		}
	}
	// The set folded as it is, without charges: the short-range fold alone.
	bare := crystalFromProto(c)
	bare.EpsilonInf = nil
	for i := range bare.Sites {
		bare.Sites[i].BornCharge = nil
	}
	blocks, _, err := fcimport.Fold(context.Background(), bare, setFromProto(c.GetSupercellFc()))
	if err != nil {
		t.Fatal(err)
	}
	bare.Blocks = blocks
	folded, err := physics.Compile(context.Background(), bare, physics.Options{})
	if err != nil {
		t.Fatal(err)
	}
	near := [3]float64{0.05, 0, 0.05}
	got, want := folded.FrequenciesTHz(near), m.FrequenciesTHz(near)
	miss := 0.0
	for k := range want {
		miss = math.Max(miss, math.Abs(got[k]-want[k]))
	}
	t.Logf("near Γ (q = %v): plain fold misses by %.3g THz (%.2g of the highest)", near, miss, miss/top)
	if miss < 1e-2*top {
		t.Errorf("the plain fold misses by only %.3g THz near Γ: the test would not tell the two apart", miss)
	}
}
