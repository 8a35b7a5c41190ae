package server

import (
	"context"
	"fmt"
	"regexp"
	"strconv"
	"strings"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/thermo/qha"
	"github.com/materials-lab/modegrid/physics/transport"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

var conductivityCodec = protoCodec(func() *modegridv1.ComputeConductivityResponse { return &modegridv1.ComputeConductivityResponse{} })

// ComputeConductivity returns the lattice thermal conductivity of bulk and
// finite samples. Cached by (model hash, canonical parameters, which name
// the hashes of the Umklapp volume models).
func (s *Service) ComputeConductivity(ctx context.Context, req *modegridv1.ComputeConductivityRequest) (*modegridv1.ComputeConductivityResponse, error) {
	resp, err := s.computeConductivity(ctx, req)
	return resp, s.heatStatus(ctx, "ComputeConductivity", err)
}

// addNewViolations adds the engine's violations (transport.Options names
// its fields as the request does) of fields not already reported by the
// conversion from the request.
func addNewViolations(vs *violations, err error) {
	seen := map[string]bool{}
	for _, v := range vs.List() {
		seen[v.Field] = true
	}
	var sub violations
	sub.AddErr("", "", err)
	for _, v := range sub.List() {
		if !seen[v.Field] {
			vs.Add(v.Field, "%s", v.Description)
		}
	}
}

// conductivityOptions converts the request's scattering options (the grid
// and the volume models are the handler's).
func (s *Service) conductivityOptions(req *modegridv1.ComputeConductivityRequest, vs *violations) transport.Options {
	opt := transport.Options{AllowUnstable: req.GetAllowUnstable(), CumulativeTempK: canonFloat(req.GetCumulativeTemperatureK()),
		CumulativeBins: int(min(req.GetCumulativeBins(), transport.MaxCumulativeBins+1)), Cache: s.reductions}
	for i, sg := range req.GetSamples() {
		b := transport.Boundary{SizeM: canonFloat(sg.GetSizeM()), Specularity: canonFloat(sg.GetSpecularity())}
		switch sg.GetKind() {
		case modegridv1.SampleKind_SAMPLE_KIND_UNSPECIFIED, modegridv1.SampleKind_SAMPLE_KIND_BULK:
			b.Kind = transport.Bulk
		case modegridv1.SampleKind_SAMPLE_KIND_FILM:
			b.Kind = transport.Film
		case modegridv1.SampleKind_SAMPLE_KIND_WIRE:
			b.Kind = transport.Wire
		case modegridv1.SampleKind_SAMPLE_KIND_GRAIN:
			b.Kind = transport.Grain
		default:
			vs.Add(fmt.Sprintf("samples[%d].kind", i), "unknown sample kind %d", sg.GetKind())
		}
		if n := sg.GetNormal(); n != nil {
			b.Normal = [3]float64{canonFloat(n.GetX()), canonFloat(n.GetY()), canonFloat(n.GetZ())}
		}
		opt.Boundaries = append(opt.Boundaries, b)
	}
	if d := req.GetPointDefects(); d.GetEnabled() {
		opt.Defects = transport.PointDefects{On: true, SiteG2: canonList(d.GetSiteG2())}
	}
	if u := req.GetUmklapp(); u.GetEnabled() {
		opt.Umklapp = transport.Umklapp{On: true, B: canonFloat(u.GetB()), Gamma: canonFloat(u.GetGruneisen()),
			GammaBranch: canonList(u.GetGruneisenPerBranch()), ThetaK: canonFloat(u.GetThetaK()),
			VelocityKmS: canonFloat(u.GetVelocityKmS()), MeanMassAmu: canonFloat(u.GetMeanMassAmu())}
		if len(u.GetVolumeModels()) > 0 {
			opt.Umklapp.GammaMode = []float64{} // filled from the volume models; marks γ as given
		}
	}
	if p := req.GetPowerLaw(); p.GetEnabled() {
		opt.PowerLaw = transport.PowerLaw{On: true, RatePerS: canonFloat(p.GetRatePerS()), Exponent: canonFloat(p.GetExponent())}
	}
	opt.TempsK = s.temperatures(req, vs)
	return opt
}

func canonList(xs []float64) []float64 {
	if len(xs) == 0 {
		return nil
	}
	out := make([]float64, len(xs))
	for i, x := range xs {
		out[i] = canonFloat(x)
	}
	return out
}

func (s *Service) computeConductivity(ctx context.Context, req *modegridv1.ComputeConductivityRequest) (*modegridv1.ComputeConductivityResponse, error) {
	var vs violations
	opt := s.conductivityOptions(req, &vs)
	if len(opt.TempsK) > 0 {
		// γ per mode is filled later: check the rest with a placeholder.
		check := opt
		if check.Umklapp.GammaMode != nil {
			check.Umklapp.Gamma = 1
		}
		addNewViolations(&vs, check.Validate())
	}
	if vm := req.GetUmklapp().GetVolumeModels(); len(vm) > qha.MaxVolumes-1 {
		vs.Add("umklapp.volume_models", "%d models exceed the limit of %d", len(vm), qha.MaxVolumes-1)
	}
	if s.precheck(&vs, req.GetModel(), func(r rawModel, vs *violations) {
		// A lower bound before compiling: the stream of every point.
		if qs := s.qsetFor(req.GetQpoints(), r.size.Dim, false); qs != nil && vs.Len() == 0 && r.size.Dim == 3 {
			s.lowerBound(vs, estimate{cost: transport.ConductivityCost(r.grid(qs.grid), len(opt.TempsK), max(1, len(opt.Boundaries)), false, 0),
				field: "qpoints", change: "a smaller grid (qpoints)"})
		}
	}) {
		return nil, vs.Err()
	}
	e, err := s.resolve(ctx, req.GetModel(), &vs)
	if err != nil {
		return nil, err
	}
	var volumes []*modelEntry
	if vm := req.GetUmklapp().GetVolumeModels(); opt.Umklapp.On && len(vm) > 0 {
		if volumes, err = s.resolveModels(ctx, vm, "umklapp.volume_models", &vs); err != nil {
			return nil, err
		}
	}
	var set *qha.VolumeSet
	var est estimate
	if e != nil {
		set, est = s.checkConductivity(req, e, volumes, &opt, &vs)
	}
	if err := vs.Err(); err != nil {
		return nil, err
	}
	canon := conductivityParams(opt, volumes)
	return cachedResult(ctx, s, kindConductivity, e.hash, canon, conductivityCodec, func(ctx context.Context) (*modegridv1.ComputeConductivityResponse, error) {
		var res *transport.Result
		err := s.admitted(ctx, est, func(ctx context.Context) error {
			return s.run(ctx, kindConductivity, func(ctx context.Context) error {
				o := opt
				if set != nil {
					g, err := qha.GridGruneisen(ctx, set, o.Grid)
					if err != nil {
						return err
					}
					o.Umklapp.GammaMode = g.Gamma
				}
				var err error
				res, err = transport.Compute(ctx, e.m, o)
				return err
			})
		})
		if err != nil {
			return nil, err
		}
		s.met.qpoints.Add(float64(opt.Grid.Count()))
		return conductivityToProto(e.hash, canon, req, res), nil
	})
}

// checkConductivity checks the model-dependent parts (3D, grid, per-site
// and per-branch lists, the volume models), the reply size and the
// budget; it sets opt.Grid and returns the volume set (nil without volume
// models) and the estimate.
func (s *Service) checkConductivity(req *modegridv1.ComputeConductivityRequest, e *modelEntry, volumes []*modelEntry, opt *transport.Options, vs *violations) (*qha.VolumeSet, estimate) {
	m := e.m
	if m.Dim() != 3 || m.Polarizations() != 3 {
		vs.Add("model", "thermal conductivity is computed for 3D crystals with 3 polarizations, got %d dimensions and %d polarizations", m.Dim(), m.Polarizations())
		return nil, estimate{}
	}
	grid, ok := s.gridOnly(req.GetQpoints(), 3, vs)
	if !ok {
		return nil, estimate{}
	}
	opt.Grid = grid
	if g := opt.Umklapp.GammaBranch; len(g) > 0 && len(g) != m.ModeCount() {
		vs.Add("umklapp.gruneisen_per_branch", "one γ per branch: the model has %d branches, got %d values", m.ModeCount(), len(g))
	}
	if g := opt.Defects.SiteG2; len(g) > 0 && len(g) != m.Sites() {
		vs.Add("point_defects.site_g2", "one mass variance per site: the model has %d sites, got %d values", m.Sites(), len(g))
	}
	if opt.Defects.On && len(opt.Defects.SiteG2) == 0 {
		if _, err := transport.DefectGamma(m, nil); err != nil {
			vs.Add("point_defects.site_g2", "%v", err)
		}
	}
	var set *qha.VolumeSet
	if len(volumes) > 0 {
		set = volumeSet(append([]*modelEntry{e}, volumes...), 0, &violations{})
		if set == nil {
			s.volumeModelViolations(e, volumes, vs)
		}
	}
	nb := max(1, len(opt.Boundaries))
	bins := 0
	if opt.CumulativeTempK > 0 {
		bins = cmpInt(opt.CumulativeBins, transport.DefaultCumulativeBins)
	}
	reply := float64(nb) * (float64(len(opt.TempsK))*100 + float64(bins)*4*9 + 200)
	s.checkReply(vs, "temperatures_k", reply, fmt.Sprintf("%d samples × %d temperatures", nb, len(opt.TempsK)))
	if vs.Len() > 0 {
		return nil, estimate{}
	}
	size := s.gridSize(e, grid)
	c := transport.ConductivityCost(size, len(opt.TempsK), nb, opt.Defects.On, bins)
	if set != nil {
		c = c.Plus(qha.GruneisenCost(size, size.Points, len(set.Models)))
	}
	c.Bytes += 2 * int64(reply)
	est := estimate{cost: c, field: "qpoints", change: "a smaller grid (qpoints)"}
	s.budget.check(vs, est)
	return set, est
}

// volumeModelViolations reports why the volume models do not form one
// crystal's set with the request's model, in the request's paths.
func (s *Service) volumeModelViolations(e *modelEntry, volumes []*modelEntry, vs *violations) {
	models := []*physics.Model{e.m}
	for _, v := range volumes {
		if v == nil {
			return // already reported
		}
		models = append(models, v.m)
	}
	_, err := qha.NewVolumeSet(models, 0)
	var sub violations
	sub.AddErr("", "umklapp.volume_models", err)
	for _, v := range sub.List() {
		f := v.Field
		var i int
		if _, scanErr := fmt.Sscanf(f, "models[%d]", &i); scanErr == nil && i > 0 {
			f = fmt.Sprintf("umklapp.volume_models[%d]", i-1) + f[strings.Index(f, "]")+1:]
		} else {
			f = "umklapp.volume_models"
		}
		vs.Add(f, "%s", renameSetModels(v.Description))
	}
}

// setModel matches "models[i]" in the engine's words about the set whose
// model 0 is the request's model and model i the volume model i−1.
var setModel = regexp.MustCompile(`models\[(\d+)\]`)

// renameSetModels rewrites the set's model indices into request paths.
func renameSetModels(s string) string {
	return setModel.ReplaceAllStringFunc(s, func(m string) string {
		i, _ := strconv.Atoi(setModel.FindStringSubmatch(m)[1])
		if i == 0 {
			return "model"
		}
		return fmt.Sprintf("umklapp.volume_models[%d]", i-1)
	})
}

func cmpInt(x, def int) int {
	if x > 0 {
		return x
	}
	return def
}

// conductivityParams is the canonical parameter string.
func conductivityParams(o transport.Options, volumes []*modelEntry) string {
	var p params
	p.add("grid", gridParam(o.Grid))
	p.add("temperatures_k", tempsParam(o.TempsK))
	var b strings.Builder
	for i, bd := range o.Boundaries {
		if i > 0 {
			b.WriteByte(';')
		}
		fmt.Fprintf(&b, "%s:%s:%s:%s,%s,%s", bd.Kind, fmtFloat(bd.SizeM), fmtFloat(bd.Specularity), fmtFloat(bd.Normal[0]), fmtFloat(bd.Normal[1]), fmtFloat(bd.Normal[2]))
	}
	p.add("samples", "["+b.String()+"]")
	if d := o.Defects; d.On {
		p.add("point_defects", "site_g2="+tempsParam(d.SiteG2))
	}
	if u := o.Umklapp; u.On {
		p.add("umklapp", fmt.Sprintf("b=%s,gamma=%s,branch=%s,theta=%s,v=%s,mass=%s,volumes=%s", fmtFloat(u.B), fmtFloat(u.Gamma),
			tempsParam(u.GammaBranch), fmtFloat(u.ThetaK), fmtFloat(u.VelocityKmS), fmtFloat(u.MeanMassAmu), modelsParam(volumes)))
	}
	if w := o.PowerLaw; w.On {
		p.add("power_law", fmtFloat(w.RatePerS)+"*nu^"+fmtFloat(w.Exponent))
	}
	p.add("cumulative", fmtFloat(o.CumulativeTempK)+"K:"+fmt.Sprint(cmpInt(o.CumulativeBins, transport.DefaultCumulativeBins)))
	p.addBool("allow_unstable", o.AllowUnstable)
	return p.String()
}

func conductivityToProto(hash, canon string, req *modegridv1.ComputeConductivityRequest, r *transport.Result) *modegridv1.ComputeConductivityResponse {
	out := &modegridv1.ComputeConductivityResponse{ModelHash: hash, Parameters: canon, VolumeA3: r.VolumeA3,
		UmklappThetaK: r.ThetaK, UmklappVelocityKmS: r.VelocityKmS, UmklappMeanMassAmu: r.MeanMassAmu,
		DefectGamma: r.DefectGamma, ImaginaryModesExcluded: uint32(r.ImaginaryExcluded)}
	for i, se := range r.Series {
		cs := &modegridv1.ConductivitySeries{UnscatteredModes: uint32(se.Unscattered), Sample: &modegridv1.SampleGeometry{Kind: modegridv1.SampleKind_SAMPLE_KIND_BULK}}
		if i < len(req.GetSamples()) {
			cs.Sample = req.GetSamples()[i]
		}
		for _, p := range se.Points {
			cs.Points = append(cs.Points, &modegridv1.ConductivityPoint{TemperatureK: p.TempK, KappaWPerMK: append([]float64(nil), p.KappaWmK[:]...), KappaMeanWPerMK: p.MeanWmK})
		}
		if c := se.Cumulative; c != nil {
			cs.Cumulative = &modegridv1.CumulativeConductivity{TemperatureK: c.TempK, MeanFreePathM: c.MFPM, KappaByMeanFreePath: c.KappaByMFP,
				FrequencyThz: c.FreqTHz, KappaByFrequency: c.KappaByFreq}
		}
		out.Series = append(out.Series, cs)
	}
	return out
}
