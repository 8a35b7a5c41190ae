package server

import (
	"context"
	"fmt"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

var dosCodec = protoCodec(func() *modegridv1.ComputeDosResponse { return &modegridv1.ComputeDosResponse{} })

// dosFields maps spectra.DOSOptions's field paths onto ComputeDosRequest's:
// the names agree.
var dosFields = fieldMap{"method": "method", "unit": "unit", "min": "min", "max": "max", "step": "step", "width": "width"}

// ComputeDos returns the phonon density of states on a grid or finite
// crystal, total and (when asked) per site and label. Cached by (model
// hash, canonical parameters); the grid's modes are shared with thermal
// requests.
func (s *Service) ComputeDos(ctx context.Context, req *modegridv1.ComputeDosRequest) (*modegridv1.ComputeDosResponse, error) {
	resp, err := s.computeDos(ctx, req)
	return resp, s.toStatus(ctx, "ComputeDos", err)
}

// computeDos converts the request, has the engine check the options, adds
// the server's caps and budget, and computes through the cache.
func (s *Service) computeDos(ctx context.Context, req *modegridv1.ComputeDosRequest) (*modegridv1.ComputeDosResponse, error) {
	var vs violations
	opt, bad := dosOptions(req, &vs)
	optErr := opt.Validate()
	dosFields.addEngine(&vs, optErr, "method", bad)
	if f := violatedFields(optErr); !f["min"] && !f["max"] && !f["step"] {
		s.checkDOSSamples(&vs, opt)
	}
	if s.precheckDOS(&vs, req, opt) {
		return nil, vs.Err() // refused from the request alone, before compiling
	}
	e, err := s.resolve(ctx, req.GetModel(), &vs)
	if err != nil {
		return nil, err
	}
	dim := 0
	if e != nil {
		dim = e.m.Dim()
	}
	qs := s.parseQSet(req.GetQpoints(), dim, "qpoints", false, &vs)
	if e != nil {
		s.checkDOSReply(&vs, opt, e.m.Sites())
	}
	var est estimate
	if vs.Len() == 0 {
		est = s.dosEstimate(e, qs.grid, opt)
		s.budget.check(&vs, est)
	}
	if err := vs.Err(); err != nil {
		return nil, err
	}
	canon := dosParams(qs.grid, opt)
	return cachedResult(ctx, s, kindDOS, e.hash, canon, dosCodec, func(ctx context.Context) (*modegridv1.ComputeDosResponse, error) {
		res, err := s.runDOS(ctx, e, qs.grid, opt, est)
		if err != nil {
			return nil, err
		}
		return dosToProto(e, canon, res), nil
	})
}

// dosOptions converts the request into the engine's options, reporting
// enum values the proto does not define; bad names the fields so reported,
// whose engine checks would repeat them.
func dosOptions(req *modegridv1.ComputeDosRequest, vs *violations) (opt spectra.DOSOptions, bad map[string]bool) {
	bad = map[string]bool{}
	opt = spectra.DOSOptions{PerSite: req.GetPerSite(), Unit: unitFromProto(req.GetUnit()),
		Min: canonFloat(req.GetMin()), Max: canonFloat(req.GetMax()), Step: canonFloat(req.GetStep()), Width: canonFloat(req.GetWidth())}
	switch req.GetMethod() {
	case modegridv1.DosMethod_DOS_METHOD_UNSPECIFIED, modegridv1.DosMethod_DOS_METHOD_TETRAHEDRON:
		opt.Method = spectra.Tetrahedron
	case modegridv1.DosMethod_DOS_METHOD_GAUSSIAN:
		opt.Method = spectra.Gaussian
	case modegridv1.DosMethod_DOS_METHOD_HISTOGRAM:
		opt.Method = spectra.Histogram
	default:
		vs.Add("method", "unknown method %d", req.GetMethod())
		bad["method"] = true
		opt.Method = spectra.Gaussian // the method that takes a width: the width's own checks still run
	}
	switch req.GetImaginary() {
	case modegridv1.ImaginaryModes_IMAGINARY_MODES_UNSPECIFIED, modegridv1.ImaginaryModes_IMAGINARY_MODES_EXCLUDE:
	case modegridv1.ImaginaryModes_IMAGINARY_MODES_NEGATIVE_AXIS:
		opt.NegativeAxis = true
	default:
		vs.Add("imaginary", "unknown value %d", req.GetImaginary())
	}
	if !validUnit(req.GetUnit()) {
		vs.Add("unit", "unknown frequency unit %d", req.GetUnit())
		bad["unit"] = true
	}
	return opt, bad
}

// checkDOSSamples checks the number of samples, when the options fix it,
// against this server's cap max-dos-bins.
func (s *Service) checkDOSSamples(vs *violations, opt spectra.DOSOptions) {
	if n, known := opt.Samples(); known && n > float64(s.cfg.MaxDOSBins) {
		vs.Add("step", "the window %v…%v in steps of %v is %.0f samples, over this server's cap max-dos-bins=%d", opt.Min, opt.Max, opt.Step, n, s.cfg.MaxDOSBins)
	}
}

// dosReplyGuess is the number of samples for the reply's size: the
// engine's count when the options fix it, else the default's.
func dosReplyGuess(opt spectra.DOSOptions) float64 {
	if n, known := opt.Samples(); known {
		return n
	}
	n, _ := spectra.DOSOptions{}.Samples()
	return n
}

// dosSeries is the number of series of a DOS reply for a model of sites
// sites: frequencies, DOS and its integral, and per site and per label
// when asked.
func dosSeries(sites int, opt spectra.DOSOptions) float64 {
	if opt.PerSite {
		return 3 + 2*float64(sites)
	}
	return 3
}

// checkDOSReply refuses a DOS whose reply for a model of sites sites
// cannot fit one message.
func (s *Service) checkDOSReply(vs *violations, opt spectra.DOSOptions, sites int) {
	n, series := dosReplyGuess(opt), dosSeries(sites, opt)
	s.checkReply(vs, "step", n*series*8, fmt.Sprintf("%.0f samples × %.0f series", n, series))
}

// dosParams is the canonical parameter string of a DOS request, its cache
// key with the model hash.
func dosParams(grid mesh.GridSpec, opt spectra.DOSOptions) string {
	var p params
	p.add("grid", gridParam(grid))
	p.add("method", opt.Method.String())
	p.add("unit", unitName(opt.Unit))
	if opt.Min == 0 && opt.Max == 0 {
		p.add("window", "auto")
	} else {
		p.add("window", fmtFloat(opt.Min)+":"+fmtFloat(opt.Max))
	}
	if opt.Step == 0 {
		p.add("step", "auto")
	} else {
		p.add("step", fmtFloat(opt.Step))
	}
	if opt.Method == spectra.Gaussian {
		if opt.Width == 0 {
			p.add("width", "auto")
		} else {
			p.add("width", fmtFloat(opt.Width))
		}
	}
	p.addBool("per_site", opt.PerSite)
	if opt.NegativeAxis {
		p.add("imaginary", "negative_axis")
	} else {
		p.add("imaginary", "exclude")
	}
	return p.String()
}

// runDOS computes the DOS once admitted: the grid's modes (shared), then
// spectra.ComputeDOS, then the cap on a window chosen from the modes.
func (s *Service) runDOS(ctx context.Context, e *modelEntry, grid mesh.GridSpec, opt spectra.DOSOptions, est estimate) (*spectra.DOSResult, error) {
	var res *spectra.DOSResult
	err := s.admitted(ctx, est, func(ctx context.Context) error {
		g, _, err := s.gridModes(ctx, e, grid, gridNeed{sites: opt.PerSite})
		if err != nil {
			return err
		}
		return s.run(ctx, kindDOS, func(ctx context.Context) error {
			var err error
			res, err = spectra.ComputeDOS(ctx, e.m, g, opt)
			return err
		})
	})
	if err != nil {
		return nil, err
	}
	if len(res.Freq) > s.cfg.MaxDOSBins {
		return nil, invalidArgument("", []physics.Violation{{Field: "step", Description: fmt.Sprintf(
			"the window chosen from the modes in steps of %v is %d samples, over this server's cap max-dos-bins=%d", opt.Step, len(res.Freq), s.cfg.MaxDOSBins)}})
	}
	return res, nil
}

func dosToProto(e *modelEntry, canon string, r *spectra.DOSResult) *modegridv1.ComputeDosResponse {
	out := &modegridv1.ComputeDosResponse{
		ModelHash:      e.hash,
		Parameters:     canon,
		Unit:           unitToProto(r.Unit),
		Frequencies:    r.Freq,
		Dos:            r.DOS,
		Integrated:     r.Integrated,
		ImaginaryModes: uint32(r.Imaginary),
		StatesPerCell:  r.StatesPerCell,
		Width:          r.Width,
		GammaAnalytic:  e.m.Polar(),
	}
	labels := e.m.Labels()
	for i, d := range r.Sites {
		out.Sites = append(out.Sites, &modegridv1.ProjectedDos{Site: int32(i), Label: labels[i], Dos: d})
	}
	for i, d := range r.LabelDOS {
		out.Labels = append(out.Labels, &modegridv1.ProjectedDos{Site: -1, Label: r.Labels[i], Dos: d})
	}
	return out
}

// dosEstimate is the cost of a DOS request: the grid's modes (with site
// weights for a per-site DOS), the DOS, and the reply twice (the message
// and its encoding).
func (s *Service) dosEstimate(e *modelEntry, spec mesh.GridSpec, opt spectra.DOSOptions) estimate {
	return dosCost(s.gridSize(e, spec), opt)
}

// dosCost is dosEstimate for a model of size.
func dosCost(size physics.GridSize, opt spectra.DOSOptions) estimate {
	samples := int(dosReplyGuess(opt))
	c := physics.GridModesCost(size, physics.GridOptions{Projections: opt.PerSite})
	c = c.Plus(spectra.DOSCost(size, opt, samples, true))
	series := int64(dosSeries(size.Sites, opt))
	c.Bytes += 2 * 8 * series * int64(samples)
	change := "a smaller grid (qpoints)"
	if opt.PerSite {
		change = "a smaller grid (qpoints) or no per-site DOS (per_site)"
	}
	return estimate{cost: c, field: "qpoints", change: change}
}
