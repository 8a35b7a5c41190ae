package main

// The mode-shape figure (`shape --plot`) of a 1D or 2D crystal: the sites
// of a block of cells at rest, coloured by site as in every other figure,
// and arrows showing the displacement at one phase, scaled so that the
// largest arrow is a stated fraction of the nearest-neighbour distance.
// The displacements come from modePattern (shape.go), never recomputed.

import (
	"fmt"
	"image/color"
	"math"
	"math/cmplx"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// shapePlotOptions choose the snapshot of the figure.
type shapePlotOptions struct {
	peakPhase bool    // false: ωt = 0; true: the phase of largest total displacement
	arrowFrac float64 // largest arrow / nearest-neighbour distance
}

// Arrow components of a shape figure.
const (
	arrowInPlane = "in-plane"     // 2D: the displacement in the plane
	arrowLong    = "longitudinal" // 1D: along the chain, drawn horizontally
	arrowTransY  = "transverse-1" // 1D: first transverse axis, vertical, solid
	arrowTransZ  = "transverse-2" // 1D: second transverse axis, vertical, dashed
)

// shapeArrow is one drawn arrow in figure coordinates (Å): from the rest
// position of atom Atom by D, the displacement times the figure's scale.
type shapeArrow struct {
	Atom int
	Comp string
	From [2]float64
	D    [2]float64
}

// shapeRing marks a displacement out of the figure's plane (2D, p = 3): a
// circle of diameter scale·|u⊥| around the site, Sign +1 towards the viewer.
type shapeRing struct {
	At     [2]float64
	Radius float64
	Sign   int
}

// shapeFigure is everything the mode-shape figure draws.
type shapeFigure struct {
	title, xLabel, yLabel string
	caption               []string
	key                   siteKey
	group                 []int        // per atom: its colour group
	pos                   [][2]float64 // per atom: rest position, figure coordinates (Å)
	arrows                []shapeArrow
	rings                 []shapeRing
	guides                [][2][2]float64 // cell outlines (2D) or cell boundaries (1D)
	scale                 float64         // arrow length per Å of displacement
	largestA              float64         // largest displacement at the phase, Å
	nnA                   float64         // nearest-neighbour distance, Å
	phase                 float64         // ωt of the snapshot, radians
	lo, hi                [2]float64      // data extent
}

// shapeFrame is the figure's frame: e[0] horizontal, e[1] vertical, e[2]
// the normal (2D) or second transverse axis (1D), orthonormal Cartesian.
type shapeFrame [3][3]float64

// newShapeFrame builds the frame from the lattice: e[0] along a₁; in 2D
// e[1] the in-plane part of a₂ orthogonal to a₁; in 1D the part of ŷ (ẑ if
// ŷ is along the chain) orthogonal to a₁.
func newShapeFrame(c *modegridv1.Crystal, d int) shapeFrame {
	lat := c.GetLattice()
	v := func(k int) [3]float64 { return [3]float64{lat[k].GetX(), lat[k].GetY(), lat[k].GetZ()} }
	var f shapeFrame
	f[0] = unit3(v(0))
	second := [3]float64{0, 1, 0}
	if d >= 2 {
		second = v(1)
	} else if math.Abs(f[0][1]) > 0.9 {
		second = [3]float64{0, 0, 1}
	}
	p := dot3(second, f[0])
	f[1] = unit3([3]float64{second[0] - p*f[0][0], second[1] - p*f[0][1], second[2] - p*f[0][2]})
	f[2] = [3]float64{f[0][1]*f[1][2] - f[0][2]*f[1][1], f[0][2]*f[1][0] - f[0][0]*f[1][2], f[0][0]*f[1][1] - f[0][1]*f[1][0]}
	return f
}

// isXY says whether the frame is x̂, ŷ, ẑ, so the axes can be named x, y.
func (f shapeFrame) isXY() bool {
	return f[0] == [3]float64{1, 0, 0} && f[1] == [3]float64{0, 1, 0}
}

func dot3(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }

func unit3(a [3]float64) [3]float64 {
	n := math.Sqrt(dot3(a, a))
	return [3]float64{a[0] / n, a[1] / n, a[2] / n}
}

// peakPhase is the ωt at which the total squared displacement
// Σ|Re[u_i e^{−iωt}]|² = ½Σ|u_i|² + ½Re[e^{−2iωt} Σ u_i·u_i] is largest:
// ωt = arg(Σ u_i·u_i)/2 (derived). A travelling wave on a periodic block
// has Σ u_i·u_i ≈ 0 and every phase alike: then 0.
func (m *modePattern) peakPhase() float64 {
	var s complex128
	var norm float64
	for _, u := range m.disp {
		for _, x := range u {
			s += x * x
			norm += real(x * cmplx.Conj(x))
		}
	}
	if cmplx.Abs(s) < 1e-9*norm {
		return 0
	}
	return cmplx.Phase(s) / 2
}

// nearestNeighbourA is the shortest distance between two distinct atoms of
// the crystal (periodic images included), Å.
func nearestNeighbourA(c *modegridv1.Crystal, d int) float64 {
	best := math.Inf(1)
	r := [3]int{}
	for k := 0; k < d; k++ {
		r[k] = 2
	}
	for s := range c.GetSites() {
		a := restPosition(c, s, [3]int{})
		for t := range c.GetSites() {
			for n1 := -r[0]; n1 <= r[0]; n1++ {
				for n2 := -r[1]; n2 <= r[1]; n2++ {
					for n3 := -r[2]; n3 <= r[2]; n3++ {
						b := restPosition(c, t, [3]int{n1, n2, n3})
						dv := [3]float64{b[0] - a[0], b[1] - a[1], b[2] - a[2]}
						if l := math.Sqrt(dot3(dv, dv)); l > 1e-9 && l < best {
							best = l
						}
					}
				}
			}
		}
	}
	return best
}

// buildShapeFigure lays out the figure of pattern m of crystal c (d = 1 or
// 2 lattice vectors, p polarisations) for mode o.
func buildShapeFigure(c *modegridv1.Crystal, d, p int, m *modePattern, o shapeOptions, po shapePlotOptions) (*shapeFigure, error) {
	if d < 1 || d > 2 {
		return nil, fmt.Errorf("plot: the mode-shape figure is for 1D and 2D crystals, not %dD", d)
	}
	f := &shapeFigure{key: newSiteKey(siteLabels(c)), nnA: nearestNeighbourA(c, d)}
	if po.peakPhase {
		f.phase = m.peakPhase()
	}
	switch {
	case math.Abs(f.phase) < 1e-9:
		f.phase = 0
	case f.phase < 0: // the same snapshot reversed half a period later
		f.phase += math.Pi
	}
	u := m.at(f.phase)
	for _, x := range u {
		f.largestA = math.Max(f.largestA, math.Sqrt(dot3(x, x)))
	}
	if !(f.largestA > 0) || math.IsInf(f.nnA, 0) {
		return nil, fmt.Errorf("plot: the mode has no displacement at ωt = %.3g rad", f.phase)
	}
	f.scale = po.arrowFrac * f.nnA / f.largestA
	fr := newShapeFrame(c, d)
	for i, r := range m.rest {
		f.group = append(f.group, f.key.group[m.site[i]])
		f.pos = append(f.pos, [2]float64{dot3(r, fr[0]), dot3(r, fr[1])})
		f.addArrows(i, d, p, u[i], fr)
	}
	f.guides = cellGuides(c, d, o.cells, fr)
	f.labels(c, d, p, m, o, po, fr)
	f.extent()
	return f, nil
}

// addArrows adds the arrows (and ring) of atom i displaced by x.
func (f *shapeFigure) addArrows(i, d, p int, x [3]float64, fr shapeFrame) {
	s := f.scale
	a, b, n := s*dot3(x, fr[0]), s*dot3(x, fr[1]), s*dot3(x, fr[2])
	from := f.pos[i]
	if d == 2 {
		f.arrows = append(f.arrows, shapeArrow{Atom: i, Comp: arrowInPlane, From: from, D: [2]float64{a, b}})
		if p == 3 && math.Abs(n) > 0 {
			sign := 1
			if n < 0 {
				sign = -1
			}
			f.rings = append(f.rings, shapeRing{At: from, Radius: math.Abs(n) / 2, Sign: sign})
		}
		return
	}
	f.arrows = append(f.arrows, shapeArrow{Atom: i, Comp: arrowLong, From: from, D: [2]float64{a, 0}})
	if p > 1 {
		f.arrows = append(f.arrows, shapeArrow{Atom: i, Comp: arrowTransY, From: from, D: [2]float64{0, b}})
	}
	if p > 2 {
		// Beside the first, so that both stay visible when they agree.
		off := [2]float64{from[0] + 0.06*f.nnA, from[1]}
		f.arrows = append(f.arrows, shapeArrow{Atom: i, Comp: arrowTransZ, From: off, D: [2]float64{0, n}})
	}
}

// cellGuides are the outlines of the cells of the block (2D) or short
// marks at the cell boundaries along the chain (1D), figure coordinates.
func cellGuides(c *modegridv1.Crystal, d int, cells [3]int, fr shapeFrame) [][2][2]float64 {
	lat := c.GetLattice()
	proj := func(x, y float64) [2]float64 {
		var r [3]float64
		v := [2]float64{x, y}
		for k := 0; k < d; k++ {
			l := [3]float64{lat[k].GetX(), lat[k].GetY(), lat[k].GetZ()}
			for a := range r {
				r[a] += v[k] * l[a]
			}
		}
		return [2]float64{dot3(r, fr[0]), dot3(r, fr[1])}
	}
	var out [][2][2]float64
	if d == 1 {
		out = append(out, [2][2]float64{proj(0, 0), proj(float64(cells[0]), 0)})
		tick := 0.06 * proj(1, 0)[0] // a mark 6 % of the cell long each way
		for n := 0; n <= cells[0]; n++ {
			x := proj(float64(n), 0)[0]
			out = append(out, [2][2]float64{{x, -tick}, {x, tick}})
		}
		return out
	}
	for n := 0; n <= cells[0]; n++ {
		out = append(out, [2][2]float64{proj(float64(n), 0), proj(float64(n), float64(cells[1]))})
	}
	for n := 0; n <= cells[1]; n++ {
		out = append(out, [2][2]float64{proj(0, float64(n)), proj(float64(cells[0]), float64(n))})
	}
	return out
}

// labels writes the title, axis labels and caption.
func (f *shapeFigure) labels(c *modegridv1.Crystal, d, p int, m *modePattern, o shapeOptions, po shapePlotOptions, fr shapeFrame) {
	q := make([]string, d)
	for k := range q {
		q[k] = fmt.Sprintf("%g", o.q[k])
	}
	nu := fmt.Sprintf("ν = %.4g THz", m.nuTHz)
	if m.nuTHz < 0 {
		nu = fmt.Sprintf("ν = %.4gi THz (imaginary)", -m.nuTHz)
	}
	f.title = fmt.Sprintf("%s: q = (%s), branch %d, %s", strings.ReplaceAll(c.GetName(), "\n", " "), strings.Join(q, ", "), o.branch, nu)
	f.xLabel, f.yLabel = "x (Å)", "y (Å)"
	if !fr.isXY() {
		f.xLabel, f.yLabel = "along a₁ (Å)", "in the plane, across a₁ (Å)"
	}
	if d == 1 {
		f.xLabel = strings.Replace(f.xLabel, " (Å)", ", along the chain (Å)", 1)
		f.yLabel = "across the chain (Å)"
	}
	f.caption = append(f.caption, fmt.Sprintf("arrows × %.3g: largest displacement %.3g Å (the largest arrow is %.2g × the nearest-neighbour distance %.3g Å); %s",
		f.scale, f.largestA, po.arrowFrac, f.nnA, blockText(d, o.cells)))
	phase := "snapshot at t = 0 (ωt = 0)"
	if po.peakPhase {
		phase = fmt.Sprintf("snapshot at ωt = %.0f°, the phase of largest total displacement", math.Abs(math.Round(f.phase*180/math.Pi)))
	}
	if m.nuTHz < 0 {
		phase += "; an imaginary mode grows, it does not oscillate"
	}
	f.caption = append(f.caption, phase)
	switch {
	case d == 1 && p == 1:
		f.caption = append(f.caption, "arrows: the displacement along the chain (longitudinal)")
	case d == 1 && p == 2:
		f.caption = append(f.caption, "horizontal arrows: along the chain (longitudinal); vertical arrows: the transverse component, drawn across the chain")
	case d == 1:
		f.caption = append(f.caption, "horizontal arrows: along the chain (longitudinal); vertical arrows: the two transverse components, solid (first) and dashed (second, beside it)")
	case p == 3 && len(f.rings) == 0:
		f.caption = append(f.caption, "arrows: in-plane displacement (this mode has none out of the plane)")
	case p == 3:
		f.caption = append(f.caption, "arrows: in-plane displacement; circles: out-of-plane displacement (diameter on the same scale; dot: towards the viewer, cross: away)")
	}
}

// blockText names the block of cells: "4 cells" (1D), "4×4 cells" (2D).
func blockText(d int, cells [3]int) string {
	if d == 1 {
		return fmt.Sprintf("%d cells", cells[0])
	}
	return fmt.Sprintf("%d×%d cells", cells[0], cells[1])
}

// extent sets lo, hi to hold sites, arrows, rings and guides with a margin.
func (f *shapeFigure) extent() {
	f.lo, f.hi = [2]float64{math.Inf(1), math.Inf(1)}, [2]float64{math.Inf(-1), math.Inf(-1)}
	grow := func(x [2]float64) {
		for k := range x {
			f.lo[k], f.hi[k] = math.Min(f.lo[k], x[k]), math.Max(f.hi[k], x[k])
		}
	}
	for _, x := range f.pos {
		grow(x)
	}
	for _, a := range f.arrows {
		grow([2]float64{a.From[0] + a.D[0], a.From[1] + a.D[1]})
	}
	for _, r := range f.rings {
		grow([2]float64{r.At[0] - r.Radius, r.At[1] - r.Radius})
		grow([2]float64{r.At[0] + r.Radius, r.At[1] + r.Radius})
	}
	for _, g := range f.guides {
		grow(g[0])
		grow(g[1])
	}
	pad := 0.35 * f.nnA
	for k := range f.lo {
		f.lo[k], f.hi[k] = f.lo[k]-pad, f.hi[k]+pad
	}
}

// shapeWidth is the width of the figure; its height follows the data.
const shapeWidth = 16 * vg.Centimeter

// figure is the drawing: title, site key, the block with equal scales on
// both axes, and the caption under it.
func (f *shapeFigure) figure() figure {
	ratio := (f.hi[1] - f.lo[1]) / (f.hi[0] - f.lo[0])
	h := vg.Length(math.Min(math.Max(float64(shapeWidth)*ratio*0.8+float64(6*vg.Centimeter), float64(8*vg.Centimeter)), float64(22*vg.Centimeter)))
	return figure{size: [2]vg.Length{shapeWidth, h}, render: func(dc draw.Canvas) {
		sty := newPlot().Title.TextStyle
		for _, l := range wrapText(f.title, ": ", sty, dc.Max.X-dc.Min.X-4*vg.Millimeter) {
			dc = drawTitle(dc, l)
		}
		dc = drawSiteKey(dc, f.key, false)
		dc = drawCaption(dc, f.caption)
		p := newPlot()
		p.X.Label.Text, p.Y.Label.Text = f.xLabel, f.yLabel
		p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = f.lo[0], f.hi[0], f.lo[1], f.hi[1]
		p.Add(shapeDrawing{f})
		equalAspect(p, dc)
		p.Draw(dc)
	}}
}

// drawCaption writes lines at the bottom of dc and returns the rest.
func drawCaption(dc draw.Canvas, lines []string) draw.Canvas {
	sty := newPlot().Legend.TextStyle
	sty.Font.Size = 9 * vg.Points(1)
	sty.XAlign, sty.YAlign = draw.XLeft, draw.YBottom
	var all []string
	for _, l := range lines {
		all = append(all, wrapText(l, "; ", sty, dc.Max.X-dc.Min.X-4*vg.Millimeter)...)
	}
	lines = all
	y := dc.Min.Y + vg.Millimeter
	for i := len(lines) - 1; i >= 0; i-- {
		dc.FillText(sty, vg.Point{X: dc.Min.X + 2*vg.Millimeter, Y: y}, lines[i])
		y += sty.Height(lines[i]) + 0.6*vg.Millimeter
	}
	return draw.Crop(dc, 0, 0, y-dc.Min.Y+vg.Millimeter, 0)
}

// wrapText splits s after sep (kept on the first line) wherever the line
// would be wider than w; then between words if still too wide.
func wrapText(s, sep string, sty draw.TextStyle, w vg.Length) []string {
	if sty.Width(s) <= w {
		return []string{s}
	}
	var out []string
	line := ""
	for _, part := range strings.SplitAfter(s, sep) {
		if line != "" && sty.Width(line+part) > w {
			out = append(out, strings.TrimSpace(line))
			line = ""
		}
		line += part
	}
	out = append(out, strings.TrimSpace(line))
	if sep != " " {
		var words []string
		for _, l := range out {
			words = append(words, wrapText(l, " ", sty, w)...)
		}
		return words
	}
	return out
}

// equalAspect widens the smaller axis range so that one Å is as long on
// both axes in dc (twice: the tick labels move with the ranges).
func equalAspect(p *plot.Plot, dc draw.Canvas) {
	for range 2 {
		da := p.DataCanvas(dc)
		w, h := float64(da.Max.X-da.Min.X), float64(da.Max.Y-da.Min.Y)
		if !(w > 0 && h > 0) {
			return
		}
		sx, sy := (p.X.Max-p.X.Min)/w, (p.Y.Max-p.Y.Min)/h
		if sx > sy {
			c, half := (p.Y.Min+p.Y.Max)/2, sx*h/2
			p.Y.Min, p.Y.Max = c-half, c+half
		} else {
			c, half := (p.X.Min+p.X.Max)/2, sy*w/2
			p.X.Min, p.X.Max = c-half, c+half
		}
	}
}

// shapeDrawing is the plotter of the block: guides, sites, rings, arrows.
type shapeDrawing struct{ f *shapeFigure }

var (
	guideColor = color.Gray{Y: 0xc8}
	arrowColor = color.Gray{Y: 0x20}
)

func (s shapeDrawing) Plot(c draw.Canvas, p *plot.Plot) {
	tx, ty := p.Transforms(&c)
	pt := func(x [2]float64) vg.Point { return vg.Point{X: tx(x[0]), Y: ty(x[1])} }
	f := s.f
	for _, g := range f.guides {
		c.StrokeLines(draw.LineStyle{Color: guideColor, Width: 0.6 * vg.Points(1)}, c.ClipLinesXY([]vg.Point{pt(g[0]), pt(g[1])})...)
	}
	rad := 4 * vg.Points(1)
	for i, x := range f.pos {
		c.DrawGlyph(draw.GlyphStyle{Color: f.key.color(f.group[i]), Radius: rad, Shape: draw.CircleGlyph{}}, pt(x))
		c.DrawGlyph(draw.GlyphStyle{Color: arrowColor, Radius: rad, Shape: draw.RingGlyph{}}, pt(x))
	}
	for _, r := range f.rings {
		drawRing(c, pt(r.At), tx(r.At[0]+r.Radius)-tx(r.At[0]), r.Sign)
	}
	for _, a := range f.arrows {
		sty := draw.LineStyle{Color: arrowColor, Width: 1.2 * vg.Points(1)}
		if a.Comp == arrowTransZ {
			sty.Dashes = []vg.Length{3 * vg.Points(1), 2 * vg.Points(1)}
		}
		drawArrow(c, sty, pt(a.From), pt([2]float64{a.From[0] + a.D[0], a.From[1] + a.D[1]}))
	}
}

// drawArrow strokes a shaft from a to b with a filled head at b; arrows
// shorter than a point are left out (no motion to show).
func drawArrow(c draw.Canvas, sty draw.LineStyle, a, b vg.Point) {
	d := b.Sub(a)
	l := vg.Length(math.Hypot(float64(d.X), float64(d.Y)))
	if l < vg.Points(1) {
		return
	}
	head := min(6*vg.Points(1), 0.4*l)
	u := vg.Point{X: d.X / l, Y: d.Y / l}
	base := b.Sub(u.Scale(head))
	n := vg.Point{X: -u.Y, Y: u.X}.Scale(head * 0.45)
	c.StrokeLines(sty, []vg.Point{a, base})
	c.FillPolygon(sty.Color, []vg.Point{b, base.Add(n), base.Sub(n)})
}

// drawRing draws an out-of-plane marker of radius r: a circle with a dot
// (sign > 0, towards the viewer) or a cross (away).
func drawRing(c draw.Canvas, at vg.Point, r vg.Length, sign int) {
	if r < vg.Points(1) {
		return
	}
	sty := draw.LineStyle{Color: arrowColor, Width: 1 * vg.Points(1)}
	c.DrawGlyph(draw.GlyphStyle{Color: arrowColor, Radius: r, Shape: draw.RingGlyph{}}, at)
	if sign > 0 {
		c.DrawGlyph(draw.GlyphStyle{Color: arrowColor, Radius: min(1.5*vg.Points(1), r/3), Shape: draw.CircleGlyph{}}, at)
		return
	}
	k := r * 0.7071
	c.StrokeLines(sty, []vg.Point{{X: at.X - k, Y: at.Y - k}, {X: at.X + k, Y: at.Y + k}})
	c.StrokeLines(sty, []vg.Point{{X: at.X - k, Y: at.Y + k}, {X: at.X + k, Y: at.Y - k}})
}
