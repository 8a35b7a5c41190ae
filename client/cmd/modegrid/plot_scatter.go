package main

// Colour maps of the scattering commands: S(Q, E) along a path of Q with
// the model's branches drawn over it, the powder map S(|Q|, E), each with a
// colour scale whose axis states the unit of S; and the neutron-weighted
// DOS as a curve.

import (
	"fmt"
	"image/color"
	"math"
	"slices"
	"sort"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/palette"
	"gonum.org/v1/plot/palette/moreland"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// mapSize is the size of the colour-map figures.
var mapSize = [2]vg.Length{18 * vg.Centimeter, 12 * vg.Centimeter}

// branchOverlayColor draws the model's branches over a map: a light blue
// that stands out on every colour of the black-body scale (black, red,
// yellow, white).
var branchOverlayColor = color.RGBA{R: 0x56, G: 0xb4, B: 0xe9, A: 0xff}

// pathColumns is the number of pixel columns a path map is resampled to
// (the samples are nearly, not exactly, evenly spaced along the path).
const pathColumns = 720

// The colour scale tops out, by default, at the median over Q of the
// largest S at each Q: the 1/E peaks near the zone centres, a few pixels,
// would otherwise leave every other line dark.

// logDecades is the span of a logarithmic colour scale below its top.
const logDecades = 4

// scatterMapFigure is what a colour map shows.
type scatterMapFigure struct {
	resp  *modegridv1.ComputeScatteringResponse
	probe modegridv1.Probe
	heat  heatFlags
	title string
}

// uniformGrid is a map on evenly spaced X and Y, z[row*nx+col].
type uniformGrid struct {
	x0, dx, y0, dy float64
	nx, ny         int
	z              []float64
}

func (g uniformGrid) Dims() (c, r int)        { return g.nx, g.ny }
func (g uniformGrid) Z(c, r int) float64      { return g.z[r*g.nx+c] }
func (g uniformGrid) X(c int) float64         { return g.x0 + float64(c)*g.dx }
func (g uniformGrid) Y(r int) float64         { return g.y0 + float64(r)*g.dy }
func (g uniformGrid) set(c, r int, v float64) { g.z[r*g.nx+c] = v }

// colourScale maps S to the colour axis: linear from 0 to top, or log10
// over logDecades below top; label names the colour axis with the unit.
type colourScale struct {
	top   float64
	log   bool
	label string
	note  string // how the top was chosen, for the title
}

// newColourScale chooses the top: --smax, or the median of the largest
// value of each column (each Q) of cols.
func newColourScale(cols [][]float64, h heatFlags, unit string) colourScale {
	cs := colourScale{top: h.smax, log: h.log}
	if !(cs.top > 0) {
		var peaks []float64
		for _, c := range cols {
			if m := slices.Max(append([]float64{0}, c...)); m > 0 {
				peaks = append(peaks, m)
			}
		}
		sort.Float64s(peaks)
		cs.top = 1
		if len(peaks) > 0 {
			cs.top = peaks[len(peaks)/2]
		}
		cs.note = "colour scale up to the median over Q of the largest S, " + strconv.FormatFloat(cs.top, 'g', 3, 64) + "; above it the top colour"
	} else {
		cs.note = "colour scale up to " + strconv.FormatFloat(cs.top, 'g', 3, 64) + "; above it the top colour"
	}
	cs.label = "S(Q, E) (" + unit + ")"
	if cs.log {
		cs.label = "log10 S(Q, E), S in " + unit
		cs.note += fmt.Sprintf("; logarithmic over %d decades", logDecades)
	}
	return cs
}

// value is v on the colour axis.
func (cs colourScale) value(v float64) float64 {
	if !cs.log {
		return v
	}
	return math.Log10(max(v, cs.top*math.Pow(10, -logDecades)))
}

func (cs colourScale) bounds() (lo, hi float64) {
	if cs.log {
		return math.Log10(cs.top) - logDecades, math.Log10(cs.top)
	}
	return 0, cs.top
}

// colorMap is the black-body scale (Moreland, "Diverging Color Maps for
// Scientific Visualization", 2009, and his black-body map) over bounds.
func (cs colourScale) colorMap() palette.ColorMap {
	m := moreland.BlackBody()
	lo, hi := cs.bounds()
	m.SetMin(lo)
	m.SetMax(hi)
	return m
}

// heatPlot is the map's plot: the grid in the colour scale, values past
// the top in the top colour.
func (cs colourScale) heatPlot(g uniformGrid) *plot.Plot {
	for i, v := range g.z {
		g.z[i] = cs.value(v)
	}
	pal := cs.colorMap().Palette(256)
	h := plotter.NewHeatMap(g, pal)
	h.Min, h.Max = cs.bounds()
	cols := pal.Colors()
	h.Underflow, h.Overflow, h.NaN = cols[0], cols[len(cols)-1], color.White
	h.Rasterized = true
	p := newPlot()
	p.Add(h)
	xmin, xmax, ymin, ymax := h.DataRange()
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = xmin, xmax, ymin, ymax
	return p
}

// bar is the colour scale beside the map, its axis labelled with S's unit.
func (cs colourScale) bar() *plot.Plot {
	p := newPlot()
	p.Add(&plotter.ColorBar{ColorMap: cs.colorMap(), Vertical: true})
	p.HideX()
	p.Y.Padding = 0
	p.Y.Label.Text = cs.label
	return p
}

// layout draws the title, the map and its colour bar.
func layout(title, note string, main, bar *plot.Plot) func(draw.Canvas) {
	return func(dc draw.Canvas) {
		t := title
		if note != "" {
			t += "\n" + note
		}
		dc = drawTitle(dc, t)
		w := dc.Max.X - dc.Min.X
		main.Draw(draw.Crop(dc, 0, -0.2*w, 0, 0))
		bar.Draw(draw.Crop(dc, 0.83*w, -0.02*w, 0, 0))
	}
}

// sUnit is the unit of S as the response states it (its energy unit
// included).
func sUnit(r *modegridv1.ComputeScatteringResponse) string {
	if u := r.GetIntensityUnit(); u != "" {
		return u
	}
	return "arbitrary units"
}

// plotScatterPath draws the path map into file as kind.
func plotScatterPath(file, kind string, f scatterMapFigure) error {
	fig, err := f.buildPath()
	if err != nil {
		return err
	}
	return fig.write(file, kind)
}

// buildPath draws S(Q, E) along the path, resampled to pathColumns
// columns by the nearest sample, with the branches (each point's mode
// energies, ascending, mirrored to −E when the axis holds negative
// energies) over it and the corner labels as ticks.
func (f scatterMapFigure) buildPath() (figure, error) {
	pts, es := f.resp.GetPoints(), f.resp.GetEnergies()
	if len(pts) < 2 || len(es) < 2 {
		return figure{}, fmt.Errorf("plot: a map needs at least two Q points and two energies")
	}
	d0, d1 := pts[0].GetDistanceInvA(), pts[len(pts)-1].GetDistanceInvA()
	if !(d1 > d0) {
		return figure{}, fmt.Errorf("plot: the path has no length")
	}
	dist := make([]float64, len(pts))
	for i, p := range pts {
		dist[i] = p.GetDistanceInvA()
	}
	g := uniformGrid{dx: (d1 - d0) / pathColumns, y0: es[0], dy: es[1] - es[0], nx: pathColumns, ny: len(es)}
	g.x0 = d0 + g.dx/2
	g.z = make([]float64, g.nx*g.ny)
	var cols [][]float64
	for _, p := range pts {
		cols = append(cols, p.GetS())
	}
	for c := 0; c < g.nx; c++ {
		s := pts[nearest(dist, g.X(c))].GetS()
		for r := 0; r < g.ny; r++ {
			g.set(c, r, at(s, r))
		}
	}
	cs := newColourScale(cols, f.heat, sUnit(f.resp))
	p := cs.heatPlot(g)
	p.X.Label.Text = "Q along the path (distance, 1/Å)"
	p.Y.Label.Text = fmt.Sprintf("energy transfer E (%s)", unitLabel(f.resp.GetUnit()))
	p.X.Tick.Marker = scatterTicks(pts)
	p.Y.Tick.Marker = stepTicks{}
	p.Add(pathBranches{points: pts, mirror: es[0] < 0})
	return figure{size: mapSize, render: layout(f.title, cs.note, p, cs.bar())}, nil
}

// nearest is the index of the value of sorted xs nearest x.
func nearest(xs []float64, x float64) int {
	i := sort.SearchFloat64s(xs, x)
	switch {
	case i == 0:
		return 0
	case i == len(xs):
		return len(xs) - 1
	case x-xs[i-1] <= xs[i]-x:
		return i - 1
	}
	return i
}

// scatterTicks labels the path's corners (labels at one distance joined
// by '|').
func scatterTicks(pts []*modegridv1.ScatteringPoint) plot.ConstantTicks {
	var ticks plot.ConstantTicks
	for _, p := range pts {
		if p.GetLabel() == "" {
			continue
		}
		l := displayLabel(p.GetLabel())
		if n := len(ticks); n > 0 && math.Abs(ticks[n-1].Value-p.GetDistanceInvA()) < 1e-12 {
			if ticks[n-1].Label != l {
				ticks[n-1].Label += "|" + l
			}
			continue
		}
		ticks = append(ticks, plot.Tick{Value: p.GetDistanceInvA(), Label: l})
	}
	return ticks
}

// pathBranches draws each mode's energy along every piece of the path.
type pathBranches struct {
	points []*modegridv1.ScatteringPoint
	mirror bool
}

func (b pathBranches) Plot(c draw.Canvas, p *plot.Plot) {
	tx, ty := p.Transforms(&c)
	sty := draw.LineStyle{Color: branchOverlayColor, Width: 0.7 * vg.Points(1), Dashes: []vg.Length{3 * vg.Points(1), 1.5 * vg.Points(1)}}
	start := 0
	for i := 1; i <= len(b.points); i++ {
		if i < len(b.points) && !(b.points[i].GetDistanceInvA() <= b.points[i-1].GetDistanceInvA() && b.points[i].GetLabel() != "") {
			continue
		}
		piece := b.points[start:i]
		start = i
		modes := 0
		for _, q := range piece {
			modes = max(modes, len(q.GetModeEnergies()))
		}
		for m := 0; m < modes; m++ {
			for _, sign := range []float64{1, -1} {
				if sign < 0 && !b.mirror {
					continue
				}
				var line []vg.Point
				for _, q := range piece {
					line = append(line, vg.Point{X: tx(q.GetDistanceInvA()), Y: ty(sign * at(q.GetModeEnergies(), m))})
				}
				c.StrokeLines(sty, c.ClipLinesXY(line)...)
			}
		}
	}
}

// plotPowderMap draws the powder map into file as kind.
func plotPowderMap(file, kind string, f scatterMapFigure) error {
	fig, err := f.buildPowder()
	if err != nil {
		return err
	}
	return fig.write(file, kind)
}

// buildPowder draws S(|Q|, E) on its own evenly spaced |Q| and E.
func (f scatterMapFigure) buildPowder() (figure, error) {
	rows, es := f.resp.GetPowder(), f.resp.GetEnergies()
	if len(rows) < 2 || len(es) < 2 {
		return figure{}, fmt.Errorf("plot: a map needs at least two |Q| rows and two energies")
	}
	g := uniformGrid{x0: rows[0].GetQInvA(), dx: rows[1].GetQInvA() - rows[0].GetQInvA(), y0: es[0], dy: es[1] - es[0], nx: len(rows), ny: len(es)}
	g.z = make([]float64, g.nx*g.ny)
	var cols [][]float64
	for c, row := range rows {
		cols = append(cols, row.GetS())
		for r := range es {
			g.set(c, r, at(row.GetS(), r))
		}
	}
	cs := newColourScale(cols, f.heat, sUnit(f.resp))
	p := cs.heatPlot(g)
	p.X.Label.Text = "momentum transfer |Q| (1/Å)"
	p.X.Tick.Marker, p.Y.Tick.Marker = stepTicks{}, stepTicks{}
	p.Y.Label.Text = fmt.Sprintf("energy transfer E (%s)", unitLabel(f.resp.GetUnit()))
	terms := "coherent"
	if f.resp.GetPowderIncoherent() {
		terms = "coherent + incoherent"
	}
	title := f.title + ", powder average (" + terms + ")"
	return figure{size: mapSize, render: layout(title, cs.note, p, cs.bar())}, nil
}

// plotWeightedDOS draws the neutron-weighted DOS into file as kind.
func plotWeightedDOS(file, kind string, r *modegridv1.ComputeScatteringResponse, title string) error {
	f, err := buildWeightedDOS(r, title)
	if err != nil {
		return err
	}
	return f.write(file, kind)
}

// buildWeightedDOS is the figure of plotWeightedDOS: Σ_j (σ_j/m_j) g_j(E).
func buildWeightedDOS(r *modegridv1.ComputeScatteringResponse, title string) (figure, error) {
	es := r.GetEnergies()
	if len(es) < 2 || len(r.GetWeightedDos()) != len(es) {
		return figure{}, fmt.Errorf("plot: the weighted DOS has no samples")
	}
	u := unitLabel(r.GetUnit())
	p := newPlot()
	p.Title.Text = title
	p.X.Label.Text = fmt.Sprintf("energy E (%s)", u)
	p.Y.Label.Text = fmt.Sprintf("neutron-weighted DOS Σ σ/m g(E) (barn/(amu·%s))", u)
	p.X.Min, p.X.Max = es[0], es[len(es)-1]
	p.Y.Min = 0
	p.Y.Max = 1.08 * slices.Max(r.GetWeightedDos())
	if !(p.Y.Max > 0) {
		p.Y.Max = 1
	}
	p.Add(line(es, r.GetWeightedDos(), branchColor, 1.5*vg.Points(1)))
	return figure{size: dosSize, render: func(dc draw.Canvas) { p.Draw(dc) }}, nil
}

// stepTicks labels an axis every 1, 2 or 5 × 10ⁿ, whichever gives four to
// ten labels, through 0 (gonum's default ticks may skip 0 and every
// other label on an energy axis from −10 to 32).
type stepTicks struct{}

func (stepTicks) Ticks(lo, hi float64) []plot.Tick {
	if !(hi > lo) {
		return nil
	}
	mag := math.Pow(10, math.Floor(math.Log10((hi-lo)/4)))
	step := mag
	for _, m := range []float64{1, 2, 5, 10} {
		if (hi-lo)/(m*mag) <= 10 {
			step = m * mag
			break
		}
	}
	var out []plot.Tick
	for k := math.Ceil(lo / step); k*step <= hi; k++ {
		v := k*step + 0 // + 0: no "-0" label
		out = append(out, plot.Tick{Value: v, Label: strconv.FormatFloat(v, 'g', 6, 64)})
		for m := 1; m < 5; m++ { // minor ticks
			if w := v + float64(m)*step/5; w <= hi {
				out = append(out, plot.Tick{Value: w})
			}
		}
	}
	return out
}
