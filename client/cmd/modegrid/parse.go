package main

// Parsers of the command-line values: q-point lists, grids, paths,
// temperature ranges, units and methods. Each is a small pure function of
// its string, returns an error that names what is wrong, and never panics
// (they are fuzzed).

import (
	"fmt"
	"math"
	"path/filepath"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// maxListItems bounds the items of one command-line list (q-points, path
// corners, temperatures), so a pasted mistake cannot exhaust memory; the
// server has its own, usually tighter, caps.
const maxListItems = 100000

// parseQList parses q-points "a,b,c;a,b,c": fractional reciprocal
// coordinates, one to three numbers per point, missing trailing components
// 0. Empty items between semicolons are skipped.
func parseQList(s string) ([][3]float64, error) {
	var out [][3]float64
	for i, part := range strings.Split(s, ";") {
		part = strings.TrimSpace(part)
		if part == "" {
			continue
		}
		if len(out) == maxListItems {
			return nil, fmt.Errorf("more than %d q-points", maxListItems)
		}
		v, err := parseVec(part)
		if err != nil {
			return nil, fmt.Errorf("q-point %d %q: %w", i+1, part, err)
		}
		out = append(out, v)
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("no q-points in %q", s)
	}
	return out, nil
}

// parseVec parses one to three comma-separated finite numbers.
func parseVec(s string) ([3]float64, error) {
	var v [3]float64
	fields := strings.Split(s, ",")
	if len(fields) > 3 {
		return v, fmt.Errorf("has %d components, at most 3", len(fields))
	}
	for k, f := range fields {
		x, err := parseFinite(f)
		if err != nil {
			return v, fmt.Errorf("component %d: %w", k+1, err)
		}
		v[k] = x
	}
	return v, nil
}

// parseFinite parses a finite float.
func parseFinite(s string) (float64, error) {
	s = strings.TrimSpace(s)
	x, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return 0, fmt.Errorf("%q is not a number", s)
	}
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0, fmt.Errorf("%q is not a finite number", s)
	}
	return x, nil
}

// parseMesh parses grid divisions "N1xN2xN3", "N1xN2" or "N" (each ≥ 1).
// One number means the same division along every lattice vector; see
// expandMesh.
func parseMesh(s string) ([]uint32, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return nil, fmt.Errorf("empty; want N or N1xN2xN3")
	}
	parts := strings.FieldsFunc(s, func(r rune) bool { return r == 'x' || r == 'X' || r == '×' })
	if len(parts) > 3 || strings.Count(strings.ToLower(strings.ReplaceAll(s, "×", "x")), "x") != len(parts)-1 {
		return nil, fmt.Errorf("%q: want N or N1xN2xN3 (at most three numbers)", s)
	}
	out := make([]uint32, len(parts))
	for i, p := range parts {
		n, err := strconv.ParseUint(strings.TrimSpace(p), 10, 32)
		if err != nil || n < 1 {
			return nil, fmt.Errorf("%q: division %d (%q) must be a whole number ≥ 1", s, i+1, p)
		}
		out[i] = uint32(n)
	}
	return out, nil
}

// expandMesh repeats a single division for a d-dimensional crystal; other
// lengths are returned unchanged for the server to check against d.
func expandMesh(mesh []uint32, dim int) []uint32 {
	if len(mesh) != 1 || dim <= 1 {
		return mesh
	}
	out := make([]uint32, dim)
	for i := range out {
		out[i] = mesh[0]
	}
	return out
}

// pathCorner is one corner of a --path.
type pathCorner struct {
	Label string
	Q     [3]float64
	HasQ  bool // false: a built-in label of the crystal's lattice
	Break bool // start a new, disconnected piece here
}

// parsePath parses a path in one of two forms:
//
//	"G-X-W-L-G"                 built-in labels joined by '-'; '|' breaks the path
//	"G=0,0,0 X=0.5,0,0.5 | L"   whitespace-separated LABEL=q1,q2,q3 corners
//	                            (or bare built-in labels; a lone '|' or a
//	                            leading '|' on a corner breaks the path)
//
// "Γ" is accepted for "G". At least two corners are needed.
func parsePath(s string) ([]pathCorner, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return nil, fmt.Errorf("empty path")
	}
	var out []pathCorner
	breakNext := false
	add := func(tok string) error {
		if len(out) == maxListItems {
			return fmt.Errorf("more than %d corners", maxListItems)
		}
		c := pathCorner{Break: breakNext && len(out) > 0}
		breakNext = false
		label, coords, hasQ := strings.Cut(tok, "=")
		label = normLabel(strings.TrimSpace(label))
		if err := checkLabel(label); err != nil {
			return fmt.Errorf("corner %d: %w", len(out)+1, err)
		}
		c.Label = label
		if hasQ {
			v, err := parseVec(coords)
			if err != nil {
				return fmt.Errorf("corner %d (%s): %w", len(out)+1, label, err)
			}
			c.Q, c.HasQ = v, true
		}
		out = append(out, c)
		return nil
	}
	if strings.Contains(s, "=") {
		for _, tok := range strings.Fields(strings.ReplaceAll(s, "|", " | ")) {
			if tok == "|" {
				breakNext = true
				continue
			}
			if err := add(tok); err != nil {
				return nil, err
			}
		}
	} else {
		for i, piece := range strings.Split(s, "|") {
			if i > 0 {
				breakNext = true
			}
			for _, tok := range strings.Split(piece, "-") {
				tok = strings.TrimSpace(tok)
				if tok == "" {
					return nil, fmt.Errorf("%q: empty label (labels are joined by '-', pieces by '|')", s)
				}
				if err := add(tok); err != nil {
					return nil, err
				}
			}
		}
	}
	if len(out) < 2 {
		return nil, fmt.Errorf("%q: a path needs at least two corners", s)
	}
	return out, nil
}

// normLabel spells Γ as G, the built-in label of the zone centre.
func normLabel(l string) string {
	if l == "Γ" || l == "\\Gamma" || strings.EqualFold(l, "gamma") {
		return "G"
	}
	return l
}

// checkLabel accepts short labels of letters, digits, ', _ and primes.
func checkLabel(l string) error {
	if l == "" {
		return fmt.Errorf("empty label")
	}
	if utf8.RuneCountInString(l) > 16 {
		return fmt.Errorf("label %q is longer than 16 characters", l)
	}
	for _, r := range l {
		if !unicode.IsLetter(r) && !unicode.IsDigit(r) && r != '_' && r != '\'' && r != '′' {
			return fmt.Errorf("label %q: %q is not a letter, digit, _ or '", l, r)
		}
	}
	return nil
}

// tempRange is start:stop:step in K.
type tempRange struct{ Start, Stop, Step float64 }

// parseTemps parses temperatures in K: "start:stop:step" (stop included
// when on the step) or a comma-separated list "0,100,300". All ≥ 0.
func parseTemps(s string) ([]float64, *tempRange, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return nil, nil, fmt.Errorf("empty; want start:stop:step or a list like 100,200,300")
	}
	if strings.Contains(s, ":") {
		parts := strings.Split(s, ":")
		if len(parts) != 3 {
			return nil, nil, fmt.Errorf("%q: a range is start:stop:step", s)
		}
		var v [3]float64
		for i, p := range parts {
			x, err := parseFinite(p)
			if err != nil {
				return nil, nil, fmt.Errorf("%q: %s: %w", s, [3]string{"start", "stop", "step"}[i], err)
			}
			v[i] = x
		}
		r := tempRange{v[0], v[1], v[2]}
		switch {
		case r.Start < 0:
			return nil, nil, fmt.Errorf("%q: start must be ≥ 0 K, got %v", s, r.Start)
		case r.Stop < r.Start:
			return nil, nil, fmt.Errorf("%q: stop (%v K) is below start (%v K)", s, r.Stop, r.Start)
		case r.Step <= 0:
			return nil, nil, fmt.Errorf("%q: step must be > 0 K, got %v", s, r.Step)
		case (r.Stop-r.Start)/r.Step >= maxListItems:
			return nil, nil, fmt.Errorf("%q: more than %d temperatures", s, maxListItems)
		}
		return nil, &r, nil
	}
	var out []float64
	for i, p := range strings.Split(s, ",") {
		if len(out) == maxListItems {
			return nil, nil, fmt.Errorf("more than %d temperatures", maxListItems)
		}
		x, err := parseFinite(p)
		if err != nil {
			return nil, nil, fmt.Errorf("temperature %d: %w", i+1, err)
		}
		if x < 0 {
			return nil, nil, fmt.Errorf("temperature %d must be ≥ 0 K, got %v", i+1, x)
		}
		out = append(out, x)
	}
	return out, nil, nil
}

// rangeTemps lists the temperatures of r as the server does: start,
// start+step, … up to stop (included within a relative 1e-9 of a step).
func rangeTemps(r tempRange) []float64 {
	var out []float64
	for i := 0; ; i++ {
		t := r.Start + float64(i)*r.Step
		if t > r.Stop+1e-9*r.Step || i >= maxListItems {
			return out
		}
		out = append(out, t)
	}
}

// units maps --unit values to the API enum. The value is also the suffix of
// CSV frequency columns (frequency_thz, frequency_mev, frequency_cm-1).
var units = map[string]modegridv1.FrequencyUnit{
	"thz":  modegridv1.FrequencyUnit_FREQUENCY_UNIT_THZ,
	"mev":  modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV,
	"cm-1": modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1,
}

// parseUnit parses --unit (case-insensitive).
func parseUnit(s string) (modegridv1.FrequencyUnit, error) {
	if u, ok := units[strings.ToLower(strings.TrimSpace(s))]; ok {
		return u, nil
	}
	return 0, fmt.Errorf("--unit must be thz, mev or cm-1, got %q", s)
}

// unitName is the --unit spelling of u (thz for unspecified).
func unitName(u modegridv1.FrequencyUnit) string {
	for k, v := range units {
		if v == u {
			return k
		}
	}
	return "thz"
}

// unitLabel is u as written on axes and table headers.
func unitLabel(u modegridv1.FrequencyUnit) string {
	switch u {
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV:
		return "meV"
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1:
		return "cm⁻¹"
	default:
		return "THz"
	}
}

// parseMethod parses --method.
func parseMethod(s string) (modegridv1.DosMethod, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "tetrahedron":
		return modegridv1.DosMethod_DOS_METHOD_TETRAHEDRON, nil
	case "gaussian":
		return modegridv1.DosMethod_DOS_METHOD_GAUSSIAN, nil
	case "histogram":
		return modegridv1.DosMethod_DOS_METHOD_HISTOGRAM, nil
	}
	return 0, fmt.Errorf("--method must be tetrahedron, gaussian or histogram, got %q", s)
}

// parseFormat parses --format.
func parseFormat(s string) (string, error) {
	switch f := strings.ToLower(strings.TrimSpace(s)); f {
	case "table", "csv", "json":
		return f, nil
	}
	return "", fmt.Errorf("--format must be table, csv or json, got %q", s)
}

// plotKind returns "png" or "svg" from a --plot file name.
func plotKind(file string) (string, error) {
	switch strings.ToLower(filepath.Ext(file)) {
	case ".png":
		return "png", nil
	case ".svg":
		return "svg", nil
	}
	return "", fmt.Errorf("--plot %q: the file name must end in .png or .svg", file)
}
