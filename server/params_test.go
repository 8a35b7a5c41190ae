package server

import (
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
)

// TestCanonicalNumbers: a parameter is printed as the exact float64 the
// computation uses — its shortest round-trip form, −0 as 0, never rounded
// to fewer digits.
func TestCanonicalNumbers(t *testing.T) {
	tests := []struct {
		name string
		in   float64
		want string
	}{
		{name: "binary sum kept exactly", in: func() float64 { a, b := 0.1, 0.2; return a + b }(), want: "0.30000000000000004"},
		{name: "decimal literal", in: 0.3, want: "0.3"},
		{name: "negative zero", in: math.Copysign(0, -1), want: "0"},
		{name: "seventeen digits kept", in: 1.2345678901234567, want: "1.2345678901234567"},
		{name: "one part in 1e12 kept", in: 300 * (1 + 1e-12), want: "300.0000000003"},
		{name: "large", in: 6.02214076e23, want: "6.02214076e+23"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := fmtFloat(tt.in); got != tt.want {
				t.Errorf("fmtFloat(%v) = %q; want %q", tt.in, got, tt.want)
			}
		})
	}
}

// TestCanonicalNumbersExact: for random float64 values of every magnitude,
// the printed form parses back to the same bits, and the next float64 up
// prints differently (no two numbers share a form).
func TestCanonicalNumbersExact(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 12))
	for range 2000 {
		x := math.Ldexp(rng.Float64()+0.5, rng.IntN(120)-60)
		if rng.IntN(2) == 0 {
			x = -x
		}
		s := fmtFloat(x)
		back, err := strconv.ParseFloat(s, 64)
		if err != nil || math.Float64bits(back) != math.Float64bits(x) {
			t.Fatalf("fmtFloat(%b) = %q parses to %b (%v)", x, s, back, err)
		}
		if next := math.Nextafter(x, math.Inf(1)); fmtFloat(next) == s {
			t.Fatalf("%b and the next float64 both print %q", x, s)
		}
	}
}

// rangeList expands start:step:n as ComputeThermal expands a range.
func rangeList(start, step float64, n int) []float64 {
	var out []float64
	for i := range n {
		out = append(out, rangeValue(start, step, i))
	}
	return out
}

func TestTempsParam(t *testing.T) {
	tests := []struct {
		name string
		in   []float64
		want string
	}{
		{name: "explicit arithmetic list", in: []float64{0, 100, 200, 300}, want: "0:100:300"},
		{name: "decimal range", in: rangeList(0.1, 0.1, 4), want: "0.1:0.1:0.4"},
		{name: "two values stay a list", in: []float64{5, 7}, want: "5,7"},
		{name: "run then a value", in: []float64{1, 2, 3, 10}, want: "1:1:3,10"},
		{name: "repeated value", in: []float64{300, 300, 300}, want: "300,300,300"},
		{name: "descending", in: []float64{30, 20, 10}, want: "30,20,10"},
		{name: "one part in 1e12 off the run", in: []float64{100, 200, 300 * (1 + 1e-12)}, want: "100,200,300.0000000003"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := tempsParam(tt.in); got != tt.want {
				t.Errorf("tempsParam(%v) = %q; want %q", tt.in, got, tt.want)
			}
		})
	}
}

// parseTemps reads a tempsParam text back into its list (a run a:s:b is
// rangeValue(a, s, i) up to b).
func parseTemps(t *testing.T, text string) []float64 {
	t.Helper()
	num := func(s string) float64 {
		v, err := strconv.ParseFloat(s, 64)
		if err != nil {
			t.Fatalf("%q in %q: %v", s, text, err)
		}
		return v
	}
	var out []float64
	for _, part := range strings.Split(text, ",") {
		f := strings.Split(part, ":")
		if len(f) == 1 {
			out = append(out, num(f[0]))
			continue
		}
		a, s, b := num(f[0]), num(f[1]), num(f[2])
		for i := 0; ; i++ {
			v := rangeValue(a, s, i)
			if v > b || i > 1e6 {
				t.Fatalf("run %q in %q does not end on %v", part, text, b)
			}
			out = append(out, v)
			if v == b {
				break
			}
		}
	}
	return out
}

// TestTempsParamExact: the text of any temperature list — ranges with
// decimal steps, lists with values one part in 1e12 apart, repeats — reads
// back to the same list bit for bit, so two lists share a key only when
// every temperature is the same float64.
func TestTempsParamExact(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 3))
	for trial := range 500 {
		var ts []float64
		for len(ts) < 12 {
			switch rng.IntN(3) {
			case 0:
				ts = append(ts, rangeList(float64(rng.IntN(3000))/10, float64(1+rng.IntN(50))/10, 1+rng.IntN(6))...)
			case 1:
				ts = append(ts, rng.Float64()*1000)
			default:
				if len(ts) > 0 {
					last := ts[len(ts)-1]
					ts = append(ts, last, last*(1+1e-12))
				}
			}
		}
		text := tempsParam(ts)
		back := parseTemps(t, text)
		if len(back) != len(ts) {
			t.Fatalf("trial %d: %v prints %q, which reads back as %v", trial, ts, text, back)
		}
		for i := range ts {
			if math.Float64bits(back[i]) != math.Float64bits(ts[i]) {
				t.Fatalf("trial %d: %v prints %q, which reads back as %v", trial, ts, text, back)
			}
		}
	}
}
