package main

// Figures drawn with gonum.org/v1/plot: the dispersion with a DOS panel
// beside it on a shared frequency axis, the DOS with per-site curves, and
// the thermal properties on one page. Sizes and fonts are chosen to stay
// legible when a figure is placed at its natural size in a report
// (tick labels 10 pt, axis labels 11 pt, lines 1.2–1.5 pt).

import (
	"fmt"
	"image/color"
	"io"
	"math"
	"os"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// plotDPI is the resolution of PNG figures.
const plotDPI = 150

// Figure sizes.
var (
	dispersionSize = [2]vg.Length{17 * vg.Centimeter, 11 * vg.Centimeter}
	dosSize        = [2]vg.Length{15 * vg.Centimeter, 10 * vg.Centimeter}
	thermalSize    = [2]vg.Length{18 * vg.Centimeter, 14 * vg.Centimeter}
)

var (
	// branchColor draws curves that carry no site information.
	branchColor = color.RGBA{R: 0x1f, G: 0x4e, B: 0x9a, A: 0xff}
	zeroColor   = color.Gray{Y: 0x90}
	// shadeColor fills every other segment of a path.
	shadeColor = color.Gray{Y: 0xf0}
	totalColor = color.Black
	// siteColors tell sites apart in every figure: the colour-blind-safe
	// set of Okabe & Ito (2008), "Color Universal Design", blue first.
	// Branches mix them by site share, so the first two, the commonest
	// pair, are far apart in hue.
	siteColors = []color.Color{
		color.RGBA{R: 0x00, G: 0x72, B: 0xb2, A: 0xff},
		color.RGBA{R: 0xd5, G: 0x5e, B: 0x00, A: 0xff},
		color.RGBA{R: 0x00, G: 0x9e, B: 0x73, A: 0xff},
		color.RGBA{R: 0xcc, G: 0x79, B: 0xa7, A: 0xff},
		color.RGBA{R: 0xe6, G: 0x9f, B: 0x00, A: 0xff},
		color.RGBA{R: 0x56, G: 0xb4, B: 0xe9, A: 0xff},
	}
	// measuredColor marks measured points.
	measuredColor = color.Black
)

// maxSiteCurves is the most per-site curves a DOS figure draws; past it,
// the per-label projections are drawn instead.
const maxSiteCurves = 8

// figureText is the text handler of every figure (plot_text.go).
var figureText = raisedText{text.Plain{Fonts: font.DefaultCache}}

// newPlot returns a plot with the house fonts and text handler.
func newPlot() *plot.Plot {
	p := plot.New()
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Label.TextStyle.Font.Size = 11 * vg.Points(1)
		a.Tick.Label.Font.Size = 10 * vg.Points(1)
		a.Label.Padding = 3 * vg.Points(1)
		a.Label.TextStyle.Handler = figureText
		a.Tick.Label.Handler = figureText
	}
	p.Legend.TextStyle.Font.Size = 10 * vg.Points(1)
	p.Legend.TextStyle.Handler = figureText
	p.Title.TextStyle.Font.Size = 12 * vg.Points(1)
	p.Title.TextStyle.Handler = figureText
	return p
}

func line(xs, ys []float64, c color.Color, width vg.Length) *plotter.Line {
	pts := make(plotter.XYs, len(xs))
	for i := range xs {
		pts[i] = plotter.XY{X: xs[i], Y: ys[i]}
	}
	l := &plotter.Line{XYs: pts}
	l.LineStyle = draw.LineStyle{Color: c, Width: width}
	return l
}

// figure is a drawing of a given size, not yet written.
type figure struct {
	size   [2]vg.Length
	render func(draw.Canvas)
}

// canvas returns a fresh canvas of kind ("png" or "svg") for f, and how to
// write it.
func (f figure) canvas(kind string) (vg.CanvasSizer, io.WriterTo) {
	if kind == "svg" {
		c := vgsvg.New(f.size[0], f.size[1])
		return c, c
	}
	c := vgimg.NewWith(vgimg.UseWH(f.size[0], f.size[1]), vgimg.UseDPI(plotDPI), vgimg.UseBackgroundColor(color.White))
	return c, vgimg.PngCanvas{Canvas: c}
}

// writeTo renders f as kind to w.
func (f figure) writeTo(w io.Writer, kind string) error {
	c, wt := f.canvas(kind)
	f.render(draw.New(c))
	if _, err := wt.WriteTo(w); err != nil {
		return fmt.Errorf("write plot: %w", err)
	}
	return nil
}

// write renders f as kind into file.
func (f figure) write(file, kind string) error {
	out, err := os.Create(file)
	if err != nil {
		return fmt.Errorf("write plot: %w", err)
	}
	if err := f.writeTo(out, kind); err != nil {
		out.Close()
		return fmt.Errorf("%s: %w", file, err)
	}
	if err := out.Close(); err != nil {
		return fmt.Errorf("write plot %s: %w", file, err)
	}
	return nil
}

// freqRange returns a frequency axis range holding every value, with 0
// included and 4 % headroom.
func freqRange(vals ...[]float64) (lo, hi float64) {
	lo, hi = 0, 0
	for _, v := range vals {
		for _, x := range v {
			lo, hi = math.Min(lo, x), math.Max(hi, x)
		}
	}
	if hi == lo {
		hi = lo + 1
	}
	pad := 0.04 * (hi - lo)
	if lo < 0 {
		lo -= pad
	}
	return lo, hi + pad
}

// blankLabels keeps the tick positions of a ticker and drops their labels,
// for a panel that shares its axis with the panel beside it.
type blankLabels struct{ plot.Ticker }

func (b blankLabels) Ticks(lo, hi float64) []plot.Tick {
	t := b.Ticker.Ticks(lo, hi)
	for i := range t {
		t[i].Label = ""
	}
	return t
}

// pathPieces splits the samples of a dispersion at breaks: a corner whose
// distance does not advance, or a label containing '|'.
func pathPieces(s []*modegridv1.DispersionSample) [][]*modegridv1.DispersionSample {
	var out [][]*modegridv1.DispersionSample
	start := 0
	for i := 1; i < len(s); i++ {
		if s[i].GetDistanceInvA() <= s[i-1].GetDistanceInvA() && s[i].GetLabel() != "" && s[i-1].GetLabel() != "" {
			out = append(out, s[start:i])
			start = i
		}
	}
	return append(out, s[start:])
}

// cornerTicks returns one labelled tick per distinct corner distance
// (labels at one distance joined by '|').
func cornerTicks(s []*modegridv1.DispersionSample) plot.ConstantTicks {
	var ticks plot.ConstantTicks
	for _, x := range s {
		if x.GetLabel() == "" {
			continue
		}
		l := displayLabel(x.GetLabel())
		if n := len(ticks); n > 0 && math.Abs(ticks[n-1].Value-x.GetDistanceInvA()) < 1e-12 {
			if ticks[n-1].Label != l {
				ticks[n-1].Label += "|" + l
			}
			continue
		}
		ticks = append(ticks, plot.Tick{Value: x.GetDistanceInvA(), Label: l})
	}
	return ticks
}

// plotDOS draws the total DOS and, when present, per-site curves, overlaid
// or (stacked) as cumulative bands whose top is the total.
func plotDOS(file, kind string, dos *modegridv1.ComputeDosResponse, stacked bool, title string) error {
	f, err := buildDOS(dos, stacked, title)
	if err != nil {
		return err
	}
	return f.write(file, kind)
}

// buildDOS is the figure of plotDOS.
func buildDOS(dos *modegridv1.ComputeDosResponse, stacked bool, title string) (figure, error) {
	freqs := dos.GetFrequencies()
	if len(freqs) == 0 {
		return figure{}, fmt.Errorf("plot: the DOS has no samples")
	}
	u := unitLabel(dos.GetUnit())
	p := newPlot()
	p.Title.Text = title
	p.X.Label.Text = fmt.Sprintf("frequency ν (%s)", u)
	p.Y.Label.Text = fmt.Sprintf("DOS g(ν) (states per cell per %s)", u)
	p.X.Min, p.X.Max = freqs[0], freqs[len(freqs)-1]
	p.Y.Min = 0
	p.Legend.Top = true

	parts, names := dos.GetSites(), []string(nil)
	_, cols := dosSiteColumns(dos)
	for _, c := range cols {
		names = append(names, c[len("dos_"):])
	}
	if len(parts) > maxSiteCurves && len(dos.GetLabels()) > 0 {
		parts, names = dos.GetLabels(), nil
		for _, l := range parts {
			names = append(names, l.GetLabel()+" (all sites)")
		}
	}
	total := line(freqs, dos.GetDos(), totalColor, 1.5*vg.Points(1))
	p.Legend.Add("total", total)
	curves := make([]*plotter.Line, len(parts))
	if stacked && len(parts) > 0 {
		run := make([]float64, len(freqs))
		for i, s := range parts {
			for k := range run {
				run[k] += at(s.GetDos(), k)
			}
			curves[i] = line(freqs, append([]float64(nil), run...), siteColors[i%len(siteColors)], 0.8*vg.Points(1))
			curves[i].FillColor = lighten(siteColors[i%len(siteColors)])
		}
		for i := len(parts) - 1; i >= 0; i-- { // the largest band first, the others over it
			p.Add(curves[i])
		}
		p.Add(total)
	} else {
		p.Add(total)
		for i, s := range parts {
			curves[i] = line(freqs, s.GetDos(), siteColors[i%len(siteColors)], 1.2*vg.Points(1))
			if i >= len(siteColors) {
				curves[i].Dashes = []vg.Length{4 * vg.Points(1), 2 * vg.Points(1)}
			}
			p.Add(curves[i])
		}
	}
	for i, c := range curves {
		p.Legend.Add(names[i], c)
	}
	// Headroom for the legend above the highest curve.
	p.Y.Max = 1.12 * maxOf(dos.GetDos()) * (1 + 0.06*float64(len(parts)+1))
	if p.Y.Max <= 0 {
		p.Y.Max = 1
	}
	return figure{size: dosSize, render: func(dc draw.Canvas) { p.Draw(dc) }}, nil
}

// lighten mixes c with white for the fill of a stacked band.
func lighten(c color.Color) color.Color {
	r, g, b, _ := c.RGBA()
	mix := func(v uint32) uint8 { return uint8((v>>8)/2 + 0x80) }
	return color.RGBA{R: mix(r), G: mix(g), B: mix(b), A: 0xff}
}

// thermalFigure is what the thermal page shows.
type thermalFigure struct {
	th         *modegridv1.ComputeThermalResponse
	basis      thermalBasis // the amount every value is per
	sites, pol int          // sites per cell, polarisations per site
	measured   []plotPoint  // T (K), Cv ± σ in J/K per basis
	title      string
}

// plotThermal draws t into file as kind.
func plotThermal(file, kind string, t thermalFigure) error {
	f, err := t.build()
	if err != nil {
		return err
	}
	return f.write(file, kind)
}

// build draws Cv (with the classical limit, kB per mode: p·R per mole of
// atoms, 3R in three dimensions, and any measured points), S, F and U
// against temperature, on one page, every axis per the basis t.basis.
func (t thermalFigure) build() (figure, error) {
	b, pts := t.basis, t.th.GetPoints()
	if len(pts) == 0 {
		return figure{}, fmt.Errorf("plot: no temperatures")
	}
	T := make([]float64, len(pts))
	cv, s, f, u := make([]float64, len(pts)), make([]float64, len(pts)), make([]float64, len(pts)), make([]float64, len(pts))
	for i, p := range pts {
		T[i] = p.GetTemperatureK()
		cv[i], s[i], f[i], u[i] = b.values(p)
	}
	panel := func(ys []float64, ylabel string) (*plot.Plot, *plotter.Line) {
		p := newPlot()
		p.X.Label.Text = "temperature T (K)"
		p.Y.Label.Text = ylabel
		p.X.Min, p.X.Max = T[0], T[len(T)-1]
		if p.X.Max == p.X.Min {
			p.X.Max = p.X.Min + 1
		}
		l := line(T, ys, branchColor, 1.5*vg.Points(1))
		p.Add(l)
		return p, l
	}
	pcv, cvLine := panel(cv, "heat capacity Cv ("+b.entropyUnit()+")")
	pcv.Y.Min = 0
	// Dulong–Petit: the classical limit kB per mode on the basis
	// (Kittel, Introduction to Solid State Physics, ch. 5).
	limit := b.classicalLimit(t.th, t.sites, t.pol)
	dp := line([]float64{pcv.X.Min, pcv.X.Max}, []float64{limit, limit}, siteColors[1], 1.2*vg.Points(1))
	dp.Dashes = []vg.Length{5 * vg.Points(1), 3 * vg.Points(1)}
	pcv.Add(dp)
	pcv.Legend.Add("Cv", cvLine)
	pcv.Legend.Add(b.classicalLabel(t.sites, t.pol), dp)
	top := math.Max(limit, maxOf(cv))
	for _, m := range t.measured {
		top = math.Max(top, m.Y+m.Sigma)
		pcv.X.Min, pcv.X.Max = math.Min(pcv.X.Min, m.X), math.Max(pcv.X.Max, m.X)
	}
	addMeasured(pcv, t.measured)
	pcv.Legend.Left, pcv.Legend.Top = false, false
	pcv.Y.Max = top * 1.08
	ps, _ := panel(s, "entropy S ("+b.entropyUnit()+")")
	pf, _ := panel(f, "free energy F ("+b.energyUnit()+")")
	pu, _ := panel(u, "internal energy U ("+b.energyUnit()+")")
	grid := [][]*plot.Plot{{pcv, ps}, {pf, pu}}
	return figure{size: thermalSize, render: func(dc draw.Canvas) {
		if t.title != "" {
			dc = drawTitle(dc, t.title)
		}
		tiles := draw.Tiles{Rows: 2, Cols: 2, PadX: 8 * vg.Millimeter, PadY: 6 * vg.Millimeter,
			PadTop: 2 * vg.Millimeter, PadBottom: 2 * vg.Millimeter, PadLeft: 2 * vg.Millimeter, PadRight: 4 * vg.Millimeter}
		canvases := plot.Align(grid, tiles, dc)
		for i := range grid {
			for j := range grid[i] {
				grid[i][j].Draw(canvases[i][j])
			}
		}
	}}, nil
}

// drawTitle writes a page title at the top of dc and returns the rest.
func drawTitle(dc draw.Canvas, title string) draw.Canvas {
	sty := newPlot().Title.TextStyle
	sty.XAlign = draw.XCenter
	sty.YAlign = draw.YTop
	h := sty.Height(title) + 2*vg.Millimeter
	dc.FillText(sty, vg.Point{X: (dc.Min.X + dc.Max.X) / 2, Y: dc.Max.Y - vg.Millimeter}, title)
	return draw.Crop(dc, 0, 0, 0, -h)
}

func maxOf(v []float64) float64 {
	m := math.Inf(-1)
	for _, x := range v {
		m = math.Max(m, x)
	}
	return m
}
