package main

import (
	"encoding/xml"
	"image"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/plot/vg"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// pngStats decodes a PNG and returns its size, the fraction of pixels that
// are not white, and whether any pixel has the branch colour.
func pngStats(t *testing.T, file string) (w, h int, inked float64, branch bool) {
	t.Helper()
	f, err := os.Open(file)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("%s does not decode as PNG: %v", file, err)
	}
	b := img.Bounds()
	n := 0
	br, bg, bb, _ := branchColor.RGBA()
	check := func(r, g, bl uint32) {
		if r < 0xf000 || g < 0xf000 || bl < 0xf000 {
			n++
		}
		if r == br && g == bg && bl == bb {
			branch = true
		}
	}
	if rgba, ok := img.(*image.RGBA); ok { // what vgimg writes; read the bytes directly (fast under -race)
		for i := 0; i+3 < len(rgba.Pix); i += 4 {
			check(uint32(rgba.Pix[i])*0x101, uint32(rgba.Pix[i+1])*0x101, uint32(rgba.Pix[i+2])*0x101)
		}
	} else {
		for y := b.Min.Y; y < b.Max.Y; y++ {
			for x := b.Min.X; x < b.Max.X; x++ {
				r, g, bl, _ := img.At(x, y).RGBA()
				check(r, g, bl)
			}
		}
	}
	return b.Dx(), b.Dy(), float64(n) / float64(b.Dx()*b.Dy()), branch
}

// pixels is the PNG size of a figure dimension at plotDPI (vgimg rounds to
// the nearest pixel).
func pixels(l vg.Length) int { return int(float64(l/vg.Inch)*plotDPI + 0.5) }

// svgStats parses an SVG and returns its width and height in points, the
// number of drawn paths and the text it shows.
func svgStats(t *testing.T, file string) (w, h float64, paths int, text string) {
	t.Helper()
	f, err := os.Open(file)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	d := xml.NewDecoder(f)
	var sb strings.Builder
	inText := false
	for {
		tok, err := d.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("%s does not parse as XML: %v", file, err)
		}
		switch e := tok.(type) {
		case xml.StartElement:
			switch e.Name.Local {
			case "svg":
				for _, a := range e.Attr {
					v, _ := strconv.ParseFloat(strings.TrimSuffix(a.Value, "pt"), 64)
					switch a.Name.Local {
					case "width":
						w = v
					case "height":
						h = v
					}
				}
			case "path":
				paths++
			case "text":
				inText = true
			}
		case xml.EndElement:
			if e.Name.Local == "text" {
				inText = false
				sb.WriteString(" ")
			}
		case xml.CharData:
			if inText {
				sb.Write(e)
			}
		}
	}
	if w == 0 {
		t.Fatalf("%s has no <svg width>", file)
	}
	return w, h, paths, sb.String()
}

// syntheticDispersion is a two-branch dispersion G–X|U–G with a break,
// drawn from closed forms (it is input data for the drawing code only).
func syntheticDispersion() *modegridv1.ComputeDispersionResponse {
	r := &modegridv1.ComputeDispersionResponse{Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_THZ}
	add := func(d float64, label string, q float64) {
		r.Samples = append(r.Samples, &modegridv1.DispersionSample{
			DistanceInvA: d, Label: label, Q: &modegridv1.QPoint{Q1: q},
			Frequencies: []float64{5 * math.Abs(math.Sin(math.Pi*q)), 8 - 2*math.Abs(math.Sin(math.Pi*q))},
		})
	}
	for i := 0; i <= 20; i++ {
		l := ""
		switch i {
		case 0:
			l = "G"
		case 20:
			l = "X"
		}
		add(float64(i)/20, l, float64(i)/40)
	}
	for i := 0; i <= 10; i++ {
		l := ""
		switch i {
		case 0:
			l = "U"
		case 10:
			l = "G"
		}
		add(1+float64(i)/20, l, 0.5-float64(i)/20)
	}
	return r
}

func syntheticDOS(sites int) *modegridv1.ComputeDosResponse {
	r := &modegridv1.ComputeDosResponse{Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_THZ}
	for i := range sites {
		r.Sites = append(r.Sites, &modegridv1.ProjectedDos{Site: int32(i), Label: string(rune('A' + i%2))})
	}
	for k := 0; k <= 200; k++ {
		f := 8 * float64(k) / 200
		g := f * f / 64
		r.Frequencies = append(r.Frequencies, f)
		r.Dos = append(r.Dos, g)
		r.Integrated = append(r.Integrated, g*f/3)
		for i, s := range r.Sites {
			s.Dos = append(s.Dos, g*float64(i+1)/float64(sites*(sites+1)/2))
		}
	}
	return r
}

func syntheticThermal() *modegridv1.ComputeThermalResponse {
	r := &modegridv1.ComputeThermalResponse{}
	for T := 0.0; T <= 1000; T += 20 {
		x := T / 300
		r.Points = append(r.Points, &modegridv1.ThermalPoint{
			TemperatureK: T, HeatCapacityJPerMolK: 24.9 * x * x / (1 + x*x), EntropyJPerMolK: 10 * math.Log1p(x),
			FreeEnergyKjPerMol: 2 - x, InternalEnergyKjPerMol: 2 + x,
		})
	}
	return r
}

// TestPlots draws each figure as PNG and SVG and checks the files: the PNG
// decodes with the figure's pixel size and visible ink in the branch
// colour, the SVG parses with the figure's size in points, many paths, and
// the axis labels and tick labels as text.
//
// MODEGRID_TEST_PLOT_DIR=DIR keeps the figures in DIR for a look.
func TestPlots(t *testing.T) {
	dir := os.Getenv("MODEGRID_TEST_PLOT_DIR")
	if dir == "" {
		dir = t.TempDir()
	}
	tests := []struct {
		name     string
		size     [2]vg.Length
		draw     func(file, kind string) error
		png      bool // also as PNG (rasterising is slow under -race: once per figure kind)
		wantText []string
	}{
		{name: "dispersion with DOS panel", size: dispersionSize, png: true,
			draw: func(f, k string) error {
				return plotDispersion(f, k, syntheticDispersion(), syntheticDOS(1), "synthetic")
			},
			wantText: []string{"Γ", "X|U", "frequency ν (THz)", "DOS (1/THz)", "synthetic"}},
		{name: "dispersion alone", size: dispersionSize,
			draw:     func(f, k string) error { return plotDispersion(f, k, syntheticDispersion(), nil, "") },
			wantText: []string{"Γ", "X|U"}},
		{name: "DOS per site overlaid", size: dosSize, png: true,
			draw:     func(f, k string) error { return plotDOS(f, k, syntheticDOS(3), false, "three sites") },
			wantText: []string{"total", "A_0", "B", "A_2", "DOS g(ν)"}},
		{name: "DOS per site stacked", size: dosSize,
			draw:     func(f, k string) error { return plotDOS(f, k, syntheticDOS(2), true, "") },
			wantText: []string{"total", "A", "B"}},
		{name: "thermal page", size: thermalSize, png: true,
			draw: func(f, k string) error { return plotThermal(f, k, syntheticThermal(), basisCells, 2, 3, "page") },
			wantText: []string{"Dulong–Petit 3R × 2 sites", "heat capacity Cv", "entropy S", "free energy F",
				"internal energy U", "temperature T (K)"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			base := filepath.Join(dir, strings.ReplaceAll(tc.name, " ", "-"))
			if tc.png {
				if err := tc.draw(base+".png", "png"); err != nil {
					t.Fatal(err)
				}
				w, h, ink, branch := pngStats(t, base+".png")
				if w != pixels(tc.size[0]) || h != pixels(tc.size[1]) {
					t.Errorf("PNG is %d×%d px; want %d×%d", w, h, pixels(tc.size[0]), pixels(tc.size[1]))
				}
				if ink < 0.01 || ink > 0.6 {
					t.Errorf("PNG has %.1f%% non-white pixels; want between 1%% and 60%%", 100*ink)
				}
				if strings.HasPrefix(tc.name, "dispersion") || tc.name == "thermal page" {
					if !branch {
						t.Error("PNG shows no curve in the branch colour")
					}
				}
			}
			if err := tc.draw(base+".svg", "svg"); err != nil {
				t.Fatal(err)
			}
			sw, sh, paths, text := svgStats(t, base+".svg")
			if math.Abs(sw-tc.size[0].Points()) > 0.5 || math.Abs(sh-tc.size[1].Points()) > 0.5 {
				t.Errorf("SVG is %.1f×%.1f pt; want %.1f×%.1f", sw, sh, tc.size[0].Points(), tc.size[1].Points())
			}
			if paths < 10 {
				t.Errorf("SVG has %d paths; want ≥ 10", paths)
			}
			for _, s := range tc.wantText {
				if !strings.Contains(text, s) {
					t.Errorf("SVG text lacks %q; has %q", s, text)
				}
			}
		})
	}
}

// TestPlotErrors: empty results are refused, not drawn blank.
func TestPlotErrors(t *testing.T) {
	f := filepath.Join(t.TempDir(), "x.png")
	if err := plotDispersion(f, "png", &modegridv1.ComputeDispersionResponse{}, nil, ""); err == nil {
		t.Error("empty dispersion drawn")
	}
	if err := plotDOS(f, "png", &modegridv1.ComputeDosResponse{}, false, ""); err == nil {
		t.Error("empty DOS drawn")
	}
	if err := plotThermal(f, "png", &modegridv1.ComputeThermalResponse{}, basisAtoms, 1, 3, ""); err == nil {
		t.Error("empty thermal drawn")
	}
}

// TestCornerTicks: corners at one distance (a break) share one tick.
func TestCornerTicks(t *testing.T) {
	ticks := cornerTicks(syntheticDispersion().GetSamples())
	var labels []string
	for _, tk := range ticks {
		labels = append(labels, tk.Label)
	}
	if got := strings.Join(labels, " "); got != "Γ X|U Γ" {
		t.Errorf("ticks %q; want \"Γ X|U Γ\"", got)
	}
	if n := len(pathPieces(syntheticDispersion().GetSamples())); n != 2 {
		t.Errorf("%d pieces; want 2", n)
	}
}
