package main

// The infrared figure: ε′ and ε″ above, the reflectivity R below, against
// frequency on a shared axis, with the active TO modes (dashed) and the
// frequencies along the direction of the LO modes (dotted) marked.

import (
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// infraredSize is the size of the infrared figure.
var infraredSize = [2]vg.Length{16 * vg.Centimeter, 14 * vg.Centimeter}

// plotInfrared draws r into file as kind.
func plotInfrared(file, kind string, r *modegridv1.ComputeInfraredResponse, title string) error {
	f, err := buildInfrared(r, title)
	if err != nil {
		return err
	}
	return f.write(file, kind)
}

// buildInfrared is the figure of plotInfrared.
func buildInfrared(r *modegridv1.ComputeInfraredResponse, title string) (figure, error) {
	smp := r.GetSamples()
	if len(smp) < 2 {
		return figure{}, fmt.Errorf("plot: the infrared response has fewer than 2 samples")
	}
	nu, re, im, refl := make([]float64, len(smp)), make([]float64, len(smp)), make([]float64, len(smp)), make([]float64, len(smp))
	for i, s := range smp {
		nu[i], re[i], im[i], refl[i] = s.GetFrequency(), s.GetEpsilonReal(), s.GetEpsilonImag(), s.GetReflectivity()
	}
	ul := unitLabel(r.GetUnit())
	eps := newPlot()
	eps.Y.Label.Text = "dielectric function ε along ê"
	eps.X.Min, eps.X.Max = nu[0], nu[len(nu)-1]
	lo, hi := epsRange(re, im)
	eps.Y.Min, eps.Y.Max = lo, hi
	eps.X.Tick.Marker = blankLabels{plot.DefaultTicks{}}
	zero := line([]float64{nu[0], nu[len(nu)-1]}, []float64{0, 0}, zeroColor, 0.6*vg.Points(1))
	eps.Add(zero)
	lre := line(nu, clip(re, lo, hi), siteColors[0], 1.4*vg.Points(1))
	lim := line(nu, clip(im, lo, hi), siteColors[1], 1.4*vg.Points(1))
	eps.Add(lre, lim)
	eps.Legend.Add("ε′", lre)
	eps.Legend.Add("ε″", lim)
	eps.Legend.Top = true

	rp := newPlot()
	rp.X.Label.Text = fmt.Sprintf("frequency ν (%s)", ul)
	rp.Y.Label.Text = "reflectivity R"
	rp.X.Min, rp.X.Max = eps.X.Min, eps.X.Max
	rp.Y.Min, rp.Y.Max = 0, 1.05
	rl := line(nu, refl, branchColor, 1.5*vg.Points(1))
	rp.Add(rl)
	for _, p := range []*plot.Plot{eps, rp} {
		markModes(p, r, nu[0], nu[len(nu)-1])
	}
	grid := [][]*plot.Plot{{eps}, {rp}}
	return figure{size: infraredSize, render: func(dc draw.Canvas) {
		if title != "" {
			dc = drawTitle(dc, title)
		}
		tiles := draw.Tiles{Rows: 2, Cols: 1, PadY: 3 * vg.Millimeter,
			PadTop: 2 * vg.Millimeter, PadBottom: 2 * vg.Millimeter, PadLeft: 2 * vg.Millimeter, PadRight: 4 * vg.Millimeter}
		canvases := plot.Align(grid, tiles, dc)
		eps.Draw(canvases[0][0])
		rp.Draw(canvases[1][0])
	}}, nil
}

// markModes draws a vertical line at every active TO frequency (dashed)
// and at every frequency along the direction that is no TO frequency
// (dotted: the LO modes) within [lo, hi].
func markModes(p *plot.Plot, r *modegridv1.ComputeInfraredResponse, lo, hi float64) {
	ymin, ymax := p.Y.Min, p.Y.Max
	mark := func(x float64, dashes []vg.Length) {
		if x <= lo || x >= hi {
			return
		}
		l := line([]float64{x, x}, []float64{ymin, ymax}, zeroColor, 0.7*vg.Points(1))
		l.Dashes = dashes
		p.Add(l)
	}
	var to []float64
	for _, m := range r.GetModes() {
		to = append(to, m.GetFrequency())
		if m.GetActive() {
			mark(m.GetFrequency(), []vg.Length{4 * vg.Points(1), 2 * vg.Points(1)})
		}
	}
	for _, f := range r.GetLoFrequencies() {
		near := false
		for _, t := range to {
			if math.Abs(f-t) <= 1e-6*math.Max(1, math.Abs(t)) {
				near = true
			}
		}
		if !near {
			mark(f, []vg.Length{1 * vg.Points(1), 2 * vg.Points(1)})
		}
	}
}

// epsRange is the vertical range of the ε panel: every value of ε′ and
// ε″ but the spikes of a weakly damped pole, which would flatten the rest:
// the range stops at 4 times the 90th percentile of |ε′| and of ε″
// (curves are clipped at the frame), and spans at least [−1, 1].
func epsRange(re, im []float64) (lo, hi float64) {
	lo, hi = math.Min(0, minOf(re)), math.Max(maxOf(re), maxOf(im))
	scale := math.Max(1, 4*math.Max(percentileAbs(re, 0.9), percentileAbs(im, 0.9)))
	lo, hi = math.Max(lo, -scale), math.Min(hi, scale)
	if hi-lo < 2 {
		lo, hi = math.Min(lo, -1), math.Max(hi, 1)
	}
	pad := 0.06 * (hi - lo)
	return lo - pad, hi + pad
}

// clip limits v to [lo, hi], so a pole's spike ends at the frame.
func clip(v []float64, lo, hi float64) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = math.Max(lo, math.Min(hi, x))
	}
	return out
}

// percentileAbs is the q-quantile of |v| (nearest rank).
func percentileAbs(v []float64, q float64) float64 {
	a := make([]float64, len(v))
	for i, x := range v {
		a[i] = math.Abs(x)
	}
	sort.Float64s(a)
	return a[min(len(a)-1, int(q*float64(len(a))))]
}

func minOf(v []float64) float64 {
	m := math.Inf(1)
	for _, x := range v {
		m = math.Min(m, x)
	}
	return m
}
