package server

import (
	"math"
	"testing"
)

func TestCanonicalNumbers(t *testing.T) {
	tests := []struct {
		name string
		in   float64
		want string
	}{
		{name: "rounding noise", in: 0.1 + 0.2, want: "0.3"},
		{name: "negative zero", in: math.Copysign(0, -1), want: "0"},
		{name: "twelve digits kept", in: 1.23456789012, want: "1.23456789012"},
		{name: "thirteenth digit rounded", in: 1.234567890123, want: "1.23456789012"},
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

func TestTempsParam(t *testing.T) {
	rng := func(start, step float64, n int) []float64 {
		var out []float64
		for i := range n {
			out = append(out, rangeValue(start, step, i))
		}
		return out
	}
	tests := []struct {
		name string
		in   []float64
		want string
	}{
		{name: "explicit arithmetic list", in: []float64{0, 100, 200, 300}, want: "0:100:300"},
		{name: "decimal range", in: rng(0.1, 0.1, 3), want: "0.1:0.1:0.3"},
		{name: "two values stay a list", in: []float64{5, 7}, want: "5,7"},
		{name: "run then a value", in: []float64{1, 2, 3, 10}, want: "1:1:3,10"},
		{name: "repeated value", in: []float64{300, 300, 300}, want: "300,300,300"},
		{name: "descending", in: []float64{30, 20, 10}, want: "30,20,10"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := tempsParam(tt.in); got != tt.want {
				t.Errorf("tempsParam(%v) = %q; want %q", tt.in, got, tt.want)
			}
		})
	}
}
