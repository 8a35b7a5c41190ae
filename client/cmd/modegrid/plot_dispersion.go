package main

// The dispersion figure: branches coloured point by point by the sites that
// carry the motion, path segments told apart by alternate shading (no
// full-height lines), and beside it the DOS as per-site stacked fills in
// the same colours on the same frequency axis.

import (
	"fmt"
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// siteKey says how figures tell sites apart: one colour per group, a group
// being one site (up to len(siteColors) sites) or else all sites of one
// label (labels past the palette are merged into "other").
type siteKey struct {
	names []string // per group
	group []int    // per site (model order): its group
}

// newSiteKey groups sites given their labels in model order.
func newSiteKey(labels []string) siteKey {
	k := siteKey{group: make([]int, len(labels))}
	if len(labels) <= len(siteColors) {
		idx := make([]int, len(labels))
		for i := range idx {
			idx[i] = i
			k.group[i] = i
		}
		k.names = siteColumns("", labels, idx)
		return k
	}
	seen := map[string]int{}
	for i, l := range labels {
		g, ok := seen[l]
		switch {
		case ok:
		case len(k.names) < len(siteColors)-1 || len(k.names) == len(siteColors)-1 && distinct(labels) == len(siteColors):
			g = len(k.names)
			k.names = append(k.names, l+" (all)")
			seen[l] = g
		default:
			g = len(siteColors) - 1
			if len(k.names) == g {
				k.names = append(k.names, "other")
			}
			seen[l] = g
		}
		k.group[i] = g
	}
	return k
}

func distinct(labels []string) int {
	m := map[string]bool{}
	for _, l := range labels {
		m[l] = true
	}
	return len(m)
}

// color of group g.
func (k siteKey) color(g int) color.Color { return siteColors[g%len(siteColors)] }

// mix is the colour of a mode whose site shares are w (model order): the
// group colours weighted by the groups' shares. Nil w gives def.
func (k siteKey) mix(w []float64, def color.Color) color.Color {
	if len(w) == 0 || len(w) != len(k.group) {
		return def
	}
	var sum float64
	for _, x := range w {
		sum += x
	}
	if !(sum > 0) {
		return def
	}
	// Shares rounded to 1/32, so runs of one colour join into one polyline
	// (smooth joins) without a visible step, and a mode on one site has
	// exactly that site's colour.
	var r, g, b, tot float64
	for s, x := range w {
		q := math.Round(32*x/sum) / 32
		cr, cg, cb, _ := k.color(k.group[s]).RGBA()
		r, g, b, tot = r+q*float64(cr>>8), g+q*float64(cg>>8), b+q*float64(cb>>8), tot+q
	}
	if tot == 0 {
		return def
	}
	c8 := func(v float64) uint8 { return uint8(math.Round(v / tot)) }
	return color.RGBA{R: c8(r), G: c8(g), B: c8(b), A: 0xff}
}

// dispersionFigure is what the dispersion figure shows.
type dispersionFigure struct {
	disp     *modegridv1.ComputeDispersionResponse
	dos      *modegridv1.ComputeDosResponse // nil: no DOS panel
	key      siteKey                        // from the model's sites
	measured []plotPoint                    // x: path distance (1/Å), y ± σ: frequency, response unit
	title    string
}

// plotPoint is a measured point with its standard uncertainty (0: none).
type plotPoint struct{ X, Y, Sigma float64 }

// plotDispersion draws d into file as kind.
func plotDispersion(file, kind string, d dispersionFigure) error {
	f, err := d.build()
	if err != nil {
		return err
	}
	return f.write(file, kind)
}

func (d dispersionFigure) build() (figure, error) {
	samples := d.disp.GetSamples()
	if len(samples) == 0 {
		return figure{}, fmt.Errorf("plot: the dispersion has no samples")
	}
	u := unitLabel(d.disp.GetUnit())
	var all [][]float64
	for _, s := range samples {
		all = append(all, s.GetFrequencies())
	}
	if d.dos != nil {
		all = append(all, d.dos.GetFrequencies())
	}
	for _, m := range d.measured {
		all = append(all, []float64{m.Y - m.Sigma, m.Y + m.Sigma})
	}
	lo, hi := freqRange(all...)
	left := d.branchPanel(samples, u, lo, hi)
	var right *plot.Plot
	if d.dos != nil && len(d.dos.GetFrequencies()) > 0 {
		right = d.dosPanel(u, lo, hi)
	}
	weighted := len(samples[0].GetSiteWeights()) > 0
	return figure{size: dispersionSize, render: func(dc draw.Canvas) {
		if d.title != "" {
			dc = drawTitle(dc, d.title)
		}
		if weighted || right != nil && len(d.key.names) > 1 {
			dc = drawSiteKey(dc, d.key, weighted)
		}
		if right == nil {
			left.Draw(dc)
			return
		}
		w := dc.Max.X - dc.Min.X
		left.Draw(draw.Crop(dc, 0, -0.26*w, 0, 0))
		right.Draw(draw.Crop(dc, 0.75*w, 0, 0, 0))
	}}, nil
}

// branchPanel is the dispersion itself.
func (d dispersionFigure) branchPanel(samples []*modegridv1.DispersionSample, u string, lo, hi float64) *plot.Plot {
	p := newPlot()
	p.X.Label.Text = "wavevector along the path"
	p.Y.Label.Text = fmt.Sprintf("frequency ν (%s)", u)
	p.Y.Min, p.Y.Max = lo, hi
	p.X.Min = samples[0].GetDistanceInvA()
	p.X.Max = samples[len(samples)-1].GetDistanceInvA()
	ticks := cornerTicks(samples)
	p.X.Tick.Marker = ticks
	p.Add(segmentShade{ticks})
	if lo < 0 {
		z := line([]float64{p.X.Min, p.X.Max}, []float64{0, 0}, zeroColor, 0.6*vg.Points(1))
		z.Dashes = []vg.Length{3 * vg.Points(1), 2 * vg.Points(1)}
		p.Add(z)
	}
	p.Add(siteBranches{pieces: pathPieces(samples), key: d.key, width: 1.6 * vg.Points(1)})
	addMeasured(p, d.measured)
	return p
}

// dosPanel is the DOS beside the branches: per-site stacked fills when the
// DOS has per-site parts, with the total as an outline.
func (d dispersionFigure) dosPanel(u string, lo, hi float64) *plot.Plot {
	p := newPlot()
	p.X.Label.Text = fmt.Sprintf("DOS (1/%s)", u)
	p.Y.Min, p.Y.Max = lo, hi
	p.Y.Tick.Marker = blankLabels{plot.DefaultTicks{}}
	p.X.Min = 0
	p.X.Max = maxOf(d.dos.GetDos()) * 1.05
	if !(p.X.Max > 0) {
		p.X.Max = 1
	}
	freqs := d.dos.GetFrequencies()
	layers := make([][]float64, len(d.key.names))
	for _, part := range d.dos.GetSites() {
		s := int(part.GetSite())
		if s < 0 || s >= len(d.key.group) {
			continue // a per-label part: the sites already hold it
		}
		g := d.key.group[s]
		if layers[g] == nil {
			layers[g] = make([]float64, len(freqs))
		}
		for k := range freqs {
			layers[g][k] += at(part.GetDos(), k)
		}
	}
	p.Add(stackedDOS{freqs: freqs, layers: layers, key: d.key})
	p.Add(line(d.dos.GetDos(), freqs, totalColor, 1.0*vg.Points(1)))
	if lo < 0 {
		p.Add(line([]float64{0, p.X.Max}, []float64{0, 0}, zeroColor, 0.6*vg.Points(1)))
	}
	return p
}

// addMeasured overlays measured points as open circles with ±σ bars.
func addMeasured(p *plot.Plot, pts []plotPoint) {
	if len(pts) == 0 {
		return
	}
	xys := make(plotter.XYs, len(pts))
	errs := make(plotter.YErrors, len(pts))
	for i, m := range pts {
		xys[i] = plotter.XY{X: m.X, Y: m.Y}
		errs[i] = struct{ Low, High float64 }{m.Sigma, m.Sigma}
	}
	bars := &plotter.YErrorBars{XYs: xys, YErrors: errs,
		LineStyle: draw.LineStyle{Color: measuredColor, Width: 0.8 * vg.Points(1)}, CapWidth: 3 * vg.Points(1)}
	sc, _ := plotter.NewScatter(xys) // cannot fail: the points are finite (checked on reading)
	sc.GlyphStyle = draw.GlyphStyle{Color: measuredColor, Radius: 2.2 * vg.Points(1), Shape: draw.CircleGlyph{}}
	p.Add(bars, sc)
	p.Legend.Add("measured ± σ", sc)
	p.Legend.Top, p.Legend.Left = true, false
}

// segmentShade fills every other stretch between corners of the path.
type segmentShade struct{ ticks plot.ConstantTicks }

func (s segmentShade) Plot(c draw.Canvas, p *plot.Plot) {
	tx, _ := p.Transforms(&c)
	for i := 1; i+1 < len(s.ticks); i += 2 {
		x0, x1 := tx(s.ticks[i].Value), tx(s.ticks[i+1].Value)
		c.FillPolygon(shadeColor, []vg.Point{{X: x0, Y: c.Min.Y}, {X: x1, Y: c.Min.Y}, {X: x1, Y: c.Max.Y}, {X: x0, Y: c.Max.Y}})
	}
}

// siteBranches draws every branch of every piece, each stretch in the mix
// of the site colours by the site shares of its two ends (branchColor
// without shares).
type siteBranches struct {
	pieces [][]*modegridv1.DispersionSample
	key    siteKey
	width  vg.Length
}

func (b siteBranches) Plot(c draw.Canvas, p *plot.Plot) {
	tx, ty := p.Transforms(&c)
	for _, piece := range b.pieces {
		nb := 0
		for _, s := range piece {
			nb = max(nb, len(s.GetFrequencies()))
		}
		for br := range nb {
			var run []vg.Point
			var runColor color.Color
			flush := func() {
				if len(run) > 1 {
					c.StrokeLines(draw.LineStyle{Color: runColor, Width: b.width}, c.ClipLinesXY(run)...)
				}
			}
			for k := 1; k < len(piece); k++ {
				s0, s1 := piece[k-1], piece[k]
				if br >= len(s0.GetFrequencies()) || br >= len(s1.GetFrequencies()) {
					continue
				}
				col := b.key.mix(meanShares(s0, s1, br), branchColor)
				p0 := vg.Point{X: tx(s0.GetDistanceInvA()), Y: ty(s0.GetFrequencies()[br])}
				p1 := vg.Point{X: tx(s1.GetDistanceInvA()), Y: ty(s1.GetFrequencies()[br])}
				if col != runColor || len(run) == 0 {
					flush()
					run, runColor = []vg.Point{p0}, col
				}
				run = append(run, p1)
			}
			flush()
		}
	}
}

// meanShares is the mean of the site shares of branch br at two samples
// (nil when either has none).
func meanShares(a, b *modegridv1.DispersionSample, br int) []float64 {
	wa, wb := branchShares(a, br), branchShares(b, br)
	if wa == nil || len(wa) != len(wb) {
		return nil
	}
	out := make([]float64, len(wa))
	for i := range out {
		out[i] = (wa[i] + wb[i]) / 2
	}
	return out
}

// branchShares is the site shares of branch br of a sample, nil if absent.
func branchShares(s *modegridv1.DispersionSample, br int) []float64 {
	nb, w := len(s.GetFrequencies()), s.GetSiteWeights()
	if nb == 0 || len(w) == 0 || len(w)%nb != 0 {
		return nil
	}
	ns := len(w) / nb
	return w[br*ns : (br+1)*ns]
}

// stackedDOS fills the per-group DOS layers stacked from g = 0 along the
// horizontal axis, frequency vertical.
type stackedDOS struct {
	freqs  []float64
	layers [][]float64 // per group, nil when the group has no part
	key    siteKey
}

func (s stackedDOS) Plot(c draw.Canvas, p *plot.Plot) {
	tx, ty := p.Transforms(&c)
	base := make([]float64, len(s.freqs))
	for g, layer := range s.layers {
		if layer == nil {
			continue
		}
		pts := make([]vg.Point, 0, 2*len(s.freqs))
		for k, f := range s.freqs {
			pts = append(pts, vg.Point{X: tx(base[k]), Y: ty(f)})
		}
		for k := len(s.freqs) - 1; k >= 0; k-- {
			base[k] += layer[k]
			pts = append(pts, vg.Point{X: tx(base[k]), Y: ty(s.freqs[k])})
		}
		c.FillPolygon(fade(s.key.color(g), 0.25), c.ClipPolygonXY(pts))
	}
}

// fade mixes c with white by the fraction f.
func fade(c color.Color, f float64) color.Color {
	r, g, b, _ := c.RGBA()
	m := func(v uint32) uint8 { return uint8(math.Round((1-f)*float64(v>>8) + f*255)) }
	return color.RGBA{R: m(r), G: m(g), B: m(b), A: 0xff}
}

// drawSiteKey writes a one-line key of the site colours under the title
// and returns the rest of dc.
func drawSiteKey(dc draw.Canvas, k siteKey, mixed bool) draw.Canvas {
	sty := newPlot().Legend.TextStyle
	sty.YAlign = draw.YCenter
	lead := "site:"
	if mixed {
		lead = "colour = share of the motion on each site:"
	}
	h := sty.Height(lead) + 2*vg.Millimeter
	box := 0.7 * sty.Height(lead)
	gap := 3 * vg.Millimeter
	width := sty.Width(lead)
	for _, n := range k.names {
		width += gap + box + vg.Millimeter + sty.Width(n)
	}
	y := dc.Max.Y - h/2
	x := (dc.Min.X+dc.Max.X)/2 - width/2
	dc.FillText(sty, vg.Point{X: x, Y: y}, lead)
	x += sty.Width(lead)
	for g, n := range k.names {
		x += gap
		dc.FillPolygon(k.color(g), []vg.Point{{X: x, Y: y - box/2}, {X: x + box, Y: y - box/2}, {X: x + box, Y: y + box/2}, {X: x, Y: y + box/2}})
		x += box + vg.Millimeter
		dc.FillText(sty, vg.Point{X: x, Y: y}, n)
		x += sty.Width(n)
	}
	return draw.Crop(dc, 0, 0, 0, -h)
}

// siteLabels is the labels of a crystal's sites in model order.
func siteLabels(c *modegridv1.Crystal) []string {
	out := make([]string, len(c.GetSites()))
	for i, s := range c.GetSites() {
		out[i] = s.GetLabel()
	}
	return out
}
