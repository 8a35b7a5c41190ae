package main

import (
	"math"
	"os"
	"strings"
	"testing"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// rsLengths are invented lengths for the rock-salt-like example's invented
// species P and Q (the built-in table knows neither by mass).
var rsLengths = []string{"--b", "P=3;Q=6", "--sigma-inc", "Q=2"}

func args(parts ...[]string) []string {
	var out []string
	for _, p := range parts {
		out = append(out, p...)
	}
	return out
}

// TestScatterExitCodes: command-line mistakes of the scattering commands
// are usage errors naming the flag; a request the server refuses is exit
// 3 with its field.
func TestScatterExitCodes(t *testing.T) {
	rs := []string{"-m", example("rocksalt-like")}
	tests := []struct {
		name       string
		args       []string
		want       int
		wantStderr string
	}{
		{"no target", args([]string{"scatter"}, rs, rsLengths), exitUsage, "give one of --path, --q and --slice"},
		{"two targets", args([]string{"scatter", "--q", "1,0,0", "--path", "A=0,0,0 B=1,0,0"}, rs, rsLengths), exitUsage, "give one of"},
		{"plot needs a path", args([]string{"scatter", "--q", "1,0,0", "--plot", "x.svg"}, rs, rsLengths), exitUsage, "--plot draws a path of Q"},
		{"built-in label on a Q path", args([]string{"scatter", "--path", "G-X"}, rs, rsLengths), exitUsage, "needs its Q"},
		{"slice without ranges", args([]string{"scatter", "--slice", "0,0,0;1,0,0;0,1,0"}, rs, rsLengths), exitUsage, "--slice needs --u and --v"},
		{"bad frame", args([]string{"scatter", "--q", "1,0,0", "--frame", "polar"}, rs, rsLengths), exitUsage, "--frame must be"},
		{"bad probe", args([]string{"scatter", "--q", "1,0,0", "--probe", "light"}, rs, rsLengths), exitUsage, "--probe must be"},
		{"incoherent without length", args([]string{"scatter", "--q", "1,0,0", "--sigma-inc", "Q=2"}, rs), exitUsage, "--sigma-inc: Q has no coherent length"},
		{"form factor of even count", args([]string{"scatter", "--q", "1,0,0", "--probe", "xray", "--xray-f", "P=1,2;Q=3"}, rs), exitUsage, "an odd count"},
		{"negative temperature", args([]string{"powder", "--temp", "-1"}, rs, rsLengths), exitUsage, "--temp must be ≥ 0 K"},
		{"lengths missing", args([]string{"scatter", "--q", "1,0,0"}, rs), exitInvalid, "scatterers"},
		{"Debye–Waller of a chain", []string{"scatter", "-m", example("chain"), "--b", "A=5", "--q", "0.3"}, exitInvalid, "debye_waller.off"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			code, _, stderr := runCLI(t, tc.args...)
			if code != tc.want || !strings.Contains(stderr, tc.wantStderr) || !strings.HasPrefix(stderr, "modegrid:") {
				t.Errorf("exit %d, stderr %q; want exit %d and %q", code, stderr, tc.want, tc.wantStderr)
			}
		})
	}
}

// TestScatterRoundTrip: the CSV map of a path integrates, Q by Q, to the
// lines the same request lists (Σ S·ΔE over a window holding every line
// and its tails is the sum of the line weights, doc.go of physics/scatter),
// so the two outputs describe one calculation.
func TestScatterRoundTrip(t *testing.T) {
	base := args([]string{"scatter", "-m", example("fcc"), "--b", "M=5", "--path", "A=0.1,0.2,0.3 B=1.1,0.2,0.3", "--points", "4",
		"--temp", "150", "--no-debye-waller", "--emin", "-40", "--emax", "40", "--estep", "0.05", "--fwhm", "0.5", "--format", "csv"})
	code, mapCSV, stderr := runCLI(t, base...)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	code, linesCSV, stderr := runCLI(t, append(base, "--lines")...)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	sum := map[string]float64{}
	for i, l := range strings.Split(strings.TrimSpace(mapCSV), "\n") {
		if i == 0 {
			continue
		}
		f := strings.Split(l, ",")
		sum[f[0]] += parseF(t, f[len(f)-1]) * 0.05
	}
	want := map[string]float64{}
	for i, l := range strings.Split(strings.TrimSpace(linesCSV), "\n") {
		if i == 0 {
			continue
		}
		f := strings.Split(l, ",")
		want[f[0]] += parseF(t, f[len(f)-2]) + parseF(t, f[len(f)-1])
	}
	if len(sum) != 4 || len(want) != 4 {
		t.Fatalf("%d map points, %d line points; want 4", len(sum), len(want))
	}
	for d, w := range want {
		if math.Abs(sum[d]/w-1) > 1e-6 {
			t.Errorf("distance %s: Σ S ΔE = %.9g, lines sum to %.9g", d, sum[d], w)
		}
	}
}

func parseF(t *testing.T, s string) float64 {
	t.Helper()
	x, err := parseFinite(s)
	if err != nil {
		t.Fatal(err)
	}
	return x
}

// syntheticScatterPath is a two-mode path map from closed forms (input
// data for the drawing code only): a sine branch and a flat one, each a
// Gaussian line, with a break at the second corner.
func syntheticScatterPath(probe modegridv1.Probe) *modegridv1.ComputeScatteringResponse {
	r := &modegridv1.ComputeScatteringResponse{Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV, IntensityUnit: "barn/(sr·meV) per cell"}
	if probe == modegridv1.Probe_PROBE_XRAY {
		r.IntensityUnit = "electrons²/meV per cell"
	}
	for k := 0; k <= 60; k++ {
		r.Energies = append(r.Energies, -10+0.5*float64(k))
	}
	add := func(d float64, label string, x float64) {
		e := []float64{15 * math.Abs(math.Sin(math.Pi*x)), 18}
		p := &modegridv1.ScatteringPoint{DistanceInvA: d, Label: label, ModeEnergies: e}
		for _, en := range r.Energies {
			s := 0.0
			for _, m := range e {
				s += math.Exp(-(en-m)*(en-m)/2) / (1 + m)
			}
			p.S = append(p.S, s)
		}
		r.Points = append(r.Points, p)
	}
	for i := 0; i <= 30; i++ {
		l := map[int]string{0: "200", 30: "300"}[i]
		add(float64(i)/30, l, float64(i)/30)
	}
	for i := 0; i <= 20; i++ {
		l := map[int]string{0: "311", 20: "222"}[i]
		add(1+float64(i)/20, l, float64(i)/20)
	}
	return r
}

func syntheticPowder() *modegridv1.ComputeScatteringResponse {
	r := &modegridv1.ComputeScatteringResponse{Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV, IntensityUnit: "barn/(sr·meV) per cell", PowderIncoherent: true}
	for k := 0; k <= 40; k++ {
		r.Energies = append(r.Energies, 0.5*float64(k))
	}
	for i := 0; i < 25; i++ {
		q := 0.5 + 0.3*float64(i)
		row := &modegridv1.PowderRow{QInvA: q}
		for _, en := range r.Energies {
			row.S = append(row.S, q*q*math.Exp(-0.02*q*q)*math.Exp(-(en-12)*(en-12)/8))
		}
		r.Powder = append(r.Powder, row)
	}
	return r
}

// TestScatterPlots draws the colour maps and the weighted DOS as PNG and
// SVG (checkPlotCase: sizes, ink, every glyph in its font, the labels with
// their units reaching the renderer whole).
func TestScatterPlots(t *testing.T) {
	dir := os.Getenv("MODEGRID_TEST_PLOT_DIR")
	if dir == "" {
		dir = t.TempDir()
	}
	wd := &modegridv1.ComputeScatteringResponse{Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1}
	for k := 0; k <= 50; k++ {
		e := 5 * float64(k)
		wd.Energies = append(wd.Energies, e)
		wd.WeightedDos = append(wd.WeightedDos, e*e*math.Exp(-e/60))
	}
	tests := []plotCase{
		{name: "scattering along a path", size: mapSize, png: true, inkMax: 0.9,
			build: func() (figure, error) {
				return scatterMapFigure{resp: syntheticScatterPath(modegridv1.Probe_PROBE_NEUTRON), title: "synthetic: neutrons, T = 300 K"}.buildPath()
			},
			wantText: []string{"200", "300|311", "222", "Q along the path (distance, 1/Å)", "energy transfer E (meV)", "S(Q, E) (barn/(sr·meV) per cell)",
				"synthetic: neutrons, T = 300 K", "colour scale up to the median over Q of the largest S"}},
		{name: "X-ray scattering on a log scale", size: mapSize,
			build: func() (figure, error) {
				return scatterMapFigure{resp: syntheticScatterPath(modegridv1.Probe_PROBE_XRAY), heat: heatFlags{smax: 0.5, log: true}, title: "X-rays"}.buildPath()
			},
			wantText: []string{"log10 S(Q, E), S in electrons²/meV per cell", "colour scale up to 0.5", "logarithmic over 4 decades"}},
		{name: "powder map", size: mapSize, png: true, inkMax: 0.9,
			build: func() (figure, error) {
				return scatterMapFigure{resp: syntheticPowder(), title: "synthetic: neutrons, T = 10 K"}.buildPowder()
			},
			wantText: []string{"momentum transfer |Q| (1/Å)", "energy transfer E (meV)", "S(Q, E) (barn/(sr·meV) per cell)",
				"powder average (coherent + incoherent)"}},
		{name: "neutron-weighted DOS", size: dosSize,
			build:    func() (figure, error) { return buildWeightedDOS(wd, "synthetic") },
			wantText: []string{"energy E (cm⁻¹)", "neutron-weighted DOS Σ σ/m g(E) (barn/(amu·cm⁻¹))", "synthetic"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) { checkPlotCase(t, dir, tc) })
	}
	// Too little to draw is refused, not drawn blank.
	if _, err := (scatterMapFigure{resp: &modegridv1.ComputeScatteringResponse{}}).buildPath(); err == nil {
		t.Error("an empty path map was drawn")
	}
	if _, err := (scatterMapFigure{resp: &modegridv1.ComputeScatteringResponse{}}).buildPowder(); err == nil {
		t.Error("an empty powder map was drawn")
	}
}

// TestColourScale: the default top is the median of the columns' peaks;
// a log scale spans logDecades below its top, values under it at the
// bottom.
func TestColourScale(t *testing.T) {
	cols := [][]float64{{0, 1, 100}, {2, 0}, {0, 3}, {0, 0}}
	cs := newColourScale(cols, heatFlags{}, "u")
	if cs.top != 3 { // peaks 100, 2, 3 (an empty column has none): median 3
		t.Errorf("top %v; want 3", cs.top)
	}
	cs = newColourScale(cols, heatFlags{smax: 10, log: true}, "u")
	if lo, hi := cs.bounds(); lo != 1-logDecades || hi != 1 || cs.value(0) != lo || cs.value(100) != 2 {
		t.Errorf("log scale: bounds %v…%v, value(0) %v, value(100) %v", lo, hi, cs.value(0), cs.value(100))
	}
}

// TestStepTicks: labels every 1, 2 or 5 × 10ⁿ through 0.
func TestStepTicks(t *testing.T) {
	var labels []string
	for _, tk := range (stepTicks{}).Ticks(-10, 32) {
		if tk.Label != "" {
			labels = append(labels, tk.Label)
		}
	}
	if got := strings.Join(labels, " "); got != "-10 0 10 20 30" {
		t.Errorf("labels %q; want \"-10 0 10 20 30\"", got)
	}
}
