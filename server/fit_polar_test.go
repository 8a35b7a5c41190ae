package server

import (
	"math"
	"testing"

	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// polarChargeTies tie the diagonal of both charges of the polar example to
// sites[0].born_charge[0]: Z_M = z·1, Z_X = −z·1 (neutral for every z).
func polarChargeTies() []*modegridv1.FitTie {
	to := "sites[0].born_charge[0]"
	return []*modegridv1.FitTie{{Path: "sites[0].born_charge[4]", To: to}, {Path: "sites[0].born_charge[8]", To: to},
		{Path: "sites[1].born_charge[0]", To: to, Ratio: -1}, {Path: "sites[1].born_charge[4]", To: to, Ratio: -1},
		{Path: "sites[1].born_charge[8]", To: to, Ratio: -1}}
}

// TestFitPolarRPC: over real gRPC, a fit of the polar example's charge
// (tied ±, neutral) and nearest-neighbour k_long to its own frequencies
// (from ComputeModes, unlabelled) returns z = 1.5 e and k_long = 30 N/m
// to 1e-8 from a start 20 % off; the returned model carries the fitted
// charges and ε∞, its hash equals that of the returned model sent inline,
// and ComputeInfrared accepts the hash at once and gives the truth's
// infrared-active (TO) frequency to 1e-8 — the values are the model's own.
func TestFitPolarRPC(t *testing.T) {
	ts := startServer(t, Config{MetricsListen: "off"})
	truth := polarExample(t)
	start := proto.Clone(truth).(*modegridv1.Crystal)
	start.Shells[0].KLong = 24
	for _, s := range start.GetSites() {
		sign := math.Copysign(1, s.BornCharge[0])
		s.BornCharge[0], s.BornCharge[4], s.BornCharge[8] = 1.2*sign, 1.2*sign, 1.2*sign
	}
	req := &modegridv1.FitRequest{Model: inline(start), Free: freeParams("sites[0].born_charge[0]", "shells[0].k_long"),
		Ties: polarChargeTies(), Frequencies: measured(t, ts, truth)}
	_, last, err := runFit(t, ts, req)
	if err != nil {
		t.Fatal(err)
	}
	res := last.GetResult()
	for i, want := range []float64{1.5, 30} {
		if p := res.GetParameters()[i]; math.Abs(p.GetValue()-want) > 1e-8*want || !p.GetDetermined() {
			t.Errorf("parameter %d: %+v; want %v, determined", i, p, want)
		}
	}
	fitted := res.GetFitted()
	if z := fitted.GetSites()[1].GetBornCharge(); math.Abs(z[8]+1.5) > 1e-8 || z[1] != 0 {
		t.Errorf("fitted Z_X %v; want −1.5 on the diagonal", z)
	}
	if !proto.Equal(&modegridv1.Crystal{EpsilonInf: fitted.GetEpsilonInf()}, &modegridv1.Crystal{EpsilonInf: truth.GetEpsilonInf()}) {
		t.Errorf("fitted ε∞ %v; want the starting one %v", fitted.GetEpsilonInf(), truth.GetEpsilonInf())
	}
	chk, err := ts.api.CheckModel(testContext(t), &modegridv1.CheckModelRequest{Model: inline(fitted)})
	if err != nil || chk.GetModelHash() != res.GetFittedModelHash() {
		t.Fatalf("fitted hash %s, the fitted model inline %s (%v)", res.GetFittedModelHash(), chk.GetModelHash(), err)
	}
	ir := &modegridv1.ComputeInfraredRequest{Model: byHash(res.GetFittedModelHash()), Direction: &modegridv1.Vec3{X: 1}, Points: 11}
	got, err := ts.api.ComputeInfrared(testContext(t), ir)
	if err != nil {
		t.Fatalf("ComputeInfrared on the fitted hash: %v", err)
	}
	ir.Model = inline(truth)
	want, err := ts.api.ComputeInfrared(testContext(t), ir)
	if err != nil {
		t.Fatal(err)
	}
	if len(got.GetModes()) != len(want.GetModes()) {
		t.Fatalf("%d modes; want %d", len(got.GetModes()), len(want.GetModes()))
	}
	for i, m := range got.GetModes() {
		w := want.GetModes()[i].GetFrequency()
		if math.Abs(m.GetFrequency()-w) > 1e-8*math.Max(1, math.Abs(w)) {
			t.Errorf("infrared mode %d: %v; want %v", i, m.GetFrequency(), w)
		}
	}
}

// TestFitPolarRefusals: a polar fit with sound velocities is refused on
// sound_velocities (the fit's long-wave limit is short-range only), and a
// charge path on a model without charges on free[0].path.
func TestFitPolarRefusals(t *testing.T) {
	ts := startServer(t, Config{MetricsListen: "off"})
	truth := polarExample(t)
	data := measured(t, ts, truth)
	_, _, err := runFit(t, ts, &modegridv1.FitRequest{Model: inline(truth), Free: freeParams("shells[0].k_long"), Frequencies: data,
		SoundVelocities: []*modegridv1.SoundVelocityDatum{{Direction: &modegridv1.Vec3{X: 1}, KmS: 3, SigmaKmS: 0.1, Branch: 1}}})
	if f := badFields(t, err); f["sound_velocities"] == "" {
		t.Errorf("violations %v; want sound_velocities", f)
	}
	_, _, err = runFit(t, ts, &modegridv1.FitRequest{Model: inline(example(t, "rocksalt-like")), Free: freeParams("sites[0].born_charge[0]"), Frequencies: data})
	if f := badFields(t, err); f["free[0].path"] == "" {
		t.Errorf("violations %v; want free[0].path", f)
	}
}
