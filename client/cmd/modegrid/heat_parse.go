package main

// Parsers of the heat subcommands' flags: lists of model files, numbers,
// sample geometries with sizes and units, and the measured-data files of
// the quasi-harmonic figure.

import (
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// parseNumberList parses "a,b,c" (finite numbers).
func parseNumberList(s, what string) ([]float64, error) {
	var out []float64
	for i, p := range strings.Split(s, ",") {
		if len(out) == maxListItems {
			return nil, fmt.Errorf("more than %d %s", maxListItems, what)
		}
		x, err := parseFinite(p)
		if err != nil {
			return nil, fmt.Errorf("%s %d: %w", what, i+1, err)
		}
		out = append(out, x)
	}
	return out, nil
}

// lengthUnits are the units of a sample size, in metres.
var lengthUnits = []struct {
	suffix string
	m      float64
}{{"nm", 1e-9}, {"um", 1e-6}, {"µm", 1e-6}, {"mm", 1e-3}, {"cm", 1e-2}, {"m", 1}}

// parseLength parses a length with its unit ("100nm", "2.5um", "1mm").
func parseLength(s string) (float64, error) {
	s = strings.TrimSpace(s)
	for _, u := range lengthUnits {
		if strings.HasSuffix(s, u.suffix) {
			x, err := parseFinite(strings.TrimSuffix(s, u.suffix))
			if err != nil {
				return 0, fmt.Errorf("%q: %w", s, err)
			}
			if !(x*u.m > 0) || math.IsInf(x*u.m, 0) {
				return 0, fmt.Errorf("%q: a size must be a positive length", s)
			}
			return x * u.m, nil
		}
	}
	return 0, fmt.Errorf("%q: give a length with its unit (nm, um, mm, cm or m), e.g. 100nm", s)
}

// parseSamples parses --samples: geometries separated by spaces or ";",
// each "bulk", "grain:SIZE", "wire:SIZE" or "film:SIZE[:NX,NY,NZ]" (the
// film's surface normal, default z); specularity applies to all.
func parseSamples(s string, specularity float64) ([]*modegridv1.SampleGeometry, error) {
	var out []*modegridv1.SampleGeometry
	for _, f := range strings.FieldsFunc(s, func(r rune) bool { return r == ';' || r == ' ' }) {
		parts := strings.Split(f, ":")
		kind := strings.ToLower(parts[0])
		g := &modegridv1.SampleGeometry{Specularity: specularity}
		switch kind {
		case "bulk":
			if len(parts) != 1 {
				return nil, fmt.Errorf("%q: bulk takes no size", f)
			}
			g.Kind = modegridv1.SampleKind_SAMPLE_KIND_BULK
			out = append(out, g)
			continue
		case "grain":
			g.Kind = modegridv1.SampleKind_SAMPLE_KIND_GRAIN
		case "wire":
			g.Kind = modegridv1.SampleKind_SAMPLE_KIND_WIRE
		case "film":
			g.Kind = modegridv1.SampleKind_SAMPLE_KIND_FILM
			g.Normal = &modegridv1.Vec3{Z: 1}
		default:
			return nil, fmt.Errorf("%q: a sample is bulk, grain:SIZE, wire:SIZE or film:SIZE[:NX,NY,NZ]", f)
		}
		if len(parts) < 2 || len(parts) > 3 || (len(parts) == 3 && kind != "film") {
			return nil, fmt.Errorf("%q: a sample is bulk, grain:SIZE, wire:SIZE or film:SIZE[:NX,NY,NZ]", f)
		}
		size, err := parseLength(parts[1])
		if err != nil {
			return nil, err
		}
		g.SizeM = size
		if len(parts) == 3 {
			n, err := parseNumberList(parts[2], "normal component")
			if err != nil || len(n) != 3 || n[0] == 0 && n[1] == 0 && n[2] == 0 {
				return nil, fmt.Errorf("%q: the film normal is three numbers, not all 0, like 0,0,1", f)
			}
			g.Normal = &modegridv1.Vec3{X: n[0], Y: n[1], Z: n[2]}
		}
		out = append(out, g)
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("no sample given")
	}
	return out, nil
}

// sampleName is a sample's short name in tables and legends ("film 100 nm").
func sampleName(g *modegridv1.SampleGeometry) string {
	var kind string
	switch g.GetKind() {
	case modegridv1.SampleKind_SAMPLE_KIND_FILM:
		kind = "film"
	case modegridv1.SampleKind_SAMPLE_KIND_WIRE:
		kind = "wire"
	case modegridv1.SampleKind_SAMPLE_KIND_GRAIN:
		kind = "grain"
	default:
		return "bulk"
	}
	return kind + " " + lengthName(g.GetSizeM())
}

// lengthName prints a length in the largest unit that keeps it ≥ 1.
func lengthName(m float64) string {
	for _, u := range []struct {
		name string
		m    float64
	}{{"m", 1}, {"mm", 1e-3}, {"µm", 1e-6}, {"nm", 1e-9}} {
		if m >= u.m*(1-1e-12) {
			return strconv.FormatFloat(roundSig(m/u.m, 6), 'g', -1, 64) + " " + u.name
		}
	}
	return strconv.FormatFloat(m, 'g', 6, 64) + " m"
}

func roundSig(x float64, n int) float64 {
	if x == 0 {
		return 0
	}
	p := math.Pow(10, float64(n)-math.Ceil(math.Log10(math.Abs(x))))
	return math.Round(x*p) / p
}

// qhaMeasured is a measured series of the quasi-harmonic figure: Cp per
// mole of atoms or of cells, or the linear expansion coefficient.
type qhaMeasured struct {
	kind    string // "cp" or "alpha"
	perCell bool
	rows    []measuredRow
}

// readQHAMeasured reads one measured-data file of the qha command; its
// header is T_K,Cp_J_per_molatom_K[,sigma], T_K,Cp_J_per_molcell_K[,sigma]
// or T_K,alpha_lin_per_K[,sigma].
func readQHAMeasured(file string) (qhaMeasured, error) {
	header, rows, lines, err := readMeasuredCSV(file)
	if err != nil {
		return qhaMeasured{}, err
	}
	names := []string{"Cp_J_per_molatom_K", "Cp_J_per_molcell_K", "alpha_lin_per_K"}
	if len(header) < 2 || len(header) > 3 || header[0] != "T_K" || len(header) == 3 && header[2] != "sigma" || !slices.Contains(names, header[1]) {
		return qhaMeasured{}, &csvError{file: file, line: 1, msg: fmt.Sprintf("header %q; want T_K,<column>[,sigma] with <column> one of %s", strings.Join(header, ","), strings.Join(names, ", "))}
	}
	m := qhaMeasured{kind: "cp", perCell: header[1] == names[1]}
	if header[1] == names[2] {
		m.kind = "alpha"
	}
	for i, rec := range rows {
		r, err := parseRow(file, lines[i], rec, header, func(r *measuredRow, v []float64) error {
			if v[0] < 0 {
				return &csvError{file: file, line: lines[i], column: 1, msg: fmt.Sprintf("T_K must be ≥ 0, got %v", v[0])}
			}
			r.x, r.y = v[0], v[1]
			if len(v) == 3 {
				r.sigma = v[2]
			}
			return nil
		})
		if err != nil {
			return qhaMeasured{}, err
		}
		m.rows = append(m.rows, r)
	}
	return m, nil
}
