package main

import (
	"encoding/xml"
	"image"
	"image/color"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"golang.org/x/image/font/sfnt"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

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
	// Two sites in a cell of 60 amu: per mole of atoms is half per mole of
	// cells, per kilogram is per mole of cells over 0.060 kg/mol.
	const sites, molarKg = 2, 0.060
	r := &modegridv1.ComputeThermalResponse{CellMassAmu: 60}
	for T := 0.0; T <= 1000; T += 20 {
		x := T / 300
		cv, s, f, u := 24.9*x*x/(1+x*x), 10*math.Log1p(x), 2-x, 2+x
		r.Points = append(r.Points, &modegridv1.ThermalPoint{
			TemperatureK: T, HeatCapacityJPerMolK: cv, EntropyJPerMolK: s, FreeEnergyKjPerMol: f, InternalEnergyKjPerMol: u,
			HeatCapacityJPerMolAtomsK: cv / sites, EntropyJPerMolAtomsK: s / sites,
			FreeEnergyKjPerMolAtoms: f / sites, InternalEnergyKjPerMolAtoms: u / sites,
			HeatCapacityJPerKgK: cv / molarKg, EntropyJPerKgK: s / molarKg, FreeEnergyKjPerKg: f / molarKg, InternalEnergyKjPerKg: u / molarKg,
		})
	}
	return r
}

// recordCanvas is a PNG canvas that keeps what text is drawn on it: the
// whole strings given to the text handler and the pieces that reach
// FillString with their font, so a test can check every glyph against the
// font that draws it.
type recordCanvas struct {
	*vgimg.Canvas
	texts  []string
	pieces []drawnPiece
}

type drawnPiece struct {
	face font.Face
	s    string
}

func (r *recordCanvas) DrewText(txt string, _ font.Font) { r.texts = append(r.texts, txt) }

func (r *recordCanvas) FillString(f font.Face, pt vg.Point, s string) {
	r.pieces = append(r.pieces, drawnPiece{f, s})
	r.Canvas.FillString(f, pt, s)
}

// missingGlyphs lists the characters of s that face has no glyph for.
func missingGlyphs(t *testing.T, face font.Face, s string) string {
	t.Helper()
	var buf sfnt.Buffer
	var miss []rune
	for _, r := range s {
		i, err := face.Face.GlyphIndex(&buf, r)
		if err != nil {
			t.Fatal(err)
		}
		if i == 0 && r != ' ' {
			miss = append(miss, r)
		}
	}
	return string(miss)
}

// checkPNGText renders f onto a recording PNG canvas and checks that every
// wanted string is drawn whole through the text handler and that every
// glyph that reaches the rasteriser exists in its font (so "cm⁻¹" cannot
// silently lose its minus).
func checkPNGText(t *testing.T, f figure, want []string) {
	t.Helper()
	rc := &recordCanvas{Canvas: vgimg.NewWith(vgimg.UseWH(f.size[0], f.size[1]), vgimg.UseDPI(plotDPI))}
	f.render(draw.New(rc))
	all := strings.Join(rc.texts, "\n")
	for _, w := range want {
		if !strings.Contains(all, w) {
			t.Errorf("PNG text lacks %q; has %q", w, all)
		}
	}
	for _, p := range rc.pieces {
		if m := missingGlyphs(t, p.face, p.s); m != "" {
			t.Errorf("PNG draws %q in %s, which has no glyph for %q", p.s, p.face.Name(), m)
		}
	}
}

// syntheticWeights gives the synthetic dispersion two sites: branch 0 on
// site 0 at Γ moving to site 1 at the zone boundary, branch 1 the reverse.
func syntheticWeights(r *modegridv1.ComputeDispersionResponse) *modegridv1.ComputeDispersionResponse {
	for _, s := range r.GetSamples() {
		x := 2 * s.GetQ().GetQ1() // 0 at Γ, 1 at the boundary
		s.SiteWeights = []float64{1 - x, x, x, 1 - x}
	}
	return r
}

// TestPlots draws each figure as PNG and SVG and checks the files: the PNG
// decodes with the figure's pixel size and visible ink, every glyph it
// draws exists in its font, and the axis labels with their units reach
// the text handler whole; the SVG parses with the figure's size in points,
// many paths, and the same labels as text.
//
// MODEGRID_TEST_PLOT_DIR=DIR keeps the figures in DIR for a look.
func TestPlots(t *testing.T) {
	dir := os.Getenv("MODEGRID_TEST_PLOT_DIR")
	if dir == "" {
		dir = t.TempDir()
	}
	cm1 := func(r *modegridv1.ComputeDispersionResponse) *modegridv1.ComputeDispersionResponse {
		r.Unit = modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1
		return r
	}
	dosCM1 := syntheticDOS(2)
	dosCM1.Unit = modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1
	key := newSiteKey([]string{"A", "B"})
	tests := []plotCase{
		{name: "dispersion by site with DOS panel", size: dispersionSize, png: true,
			build: func() (figure, error) {
				return dispersionFigure{disp: cm1(syntheticWeights(syntheticDispersion())), dos: dosCM1, key: key, title: "synthetic",
					measured: []plotPoint{{X: 0.5, Y: 4, Sigma: 0.3}}}.build()
			},
			wantText: []string{"Γ", "X|U", "frequency ν (cm⁻¹)", "DOS (1/cm⁻¹)", "synthetic", "wavevector along the path",
				"colour = share of the motion on each site:", "A", "B", "measured ± σ"}},
		{name: "dispersion alone", size: dispersionSize, branch: true,
			build:    func() (figure, error) { return dispersionFigure{disp: syntheticDispersion()}.build() },
			wantText: []string{"Γ", "X|U", "frequency ν (THz)"}},
		{name: "DOS per site overlaid", size: dosSize, png: true,
			build: func() (figure, error) {
				d := syntheticDOS(3)
				d.Unit = modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV
				return buildDOS(d, false, "three sites")
			},
			wantText: []string{"total", "A_0", "B", "A_2", "frequency ν (meV)", "DOS g(ν) (states per cell per meV)"}},
		{name: "DOS per site stacked", size: dosSize,
			build:    func() (figure, error) { return buildDOS(dosCM1, true, "") },
			wantText: []string{"total", "A", "B", "frequency ν (cm⁻¹)", "DOS g(ν) (states per cell per cm⁻¹)"}},
		{name: "thermal page", size: thermalSize, png: true, branch: true,
			build: func() (figure, error) {
				return thermalFigure{th: syntheticThermal(), basis: basisCells, sites: 2, pol: 3, title: "page",
					measured: []plotPoint{{X: 300, Y: 12, Sigma: 1}, {X: 600, Y: 20, Sigma: 1}}}.build()
			},
			wantText: []string{"Dulong–Petit 3R × 2 sites", "heat capacity Cv (J/(K·mol cells))", "entropy S (J/(K·mol cells))",
				"free energy F (kJ/mol cells)", "internal energy U (kJ/mol cells)", "temperature T (K)", "measured ± σ"}},
		{name: "thermal page per mole of atoms", size: thermalSize,
			build: func() (figure, error) {
				return thermalFigure{th: syntheticThermal(), basis: basisAtoms, sites: 2, pol: 3}.build()
			},
			wantText: []string{"Dulong–Petit 3R", "heat capacity Cv (J/(K·mol atoms))", "entropy S (J/(K·mol atoms))",
				"free energy F (kJ/mol atoms)", "internal energy U (kJ/mol atoms)"}},
		{name: "thermal page per kilogram", size: thermalSize,
			build: func() (figure, error) {
				return thermalFigure{th: syntheticThermal(), basis: basisKg, sites: 2, pol: 3}.build()
			},
			wantText: []string{"Dulong–Petit 3·2·kB / cell mass", "heat capacity Cv (J/(kg·K))", "entropy S (J/(kg·K))",
				"free energy F (kJ/kg)", "internal energy U (kJ/kg)"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) { checkPlotCase(t, dir, tc) })
	}
}

// plotCase is one figure of TestPlots and what it must show.
type plotCase struct {
	name     string
	size     [2]vg.Length
	build    func() (figure, error)
	png      bool // also as PNG (rasterising is slow under -race: once per figure kind)
	wantText []string
	branch   bool    // the PNG shows branchColor
	inkMax   float64 // most non-white pixels in the PNG (0: 60 %; a colour map fills its frame)
}

// checkPlotCase builds tc's figure, checks its text, writes it into dir
// as SVG (and PNG when tc.png) and checks each file's size and contents.
func checkPlotCase(t *testing.T, dir string, tc plotCase) {
	t.Helper()
	base := filepath.Join(dir, strings.ReplaceAll(tc.name, " ", "-"))
	f, err := tc.build()
	if err != nil {
		t.Fatal(err)
	}
	checkPNGText(t, f, tc.wantText)
	if tc.png {
		if err := f.write(base+".png", "png"); err != nil {
			t.Fatal(err)
		}
		w, h, ink, branch := pngStats(t, base+".png")
		if w != pixels(tc.size[0]) || h != pixels(tc.size[1]) {
			t.Errorf("PNG is %d×%d px; want %d×%d", w, h, pixels(tc.size[0]), pixels(tc.size[1]))
		}
		inkMax := tc.inkMax
		if inkMax == 0 {
			inkMax = 0.6
		}
		if ink < 0.01 || ink > inkMax {
			t.Errorf("PNG has %.1f%% non-white pixels; want between 1%% and %.0f%%", 100*ink, 100*inkMax)
		}
		if tc.branch && !branch {
			t.Error("PNG shows no curve in the branch colour")
		}
	}
	if err := f.write(base+".svg", "svg"); err != nil {
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
}

// TestSuperscriptsRaised: the PNG text handler draws "cm⁻¹" as "cm" and a
// smaller, raised "−1" (U+2212, which the font has); the superscript minus
// itself never reaches the rasteriser.
func TestSuperscriptsRaised(t *testing.T) {
	runs := splitSuperscripts("ν (cm⁻¹)")
	if len(runs) != 3 || runs[0] != (textRun{"ν (cm", false}) || runs[1] != (textRun{"−1", true}) || runs[2] != (textRun{")", false}) {
		t.Fatalf("runs %+v; want [ν (cm] [−1 raised] [)]", runs)
	}
	f := dispersionFigure{disp: func() *modegridv1.ComputeDispersionResponse {
		r := syntheticDispersion()
		r.Unit = modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1
		return r
	}()}
	fig, err := f.build()
	if err != nil {
		t.Fatal(err)
	}
	rc := &recordCanvas{Canvas: vgimg.NewWith(vgimg.UseWH(fig.size[0], fig.size[1]), vgimg.UseDPI(plotDPI))}
	fig.render(draw.New(rc))
	var sup *drawnPiece
	for i, p := range rc.pieces {
		if strings.ContainsRune(p.s, '⁻') {
			t.Errorf("%q reached the rasteriser", p.s)
		}
		if p.s == "−1" {
			sup = &rc.pieces[i]
		}
	}
	if sup == nil {
		t.Fatal("no raised −1 drawn")
	}
	if want := 11 * supScale; math.Abs(sup.face.Font.Size.Points()-want) > 1e-9 {
		t.Errorf("superscript at %v pt; want %v (11 pt label × %v)", sup.face.Font.Size.Points(), want, supScale)
	}
}

// TestSiteColours: a branch wholly on one site has that site's colour; an
// even share mixes the two; no shares give the plain branch colour.
func TestSiteColours(t *testing.T) {
	k := newSiteKey([]string{"A", "B"})
	near := func(a, b color.Color) bool {
		ar, ag, ab, _ := a.RGBA()
		br, bg, bb, _ := b.RGBA()
		d := func(x, y uint32) bool { return math.Abs(float64(x>>8)-float64(y>>8)) <= 8 }
		return d(ar, br) && d(ag, bg) && d(ab, bb)
	}
	if c := k.mix([]float64{1, 0}, branchColor); !near(c, siteColors[0]) {
		t.Errorf("all on A: %v; want %v", c, siteColors[0])
	}
	if c := k.mix([]float64{0, 1}, branchColor); !near(c, siteColors[1]) {
		t.Errorf("all on B: %v; want %v", c, siteColors[1])
	}
	r0, g0, b0, _ := siteColors[0].RGBA()
	r1, g1, b1, _ := siteColors[1].RGBA()
	half := color.RGBA{R: uint8((r0 + r1) / 2 >> 8), G: uint8((g0 + g1) / 2 >> 8), B: uint8((b0 + b1) / 2 >> 8), A: 0xff}
	if c := k.mix([]float64{0.5, 0.5}, branchColor); !near(c, half) {
		t.Errorf("half and half: %v; want %v", c, half)
	}
	if c := k.mix(nil, branchColor); c != branchColor {
		t.Errorf("no shares: %v; want the branch colour", c)
	}
	many := newSiteKey([]string{"A", "B", "A", "C", "D", "E", "F", "G", "H"})
	if len(many.names) != len(siteColors) || many.names[len(many.names)-1] != "other" || many.group[2] != many.group[0] {
		t.Errorf("9 sites, 8 labels: groups %v %v; want one per label, the last ones as \"other\"", many.names, many.group)
	}
}

// TestPlotErrors: empty results are refused, not drawn blank.
func TestPlotErrors(t *testing.T) {
	f := filepath.Join(t.TempDir(), "x.png")
	if err := plotDispersion(f, "png", dispersionFigure{disp: &modegridv1.ComputeDispersionResponse{}}); err == nil {
		t.Error("empty dispersion drawn")
	}
	if err := plotDOS(f, "png", &modegridv1.ComputeDosResponse{}, false, ""); err == nil {
		t.Error("empty DOS drawn")
	}
	if err := plotThermal(f, "png", thermalFigure{th: &modegridv1.ComputeThermalResponse{}, basis: basisAtoms, sites: 1, pol: 3}); err == nil {
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

// pngHasColor says whether any pixel of a PNG has exactly colour c.
func pngHasColor(t *testing.T, file string, c color.Color) bool {
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
	rgba, ok := img.(*image.RGBA)
	if !ok {
		t.Fatalf("%s: %T; want RGBA", file, img)
	}
	r, g, b, _ := c.RGBA()
	for i := 0; i+3 < len(rgba.Pix); i += 4 {
		if uint32(rgba.Pix[i]) == r>>8 && uint32(rgba.Pix[i+1]) == g>>8 && uint32(rgba.Pix[i+2]) == b>>8 {
			return true
		}
	}
	return false
}
