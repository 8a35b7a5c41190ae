package server

import (
	"math"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// Fuzz targets of the heat RPCs: arbitrary bytes as the request, with the
// invariants of fuzzRPC (no panic, no hang, INVALID_ARGUMENT naming fields
// of the schema) and finite numbers in every accepted answer.

func FuzzComputeGruneisen(f *testing.F) {
	fuzzRPC(f, rpcTarget{
		method: modegridv1.ModegridService_ComputeGruneisen_FullMethodName,
		req:    func() proto.Message { return &modegridv1.ComputeGruneisenRequest{} },
		check: func(fc fuzzCase, rs []proto.Message) {
			r := rs[0].(*modegridv1.ComputeGruneisenResponse)
			fc.finite("volumes, overlap", append(r.GetVolumesA3(), r.GetMinOverlap())...)
			for _, p := range r.GetPoints() {
				fc.finite("γ point", append(append(p.GetFrequenciesThz(), p.GetGamma()...), p.GetDistanceInvA())...)
			}
			for _, a := range r.GetAverages() {
				fc.finite("γ(T)", a.GetTemperatureK(), a.GetGamma())
			}
		},
		allowed: []codes.Code{codes.NotFound},
	})
}

func FuzzComputeQuasiHarmonic(f *testing.F) {
	fuzzRPC(f, rpcTarget{
		method: modegridv1.ModegridService_ComputeQuasiHarmonic_FullMethodName,
		req:    func() proto.Message { return &modegridv1.ComputeQuasiHarmonicRequest{} },
		check: func(fc fuzzCase, rs []proto.Message) {
			r := rs[0].(*modegridv1.ComputeQuasiHarmonicResponse)
			fits := []*modegridv1.EosFit{r.GetStaticFit()}
			for _, p := range r.GetPoints() {
				fc.finite("quasi-harmonic point", p.GetTemperatureK(), p.GetVolumeA3(), p.GetGibbsEnergyEv(), p.GetBulkModulusGpa(),
					p.GetVolumeExpansionPerK(), p.GetLinearExpansionPerK(), p.GetHeatCapacityVEvPerK(), p.GetHeatCapacityPEvPerK(),
					p.GetHeatCapacityVJPerMolK(), p.GetHeatCapacityPJPerMolK(), p.GetGruneisen(), p.GetEntropyFitRmsEvPerK())
				fits = append(fits, p.GetFit())
			}
			for _, e := range fits {
				fc.finite("fit", e.GetE0Ev(), e.GetV0A3(), e.GetB0Gpa(), e.GetB0Prime(), e.GetRmsResidualEv(), e.GetMaxResidualEv())
			}
		},
		allowed: []codes.Code{codes.NotFound, codes.FailedPrecondition},
	})
}

func FuzzComputeConductivity(f *testing.F) {
	fuzzRPC(f, rpcTarget{
		method: modegridv1.ModegridService_ComputeConductivity_FullMethodName,
		req:    func() proto.Message { return &modegridv1.ComputeConductivityRequest{} },
		check: func(fc fuzzCase, rs []proto.Message) {
			r := rs[0].(*modegridv1.ComputeConductivityResponse)
			fc.finite("constants", r.GetVolumeA3(), r.GetUmklappThetaK(), r.GetUmklappVelocityKmS(), r.GetUmklappMeanMassAmu(), r.GetDefectGamma())
			for _, s := range r.GetSeries() {
				for _, p := range s.GetPoints() {
					fc.finite("κ", append(p.GetKappaWPerMK(), p.GetKappaMeanWPerMK(), p.GetTemperatureK())...)
				}
				c := s.GetCumulative()
				fc.finite("cumulative", append(append(append(c.GetMeanFreePathM(), c.GetKappaByMeanFreePath()...), c.GetFrequencyThz()...), c.GetKappaByFrequency()...)...)
			}
		},
		allowed: []codes.Code{codes.NotFound, codes.FailedPrecondition},
	})
}

// heatSeeds are the seeds of the three heat targets: small valid requests
// on the fcc example at several volumes and some bad ones.
func heatSeeds(tb testing.TB) (gr, qh, co []proto.Message) {
	models, e := volumeModels(tb, 3, -0.02, -0.01, 0, 0.01, 0.02)
	fcc := inline(example(tb, "fcc"))
	gr = []proto.Message{
		&modegridv1.ComputeGruneisenRequest{Models: models[:2], Qpoints: mpGrid(false, 2, 2, 2), TemperaturesK: []float64{0, 300}},
		&modegridv1.ComputeGruneisenRequest{Models: models[1:4], Path: []*modegridv1.PathPoint{{Label: "G"}, {Label: "L"}}, PathPoints: 5},
		&modegridv1.ComputeGruneisenRequest{Models: []*modegridv1.ModelSource{fcc, inline(example(tb, "rocksalt-like"))}, Qpoints: qlist(0.1, 0.2)},
	}
	qh = []proto.Message{
		&modegridv1.ComputeQuasiHarmonicRequest{Models: models, StaticEnergiesEv: e, Qpoints: mpGrid(false, 3, 3, 3), TemperaturesK: []float64{0, 100, 600}},
		&modegridv1.ComputeQuasiHarmonicRequest{Models: models, StaticEnergiesEv: e, Qpoints: cells(2, 2, 2), TemperaturesK: []float64{10},
			PressureGpa: 5, Eos: modegridv1.EquationOfState_EQUATION_OF_STATE_BIRCH_MURNAGHAN},
		&modegridv1.ComputeQuasiHarmonicRequest{Models: models, StaticEnergiesEv: []float64{1, 2, 3, 4, math.NaN()}, Qpoints: mpGrid(false, 2, 2, 2), TemperaturesK: []float64{1}},
	}
	co = []proto.Message{
		&modegridv1.ComputeConductivityRequest{Model: fcc, Qpoints: mpGrid(false, 3, 3, 3), TemperaturesK: []float64{10, 300},
			Samples:      []*modegridv1.SampleGeometry{{Kind: modegridv1.SampleKind_SAMPLE_KIND_FILM, SizeM: 1e-8, Normal: &modegridv1.Vec3{X: 1}, Specularity: 0.5}},
			PointDefects: &modegridv1.PointDefectScattering{Enabled: true, SiteG2: []float64{1e-3}}, CumulativeTemperatureK: 300, CumulativeBins: 7},
		&modegridv1.ComputeConductivityRequest{Model: fcc, Qpoints: mpGrid(true, 2, 2, 2), Range: &modegridv1.TemperatureRange{StartK: 100, StopK: 300, StepK: 100},
			Umklapp: &modegridv1.UmklappScattering{Enabled: true, VolumeModels: models[1:3]}},
		&modegridv1.ComputeConductivityRequest{Model: fcc, Qpoints: mpGrid(false, 2, 2, 2), TemperaturesK: []float64{300},
			Samples:  []*modegridv1.SampleGeometry{{Kind: modegridv1.SampleKind_SAMPLE_KIND_WIRE, SizeM: 1e-7}},
			PowerLaw: &modegridv1.PowerLawScattering{Enabled: true, RatePerS: 1e10, Exponent: 2}, Umklapp: &modegridv1.UmklappScattering{Enabled: true, GruneisenPerBranch: []float64{1, 1, 2}}},
	}
	return gr, qh, co
}
