package main

// The figure of `fit`: the fitted model's dispersion along a path with the
// measured points on it (±σ bars), above the normalised residuals
// (measured − model)/σ of every datum, each kind in its own colour, with
// the ±2 band.

import (
	"fmt"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// fitSize is the size of the fit figure.
var fitSize = [2]vg.Length{17 * vg.Centimeter, 16 * vg.Centimeter}

// fitFigure is what the fit figure shows.
type fitFigure struct {
	view fitView
	disp *modegridv1.ComputeDispersionResponse // the fitted model along the path
}

// onPath places the dispersion data on the path: their points (x the path
// distance, y ± σ in the figure's unit), and how many are off it.
func (f fitFigure) onPath() ([]plotPoint, int) {
	var out []plotPoint
	off := 0
	conv := unitPerTHz(f.disp.GetUnit())
	for _, d := range f.view.req.GetFrequencies() {
		row := []measuredRow{{q: qArray(d.GetQ()), hasQ: true}}
		if locateOnPath("", row, f.disp.GetSamples()) != nil {
			off++
			continue
		}
		out = append(out, plotPoint{X: row[0].x, Y: conv * d.GetFrequencyThz(), Sigma: conv * d.GetSigmaThz()})
	}
	return out, off
}

// offPath is the number of dispersion points not on the path.
func (f fitFigure) offPath() int {
	_, off := f.onPath()
	return off
}

// fitKinds names the data kinds in the residual panel, in a fixed order.
var fitKinds = []struct{ field, name string }{
	{"frequencies", "dispersion"}, {"gamma_frequencies", "Γ frequencies"}, {"sound_velocities", "sound velocities"},
	{"elastic_constants", "elastic constants"}, {"heat_capacities", "heat capacities"},
}

// residualPanel plots (measured − model)/σ against the datum's number.
func (f fitFigure) residualPanel() *plot.Plot {
	p := newPlot()
	p.X.Label.Text = "datum (in the order of the data files)"
	p.Y.Label.Text = "(measured − model)/σ"
	rs := f.view.res.GetResiduals()
	p.X.Min, p.X.Max = 0.5, float64(len(rs))+0.5
	top := 2.5
	for _, r := range rs {
		top = max(top, 1.1*abs(r.GetNormalized()))
	}
	p.Y.Min, p.Y.Max = -top, 1.45*top // headroom above for the legend
	for _, y := range []float64{-2, 2} {
		l := line([]float64{p.X.Min, p.X.Max}, []float64{y, y}, zeroColor, 0.8*vg.Points(1))
		l.Dashes = []vg.Length{4 * vg.Points(1), 2 * vg.Points(1)}
		p.Add(l)
	}
	p.Add(line([]float64{p.X.Min, p.X.Max}, []float64{0, 0}, zeroColor, 0.8*vg.Points(1)))
	for k, kind := range fitKinds {
		var xys plotter.XYs
		for i, r := range rs {
			if datumKind(r.GetDatum()) == kind.field {
				xys = append(xys, plotter.XY{X: float64(i + 1), Y: r.GetNormalized()})
			}
		}
		if len(xys) == 0 {
			continue
		}
		sc, _ := plotter.NewScatter(xys) // finite: the server sends no other numbers
		sc.GlyphStyle = draw.GlyphStyle{Color: siteColors[k%len(siteColors)], Radius: 2.2 * vg.Points(1), Shape: draw.CircleGlyph{}}
		p.Add(sc)
		p.Legend.Add(kind.name, sc)
	}
	p.Legend.Top, p.Legend.Left = true, false
	return p
}

func abs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}

// build draws the page: the dispersion (two thirds of the height) over
// the residuals.
func (f fitFigure) build() (figure, error) {
	samples := f.disp.GetSamples()
	if len(samples) == 0 {
		return figure{}, fmt.Errorf("plot: the dispersion has no samples")
	}
	pts, _ := f.onPath()
	d := dispersionFigure{disp: f.disp, key: newSiteKey(siteLabels(f.view.res.GetFitted())), measured: pts}
	var all [][]float64
	for _, s := range samples {
		all = append(all, s.GetFrequencies())
	}
	for _, m := range pts {
		all = append(all, []float64{m.Y - m.Sigma, m.Y + m.Sigma})
	}
	lo, hi := freqRange(all...)
	top := d.branchPanel(samples, unitLabel(f.disp.GetUnit()), lo, hi)
	bottom := f.residualPanel()
	title := fmt.Sprintf("%s fitted: χ²/dof = %s", f.view.name, g5(f.view.res.GetReducedChiSquare()))
	return figure{size: fitSize, render: func(dc draw.Canvas) {
		dc = drawTitle(dc, title)
		h := dc.Max.Y - dc.Min.Y
		plots := [][]*plot.Plot{{top}, {bottom}}
		tiles := draw.Tiles{Rows: 2, Cols: 1, PadY: 6 * vg.Millimeter, PadTop: 2 * vg.Millimeter, PadBottom: 2 * vg.Millimeter,
			PadLeft: 2 * vg.Millimeter, PadRight: 4 * vg.Millimeter}
		// Align the two panels' axes, then give the dispersion more height.
		cs := plot.Align(plots, tiles, dc)
		split := dc.Min.Y + 0.36*h
		upper, lower := cs[0][0], cs[1][0]
		upper.Min.Y = split + 3*vg.Millimeter
		lower.Max.Y = split - 3*vg.Millimeter
		top.Draw(upper)
		bottom.Draw(lower)
	}}, nil
}

// write renders the figure into file as kind.
func (f fitFigure) write(file, kind string) error {
	fig, err := f.build()
	if err != nil {
		return err
	}
	return fig.write(file, kind)
}
