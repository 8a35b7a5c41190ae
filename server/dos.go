package server

import (
	"context"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/spectra"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

var dosCodec = protoCodec(func() *modegridv1.ComputeDosResponse { return &modegridv1.ComputeDosResponse{} })

// ComputeDos returns the phonon density of states on a grid or finite
// crystal, total and (when asked) per site and label. Cached by (model
// hash, canonical parameters); the grid's modes are shared with thermal
// requests.
func (s *Service) ComputeDos(ctx context.Context, req *modegridv1.ComputeDosRequest) (*modegridv1.ComputeDosResponse, error) {
	resp, err := s.computeDos(ctx, req)
	return resp, s.toStatus(ctx, "ComputeDos", err)
}

func (s *Service) computeDos(ctx context.Context, req *modegridv1.ComputeDosRequest) (*modegridv1.ComputeDosResponse, error) {
	var vs violations
	opt := spectra.DOSOptions{PerSite: req.GetPerSite()}
	switch req.GetMethod() {
	case modegridv1.DosMethod_DOS_METHOD_UNSPECIFIED, modegridv1.DosMethod_DOS_METHOD_TETRAHEDRON:
		opt.Method = spectra.Tetrahedron
	case modegridv1.DosMethod_DOS_METHOD_GAUSSIAN:
		opt.Method = spectra.Gaussian
	case modegridv1.DosMethod_DOS_METHOD_HISTOGRAM:
		opt.Method = spectra.Histogram
	default:
		vs.add("method", "unknown method %d", req.GetMethod())
	}
	switch req.GetImaginary() {
	case modegridv1.ImaginaryModes_IMAGINARY_MODES_UNSPECIFIED, modegridv1.ImaginaryModes_IMAGINARY_MODES_EXCLUDE:
	case modegridv1.ImaginaryModes_IMAGINARY_MODES_NEGATIVE_AXIS:
		opt.NegativeAxis = true
	default:
		vs.add("imaginary", "unknown value %d", req.GetImaginary())
	}
	if !validUnit(req.GetUnit()) {
		vs.add("unit", "unknown frequency unit %d", req.GetUnit())
	}
	opt.Unit = unitFromProto(req.GetUnit())
	for _, f := range []struct {
		name string
		v    float64
	}{{"min", req.GetMin()}, {"max", req.GetMax()}, {"step", req.GetStep()}, {"width", req.GetWidth()}} {
		if !(math.Abs(f.v) <= spectra.MaxDOSFrequency) {
			vs.add(f.name, "must be a finite number within ±%g (in the request's unit), got %v", spectra.MaxDOSFrequency, f.v)
		}
	}
	opt.Min, opt.Max, opt.Step = canonFloat(req.GetMin()), canonFloat(req.GetMax()), canonFloat(req.GetStep())
	if opt.Method == spectra.Gaussian {
		opt.Width = canonFloat(req.GetWidth())
	}
	// The window, step and width are checked here, before any work, in
	// the words spectra.ComputeDOS would use after the grid's modes.
	if !(opt.Min == 0 && opt.Max == 0) && opt.Max <= opt.Min {
		vs.add("max", "must be greater than min (%g), got %g (leave both 0 for a window from the modes)", opt.Min, opt.Max)
	}
	if opt.Step < 0 {
		vs.add("step", "must be > 0 (0 for the default), got %g", opt.Step)
	}
	if opt.Width < 0 {
		vs.add("width", "must be > 0 (0 for the default), got %g", opt.Width)
	} else if opt.Width > 0 && opt.Width < spectra.MinDOSWidth {
		vs.add("width", "must be ≥ %g (in the request's unit; 0 for the default), got %v", spectra.MinDOSWidth, opt.Width)
	}
	if opt.Step > 0 && opt.Max > opt.Min {
		if n := (opt.Max-opt.Min)/opt.Step + 1; n > float64(s.cfg.MaxDOSBins) {
			vs.add("step", "the window %v…%v in steps of %v is %.0f samples, over this server's cap max-dos-bins=%d", opt.Min, opt.Max, opt.Step, n, s.cfg.MaxDOSBins)
		}
	}
	if s.precheckDOS(&vs, req, opt) {
		return nil, vs.err() // refused from the request alone, before compiling
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
	if len(vs.list) == 0 {
		est = s.dosEstimate(e, qs.grid, opt)
		s.budget.check(&vs, est)
	}
	if err := vs.err(); err != nil {
		return nil, err
	}

	var p params
	p.add("grid", gridParam(qs.grid))
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
	canon := p.String()

	return cachedResult(ctx, s, kindDOS, e.hash, canon, dosCodec, func(ctx context.Context) (*modegridv1.ComputeDosResponse, error) {
		var res *spectra.DOSResult
		err := s.admitted(ctx, est, func(ctx context.Context) error {
			g, _, err := s.gridModes(ctx, e, qs.grid, gridNeed{sites: opt.PerSite})
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
		return dosToProto(e, canon, res), nil
	})
}

// checkDOSReply refuses a DOS whose reply for a model of sites sites
// cannot fit one message.
func (s *Service) checkDOSReply(vs *violations, opt spectra.DOSOptions, sites int) {
	bins := 500.0 // spectra.DefaultDOSBins with a chosen step
	if opt.Step > 0 && opt.Max > opt.Min {
		bins = (opt.Max-opt.Min)/opt.Step + 1
	}
	series := 3.0
	if opt.PerSite {
		series += 2 * float64(sites)
	}
	s.checkReply(vs, "step", bins*series*8, fmt.Sprintf("%.0f samples × %.0f series", bins, series))
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
	samples := spectra.DefaultDOSBins + 1
	if opt.Step > 0 && opt.Max > opt.Min {
		samples = int((opt.Max-opt.Min)/opt.Step) + 1
	}
	c := physics.GridModesCost(size, physics.GridOptions{Projections: opt.PerSite})
	c = c.Plus(spectra.DOSCost(size, opt, samples, true))
	series := int64(3)
	if opt.PerSite {
		series += 2 * int64(size.Sites)
	}
	c.Bytes += 2 * 8 * series * int64(samples)
	change := "a smaller grid (qpoints)"
	if opt.PerSite {
		change = "a smaller grid (qpoints) or no per-site DOS (per_site)"
	}
	return estimate{cost: c, field: "qpoints", change: change}
}
