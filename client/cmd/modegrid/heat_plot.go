package main

// Figures of the heat subcommands, in the house style of plot.go: the
// quasi-harmonic expansion and Cp (with measured points), κ(T) of every
// sample on one figure, and the cumulative κ curves.

import (
	"fmt"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// Heat figure sizes.
var (
	qhaSize   = [2]vg.Length{18 * vg.Centimeter, 8.5 * vg.Centimeter}
	kappaSize = [2]vg.Length{15 * vg.Centimeter, 10 * vg.Centimeter}
)

// sideBySide draws plots in one row under an optional title.
func sideBySide(size [2]vg.Length, title string, plots ...*plot.Plot) figure {
	return figure{size: size, render: func(dc draw.Canvas) {
		if title != "" {
			dc = drawTitle(dc, title)
		}
		tiles := draw.Tiles{Rows: 1, Cols: len(plots), PadX: 8 * vg.Millimeter, PadTop: 2 * vg.Millimeter,
			PadBottom: 2 * vg.Millimeter, PadLeft: 2 * vg.Millimeter, PadRight: 4 * vg.Millimeter}
		grid := [][]*plot.Plot{plots}
		cs := plot.Align(grid, tiles, dc)
		for j, p := range plots {
			p.Draw(cs[0][j])
		}
	}}
}

// qhaFigure is the quasi-harmonic figure: linear expansion α_L(T) and
// Cp(T) beside Cv(T), with measured points.
type qhaFigure struct {
	r        *modegridv1.ComputeQuasiHarmonicResponse
	perCell  bool
	measured []qhaMeasured
	title    string
}

func (q qhaFigure) write(file, kind string) error {
	f, err := q.build()
	if err != nil {
		return err
	}
	return f.write(file, kind)
}

func (q qhaFigure) build() (figure, error) {
	var T, alpha, cv, cp []float64
	for _, p := range q.r.GetPoints() {
		if !p.GetFound() {
			continue
		}
		v, c := qhaCapacities(p, q.perCell)
		T, alpha, cv, cp = append(T, p.GetTemperatureK()), append(alpha, p.GetLinearExpansionPerK()*1e6), append(cv, v), append(cp, c)
	}
	if len(T) == 0 {
		return figure{}, fmt.Errorf("plot: no temperature with a minimum of G")
	}
	unit := "J/(mol-atoms·K)"
	if q.perCell {
		unit = "J/(mol·K)"
	}
	pa := newPlot()
	pa.X.Label.Text, pa.Y.Label.Text = "temperature T (K)", "linear expansion αL (10⁻⁶/K)"
	pa.Add(line(T, alpha, branchColor, 1.5*vg.Points(1)))
	pc := newPlot()
	pc.X.Label.Text, pc.Y.Label.Text = "temperature T (K)", "heat capacity ("+unit+")"
	lp, lv := line(T, cp, branchColor, 1.5*vg.Points(1)), line(T, cv, siteColors[1], 1.2*vg.Points(1))
	lv.Dashes = []vg.Length{5 * vg.Points(1), 3 * vg.Points(1)}
	pc.Add(lp, lv)
	pc.Legend.Add("Cp", lp)
	pc.Legend.Add("Cv", lv)
	pc.Legend.Left, pc.Legend.Top = false, false
	atoms := float64(max(1, q.r.GetAtomsPerCell()))
	for _, m := range q.measured {
		pts := plotPoints(m.rows)
		switch {
		case m.kind == "alpha":
			for i := range pts {
				pts[i].Y, pts[i].Sigma = pts[i].Y*1e6, pts[i].Sigma*1e6
			}
			addMeasured(pa, pts)
		default:
			for i := range pts {
				switch {
				case m.perCell && !q.perCell:
					pts[i].Y, pts[i].Sigma = pts[i].Y/atoms, pts[i].Sigma/atoms
				case !m.perCell && q.perCell:
					pts[i].Y, pts[i].Sigma = pts[i].Y*atoms, pts[i].Sigma*atoms
				}
			}
			addMeasured(pc, pts)
		}
	}
	pa.Y.Min, pc.Y.Min = math.Min(0, pa.Y.Min), 0
	return sideBySide(qhaSize, q.title, pa, pc), nil
}

// kappaFigure is κ(T) (trace/3) of every sample on log–log axes.
type kappaFigure struct {
	r     *modegridv1.ComputeConductivityResponse
	title string
}

func (k kappaFigure) write(file, kind string) error {
	f, err := k.build()
	if err != nil {
		return err
	}
	return f.write(file, kind)
}

func (k kappaFigure) build() (figure, error) {
	p := newPlot()
	p.X.Label.Text, p.Y.Label.Text = "temperature T (K)", "thermal conductivity κ, trace/3 (W/(m·K))"
	p.X.Scale, p.Y.Scale = plot.LogScale{}, plot.LogScale{}
	p.X.Tick.Marker, p.Y.Tick.Marker = plot.LogTicks{Prec: -1}, plot.LogTicks{Prec: -1}
	drawn := 0
	for i, s := range k.r.GetSeries() {
		var T, kappa []float64
		for _, pt := range s.GetPoints() {
			if pt.GetTemperatureK() > 0 && pt.GetKappaMeanWPerMK() > 0 {
				T, kappa = append(T, pt.GetTemperatureK()), append(kappa, pt.GetKappaMeanWPerMK())
			}
		}
		if len(T) == 0 {
			continue
		}
		l := line(T, kappa, siteColors[i%len(siteColors)], 1.5*vg.Points(1))
		p.Add(l)
		p.Legend.Add(sampleName(s.GetSample()), l)
		drawn++
	}
	if drawn == 0 {
		return figure{}, fmt.Errorf("plot: no positive κ at a positive temperature")
	}
	p.Legend.Left, p.Legend.Top = false, true
	if k.title != "" {
		p.Title.Text = k.title
	}
	return figure{size: kappaSize, render: func(dc draw.Canvas) { p.Draw(dc) }}, nil
}

// cumulativeFigure is the cumulative κ of every sample against mean free
// path (log axis) and against frequency.
type cumulativeFigure struct {
	r     *modegridv1.ComputeConductivityResponse
	title string
}

func (c cumulativeFigure) write(file, kind string) error {
	f, err := c.build()
	if err != nil {
		return err
	}
	return f.write(file, kind)
}

func (c cumulativeFigure) build() (figure, error) {
	pm, pf := newPlot(), newPlot()
	pm.X.Label.Text, pm.Y.Label.Text = "mean free path Λ (m)", "cumulative κ (W/(m·K))"
	pm.X.Scale, pm.X.Tick.Marker = plot.LogScale{}, plot.LogTicks{Prec: -1}
	pf.X.Label.Text, pf.Y.Label.Text = "frequency ν (THz)", "cumulative κ (W/(m·K))"
	drawn := 0
	for i, s := range c.r.GetSeries() {
		cu := s.GetCumulative()
		var mfp, km []float64
		for j, x := range cu.GetMeanFreePathM() {
			if x > 0 {
				mfp, km = append(mfp, x), append(km, cu.GetKappaByMeanFreePath()[j])
			}
		}
		if len(mfp) == 0 {
			continue
		}
		col := siteColors[i%len(siteColors)]
		lm := line(mfp, km, col, 1.5*vg.Points(1))
		pm.Add(lm)
		pm.Legend.Add(sampleName(s.GetSample()), lm)
		pf.Add(line(cu.GetFrequencyThz(), cu.GetKappaByFrequency(), col, 1.5*vg.Points(1)))
		drawn++
	}
	if drawn == 0 {
		return figure{}, fmt.Errorf("plot: no cumulative curve (no mode carries heat at that temperature)")
	}
	pm.Legend.Left, pm.Legend.Top = true, true
	pm.Y.Min, pf.Y.Min, pf.X.Min = 0, 0, 0
	title := c.title
	if t := c.r.GetSeries()[0].GetCumulative().GetTemperatureK(); t > 0 {
		title = fmt.Sprintf("%s at %g K", title, t)
	}
	return sideBySide(qhaSize, title, pm, pf), nil
}
