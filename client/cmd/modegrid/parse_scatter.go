package main

// Parsers of the scattering commands' values: what each label scatters
// with, a polynomial of the resolution, the frame of Q. Pure functions of
// their strings that name what is wrong and never panic (fuzzed).

import (
	"fmt"
	"strings"

	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// labelValues is one "LABEL=x,y,…" item of a per-label list.
type labelValues struct {
	label  string
	values []float64
}

// parseLabelValues parses "LABEL=x,y,…;LABEL=…": each label (letters,
// digits, _ and primes, at most once) with 1…maxValues finite numbers.
// Empty items between semicolons are skipped.
func parseLabelValues(s string, maxValues int) ([]labelValues, error) {
	var out []labelValues
	seen := map[string]bool{}
	for i, item := range strings.Split(s, ";") {
		item = strings.TrimSpace(item)
		if item == "" {
			continue
		}
		if len(out) == maxListItems {
			return nil, fmt.Errorf("more than %d labels", maxListItems)
		}
		label, nums, ok := strings.Cut(item, "=")
		label = strings.TrimSpace(label)
		if !ok {
			return nil, fmt.Errorf("item %d %q: want LABEL=value", i+1, item)
		}
		if err := checkLabel(label); err != nil {
			return nil, fmt.Errorf("item %d: %w", i+1, err)
		}
		if seen[label] {
			return nil, fmt.Errorf("label %q is given twice", label)
		}
		seen[label] = true
		fields := strings.Split(nums, ",")
		if len(fields) > maxValues {
			return nil, fmt.Errorf("%s: %d numbers, at most %d", label, len(fields), maxValues)
		}
		lv := labelValues{label: label}
		for k, f := range fields {
			x, err := parseFinite(f)
			if err != nil {
				return nil, fmt.Errorf("%s: number %d: %w", label, k+1, err)
			}
			lv.values = append(lv.values, x)
		}
		out = append(out, lv)
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("no LABEL=value in %q", s)
	}
	return out, nil
}

// scattererFlags are --b, --sigma-inc and --xray-f as given.
type scattererFlags struct{ b, sigmaInc, xrayF string }

// parseScatterers builds the request's scatterers by label from --b
// "P=3.1;Q=5.8" (coherent lengths, fm), --sigma-inc "Q=2" (incoherent
// cross-sections, barn; only with a length of the same label) and --xray-f
// "P=26;Q=10,2,5,20,1" (X-ray form factors: a constant c, or a1,b1[,a2,b2
// …],c with at most four pairs, b in Å²).
func parseScatterers(f scattererFlags) ([]*modegridv1.Scatterer, error) {
	byLabel := map[string]*modegridv1.Scatterer{}
	var order []string
	get := func(label string) *modegridv1.Scatterer {
		sc, ok := byLabel[label]
		if !ok {
			sc = &modegridv1.Scatterer{Target: &modegridv1.Scatterer_Label{Label: label}}
			byLabel[label] = sc
			order = append(order, label)
		}
		return sc
	}
	if f.b != "" {
		lv, err := parseLabelValues(f.b, 1)
		if err != nil {
			return nil, fmt.Errorf("--b: %w", err)
		}
		for _, v := range lv {
			get(v.label).CoherentFm = proto.Float64(v.values[0])
		}
	}
	if f.sigmaInc != "" {
		lv, err := parseLabelValues(f.sigmaInc, 1)
		if err != nil {
			return nil, fmt.Errorf("--sigma-inc: %w", err)
		}
		for _, v := range lv {
			if byLabel[v.label] == nil {
				return nil, fmt.Errorf("--sigma-inc: %s has no coherent length: give it with --b", v.label)
			}
			if v.values[0] < 0 {
				return nil, fmt.Errorf("--sigma-inc: %s: a cross-section must be ≥ 0 barn, got %v", v.label, v.values[0])
			}
			get(v.label).IncoherentBarn = proto.Float64(v.values[0])
		}
	}
	if f.xrayF != "" {
		lv, err := parseLabelValues(f.xrayF, 9)
		if err != nil {
			return nil, fmt.Errorf("--xray-f: %w", err)
		}
		for _, v := range lv {
			if len(v.values)%2 == 0 {
				return nil, fmt.Errorf("--xray-f: %s: give c, or a1,b1,…,c (an odd count of numbers), got %d", v.label, len(v.values))
			}
			n := len(v.values) - 1
			ff := &modegridv1.XrayFormFactor{C: v.values[n]}
			for k := 0; k < n; k += 2 {
				ff.A = append(ff.A, v.values[k])
				ff.BA2 = append(ff.BA2, v.values[k+1])
			}
			get(v.label).FormFactor = ff
		}
	}
	out := make([]*modegridv1.Scatterer, len(order))
	for i, l := range order {
		out[i] = byLabel[l]
	}
	return out, nil
}

// parsePoly parses the coefficients of the FWHM polynomial "c0,c1,…"
// (at most four: a cubic in E).
func parsePoly(s string) ([]float64, error) {
	fields := strings.Split(s, ",")
	if len(fields) > 4 {
		return nil, fmt.Errorf("%d coefficients, at most 4 (c0,c1,c2,c3: a cubic in E)", len(fields))
	}
	out := make([]float64, len(fields))
	for i, f := range fields {
		x, err := parseFinite(f)
		if err != nil {
			return nil, fmt.Errorf("coefficient %d: %w", i, err)
		}
		out[i] = x
	}
	return out, nil
}

// frames maps --frame values to the API's.
var frames = map[string]modegridv1.QFrame{
	"frac": modegridv1.QFrame_Q_FRAME_FRACTIONAL,
	"cart": modegridv1.QFrame_Q_FRAME_CARTESIAN,
	"conv": modegridv1.QFrame_Q_FRAME_CONVENTIONAL,
}

// parseFrame parses --frame.
func parseFrame(s string) (modegridv1.QFrame, error) {
	if f, ok := frames[strings.ToLower(strings.TrimSpace(s))]; ok {
		return f, nil
	}
	return 0, fmt.Errorf("--frame must be frac, cart or conv, got %q", s)
}

// parseRange parses "first:last:count" (count ≥ 1 whole).
func parseRange(s string) (lo, hi float64, n uint32, err error) {
	parts := strings.Split(strings.TrimSpace(s), ":")
	if len(parts) != 3 {
		return 0, 0, 0, fmt.Errorf("%q: want first:last:count", s)
	}
	if lo, err = parseFinite(parts[0]); err != nil {
		return 0, 0, 0, fmt.Errorf("%q: first: %w", s, err)
	}
	if hi, err = parseFinite(parts[1]); err != nil {
		return 0, 0, 0, fmt.Errorf("%q: last: %w", s, err)
	}
	var c int
	if _, e := fmt.Sscanf(strings.TrimSpace(parts[2]), "%d", &c); e != nil || c < 1 || c > maxListItems || fmt.Sprint(c) != strings.TrimSpace(parts[2]) {
		return 0, 0, 0, fmt.Errorf("%q: count must be a whole number 1…%d", s, maxListItems)
	}
	return lo, hi, uint32(c), nil
}
