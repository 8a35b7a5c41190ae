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
	"gonum.org/v1/plot/plotter"
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
	branchColor = color.RGBA{R: 0x1f, G: 0x4e, B: 0x9a, A: 0xff}
	cornerColor = color.Gray{Y: 0xa0}
	totalColor  = color.Black
	// siteColors are distinguishable in colour and in grey print.
	siteColors = []color.Color{
		color.RGBA{R: 0xd9, G: 0x5f, B: 0x02, A: 0xff},
		color.RGBA{R: 0x1b, G: 0x9e, B: 0x77, A: 0xff},
		color.RGBA{R: 0x75, G: 0x70, B: 0xb3, A: 0xff},
		color.RGBA{R: 0xe7, G: 0x29, B: 0x8a, A: 0xff},
		color.RGBA{R: 0x66, G: 0xa6, B: 0x1e, A: 0xff},
		color.RGBA{R: 0xa6, G: 0x76, B: 0x1d, A: 0xff},
	}
)

// maxSiteCurves is the most per-site curves a DOS figure draws; past it,
// the per-label projections are drawn instead.
const maxSiteCurves = 8

// newPlot returns a plot with the house fonts.
func newPlot() *plot.Plot {
	p := plot.New()
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Label.TextStyle.Font.Size = 11 * vg.Points(1)
		a.Tick.Label.Font.Size = 10 * vg.Points(1)
		a.Label.Padding = 3 * vg.Points(1)
	}
	p.Legend.TextStyle.Font.Size = 10 * vg.Points(1)
	p.Title.TextStyle.Font.Size = 12 * vg.Points(1)
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

// writeFigure renders draw onto a canvas of the given size and writes it
// as kind ("png" or "svg") to file.
func writeFigure(file, kind string, size [2]vg.Length, render func(draw.Canvas)) error {
	var wt io.WriterTo
	switch kind {
	case "svg":
		c := vgsvg.New(size[0], size[1])
		render(draw.New(c))
		wt = c
	default:
		c := vgimg.NewWith(vgimg.UseWH(size[0], size[1]), vgimg.UseDPI(plotDPI), vgimg.UseBackgroundColor(color.White))
		render(draw.New(c))
		wt = vgimg.PngCanvas{Canvas: c}
	}
	f, err := os.Create(file)
	if err != nil {
		return fmt.Errorf("write plot: %w", err)
	}
	if _, err := wt.WriteTo(f); err != nil {
		f.Close()
		return fmt.Errorf("write plot %s: %w", file, err)
	}
	if err := f.Close(); err != nil {
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

// plotDispersion draws the branches along the path, with vertical lines and
// labelled ticks at the corners, and, when dos is not nil, the total DOS in
// a narrow panel to the right on the same frequency axis.
func plotDispersion(file, kind string, disp *modegridv1.ComputeDispersionResponse, dos *modegridv1.ComputeDosResponse, title string) error {
	samples := disp.GetSamples()
	if len(samples) == 0 {
		return fmt.Errorf("plot: the dispersion has no samples")
	}
	u := unitLabel(disp.GetUnit())
	var all [][]float64
	for _, s := range samples {
		all = append(all, s.GetFrequencies())
	}
	if dos != nil {
		all = append(all, dos.GetFrequencies())
	}
	lo, hi := freqRange(all...)

	left := newPlot()
	left.Title.Text = title
	left.X.Label.Text = "wavevector along the path"
	left.Y.Label.Text = fmt.Sprintf("frequency ν (%s)", u)
	left.Y.Min, left.Y.Max = lo, hi
	left.X.Min = samples[0].GetDistanceInvA()
	left.X.Max = samples[len(samples)-1].GetDistanceInvA()
	ticks := cornerTicks(samples)
	left.X.Tick.Marker = ticks
	for _, t := range ticks {
		left.Add(line([]float64{t.Value, t.Value}, []float64{lo, hi}, cornerColor, 0.6*vg.Points(1)))
	}
	if lo < 0 {
		left.Add(line([]float64{left.X.Min, left.X.Max}, []float64{0, 0}, cornerColor, 0.6*vg.Points(1)))
	}
	for _, piece := range pathPieces(samples) {
		branches := 0
		for _, s := range piece {
			branches = max(branches, len(s.GetFrequencies()))
		}
		for b := range branches {
			var xs, ys []float64
			for _, s := range piece {
				if b < len(s.GetFrequencies()) {
					xs = append(xs, s.GetDistanceInvA())
					ys = append(ys, s.GetFrequencies()[b])
				}
			}
			left.Add(line(xs, ys, branchColor, 1.4*vg.Points(1)))
		}
	}

	var right *plot.Plot
	if dos != nil && len(dos.GetFrequencies()) > 0 {
		right = newPlot()
		right.Title.Text = " " // keeps the panel tops level with the left title
		if title == "" {
			right.Title.Text = ""
		}
		right.X.Label.Text = fmt.Sprintf("DOS (1/%s)", u)
		right.Y.Min, right.Y.Max = lo, hi
		right.Y.Tick.Marker = blankLabels{plot.DefaultTicks{}}
		right.X.Min = 0
		gmax := 0.0
		for _, g := range dos.GetDos() {
			gmax = math.Max(gmax, g)
		}
		right.X.Max = gmax * 1.05
		if right.X.Max == 0 {
			right.X.Max = 1
		}
		right.Add(line(dos.GetDos(), dos.GetFrequencies(), totalColor, 1.2*vg.Points(1)))
		if lo < 0 {
			right.Add(line([]float64{0, right.X.Max}, []float64{0, 0}, cornerColor, 0.6*vg.Points(1)))
		}
	}
	return writeFigure(file, kind, dispersionSize, func(dc draw.Canvas) {
		if right == nil {
			left.Draw(dc)
			return
		}
		w := dc.Max.X - dc.Min.X
		left.Draw(draw.Crop(dc, 0, -0.26*w, 0, 0))
		right.Draw(draw.Crop(dc, 0.75*w, 0, 0, 0))
	})
}

// plotDOS draws the total DOS and, when present, per-site curves, overlaid
// or (stacked) as cumulative bands whose top is the total.
func plotDOS(file, kind string, dos *modegridv1.ComputeDosResponse, stacked bool, title string) error {
	freqs := dos.GetFrequencies()
	if len(freqs) == 0 {
		return fmt.Errorf("plot: the DOS has no samples")
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
	return writeFigure(file, kind, dosSize, func(dc draw.Canvas) { p.Draw(dc) })
}

// lighten mixes c with white for the fill of a stacked band.
func lighten(c color.Color) color.Color {
	r, g, b, _ := c.RGBA()
	mix := func(v uint32) uint8 { return uint8((v>>8)/2 + 0x80) }
	return color.RGBA{R: mix(r), G: mix(g), B: mix(b), A: 0xff}
}

// plotThermal draws Cv (with the Dulong–Petit limit p·R per site, 3R per
// site in three dimensions), S, F and U against temperature, per mole of
// unit cells, on one page.
func plotThermal(file, kind string, th *modegridv1.ComputeThermalResponse, b thermalBasis, sites, pol int, title string) error {
	pts := th.GetPoints()
	if len(pts) == 0 {
		return fmt.Errorf("plot: no temperatures")
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
	// Dulong–Petit: the classical limit kB per mode on the basis b.
	limit := b.classicalLimit(th, sites, pol)
	dp := line([]float64{pcv.X.Min, pcv.X.Max}, []float64{limit, limit}, siteColors[0], 1.2*vg.Points(1))
	dp.Dashes = []vg.Length{5 * vg.Points(1), 3 * vg.Points(1)}
	pcv.Add(dp)
	pcv.Legend.Add("Cv", cvLine)
	pcv.Legend.Add(b.classicalLabel(sites, pol), dp)
	pcv.Legend.Left, pcv.Legend.Top = false, false
	pcv.Y.Max = math.Max(limit, maxOf(cv)) * 1.08
	ps, _ := panel(s, "entropy S ("+b.entropyUnit()+")")
	pf, _ := panel(f, "free energy F ("+b.energyUnit()+")")
	pu, _ := panel(u, "internal energy U ("+b.energyUnit()+")")
	grid := [][]*plot.Plot{{pcv, ps}, {pf, pu}}
	return writeFigure(file, kind, thermalSize, func(dc draw.Canvas) {
		if title != "" {
			dc = drawTitle(dc, title)
		}
		tiles := draw.Tiles{Rows: 2, Cols: 2, PadX: 8 * vg.Millimeter, PadY: 6 * vg.Millimeter,
			PadTop: 2 * vg.Millimeter, PadBottom: 2 * vg.Millimeter, PadLeft: 2 * vg.Millimeter, PadRight: 4 * vg.Millimeter}
		canvases := plot.Align(grid, tiles, dc)
		for i := range grid {
			for j := range grid[i] {
				grid[i][j].Draw(canvases[i][j])
			}
		}
	})
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
