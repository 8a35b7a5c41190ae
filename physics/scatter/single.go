package scatter

import (
	"context"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/parallel"
	"github.com/materials-lab/modegrid/physics/thermo"
)

// QResult is the scattering at one Q.
type QResult struct {
	QSample
	QCartInvA [3]float64
	Lines     Lines
	// S is S(Q, E) at the axis energies: barn/(sr·unit) per cell for
	// neutrons, electrons²/unit per cell for X-rays.
	S []float64
}

// SingleResult is ComputeSingle's answer.
type SingleResult struct {
	Unit      physics.Unit
	Energies  []float64 // axis energies, Unit
	FWHM      []float64 // the resolution used (axis unit; default 2·step)
	Points    []QResult
	DW        *DWResult
	Imaginary int // imaginary modes left out over all points (AllowUnstable)
}

// ComputeSingle returns the coherent one-phonon scattering function of a
// single crystal at every Q of qs (fractional; any zone), at opt.TempK,
// broadened by the resolution onto the energy axis. See doc.go for the
// formula, the normalisation and the conventions.
func ComputeSingle(ctx context.Context, m *physics.Model, qs []QSample, opt Options) (*SingleResult, error) {
	var vs physics.Violations
	checkOptions(m, opt, &vs)
	if len(qs) == 0 || len(qs) > MaxQSamples {
		vs.Add("q", "1 to %d Q points are needed, got %d", MaxQSamples, len(qs))
	}
	for i, q := range qs {
		for k, x := range q.Q {
			if !(math.Abs(x) <= physics.MaxQ) || (k >= m.Dim() && x != 0) {
				vs.Add(fmt.Sprintf("q[%d].q%d", i, k+1), "must be finite, within ±%g, and 0 past the crystal's %d dimensions, got %v", physics.MaxQ, m.Dim(), x)
			}
		}
	}
	resolveAxis(opt.Axis, opt.Resolution, 1, &vs) // the options' own checks, before any work
	if err := vs.Err(); err != nil {
		return nil, err
	}
	st, dw, err := prepare(ctx, m, opt)
	if err != nil {
		return nil, err
	}
	res := &SingleResult{Points: make([]QResult, len(qs)), DW: dw}
	err = parallel.For(ctx, len(qs), 16, func(stop <-chan struct{}) func(int) bool {
		w := st.newWork(stop)
		return func(i int) bool {
			p := &res.Points[i]
			p.QSample = qs[i]
			p.QCartInvA = st.cart(qs[i].Q)
			return w.lines(qs[i].Q, &p.Lines)
		}
	})
	if err != nil {
		return nil, err
	}
	top := 0.0
	for i := range res.Points {
		l := &res.Points[i].Lines
		res.Imaginary += l.Imaginary
		for _, e := range l.EnergyMeV {
			top = max(top, e)
		}
	}
	if res.Imaginary > 0 && !opt.AllowUnstable {
		return nil, fmt.Errorf("%w: %d imaginary modes at the Q points (allow unstable models to leave them out)", thermo.ErrUnstable, res.Imaginary)
	}
	g := resolveAxis(opt.Axis, opt.Resolution, top, &vs)
	if err := vs.Err(); err != nil {
		return nil, err
	}
	res.Unit, res.Energies, res.FWHM = g.unit, g.energies(), g.res.FWHM
	for i := range res.Points {
		if i%64 == 0 && ctx.Err() != nil {
			return nil, ctx.Err()
		}
		p := &res.Points[i]
		p.S = make([]float64, g.n)
		g.addLines(p.S, &p.Lines)
		if !allFinite(p.S) || !allFinite(p.Lines.Creation) || !allFinite(p.Lines.Annihilation) {
			return nil, overflow(fmt.Sprintf("S(Q, E) at Q = %v (fractional)", p.Q), top, opt.TempK)
		}
	}
	return res, nil
}

// addLines spreads every line of l (creation at +E, annihilation at −E).
func (g grid) addLines(dst []float64, l *Lines) {
	for k, e := range l.EnergyMeV {
		g.add(dst, e, l.Creation[k])
		g.add(dst, -e, l.Annihilation[k])
	}
}
