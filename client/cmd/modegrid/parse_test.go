package main

import (
	"reflect"
	"strings"
	"testing"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

func TestParseQList(t *testing.T) {
	tests := []struct {
		name    string
		in      string
		want    [][3]float64
		wantErr string
	}{
		{name: "one point", in: "0.5", want: [][3]float64{{0.5, 0, 0}}},
		{name: "three points", in: "0,0,0; 0.5,0,0.5 ;0.25,-0.25", want: [][3]float64{{0, 0, 0}, {0.5, 0, 0.5}, {0.25, -0.25, 0}}},
		{name: "trailing semicolon", in: "0.1;", want: [][3]float64{{0.1, 0, 0}}},
		{name: "exponent", in: "1e-3,2E-1", want: [][3]float64{{0.001, 0.2, 0}}},
		{name: "empty", in: " ; ", wantErr: "no q-points"},
		{name: "four components", in: "0,0,0,0", wantErr: "at most 3"},
		{name: "not a number", in: "0.5;a", wantErr: `q-point 2 "a": component 1: "a" is not a number`},
		{name: "NaN", in: "NaN", wantErr: "not a finite number"},
		{name: "Inf", in: "0,+Inf", wantErr: "not a finite number"},
		{name: "empty component", in: "0,,1", wantErr: "component 2"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := parseQList(tc.in)
			checkErr(t, err, tc.wantErr)
			if tc.wantErr == "" && !reflect.DeepEqual(got, tc.want) {
				t.Errorf("got %v; want %v", got, tc.want)
			}
		})
	}
}

func TestParseMesh(t *testing.T) {
	tests := []struct {
		name    string
		in      string
		dim     int
		want    []uint32
		wantErr string
	}{
		{name: "one for all 3D", in: "8", dim: 3, want: []uint32{8, 8, 8}},
		{name: "one for all 1D", in: "100", dim: 1, want: []uint32{100}},
		{name: "three", in: "4x6x8", dim: 3, want: []uint32{4, 6, 8}},
		{name: "capital and times sign", in: "4X6×8", dim: 3, want: []uint32{4, 6, 8}},
		{name: "two for 2D", in: "16x32", dim: 2, want: []uint32{16, 32}},
		{name: "mismatch left to the server", in: "4x4", dim: 3, want: []uint32{4, 4}},
		{name: "zero", in: "0", wantErr: "≥ 1"},
		{name: "negative", in: "-4", wantErr: "≥ 1"},
		{name: "trailing x", in: "4x", wantErr: "N1xN2xN3"},
		{name: "double x", in: "4xx4", wantErr: "N1xN2xN3"},
		{name: "four numbers", in: "2x2x2x2", wantErr: "at most three"},
		{name: "fraction", in: "2.5", wantErr: "whole number"},
		{name: "too big", in: "99999999999", wantErr: "whole number"},
		{name: "empty", in: "", wantErr: "empty"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := parseMesh(tc.in)
			checkErr(t, err, tc.wantErr)
			if tc.wantErr == "" {
				if got = expandMesh(got, tc.dim); !reflect.DeepEqual(got, tc.want) {
					t.Errorf("got %v; want %v", got, tc.want)
				}
			}
		})
	}
}

func TestParsePath(t *testing.T) {
	tests := []struct {
		name    string
		in      string
		want    []pathCorner
		wantErr string
	}{
		{name: "labels", in: "G-X-W-L-G", want: []pathCorner{{Label: "G"}, {Label: "X"}, {Label: "W"}, {Label: "L"}, {Label: "G"}}},
		{name: "gamma spelled out", in: "Γ-X|U-gamma", want: []pathCorner{{Label: "G"}, {Label: "X"}, {Label: "U", Break: true}, {Label: "G"}}},
		{name: "coordinates", in: "G=0,0,0 X=0.5,0,0.5  L=0.5,0.5,0.5", want: []pathCorner{
			{Label: "G", HasQ: true}, {Label: "X", Q: [3]float64{0.5, 0, 0.5}, HasQ: true}, {Label: "L", Q: [3]float64{0.5, 0.5, 0.5}, HasQ: true}}},
		{name: "negative coordinates", in: "A=-0.5 B=0.5", want: []pathCorner{{Label: "A", Q: [3]float64{-0.5, 0, 0}, HasQ: true}, {Label: "B", Q: [3]float64{0.5, 0, 0}, HasQ: true}}},
		{name: "mixed and break", in: "G X=0.5,0,0.5 | K=0.375,0.375,0.75 |L", want: []pathCorner{
			{Label: "G"}, {Label: "X", Q: [3]float64{0.5, 0, 0.5}, HasQ: true},
			{Label: "K", Q: [3]float64{0.375, 0.375, 0.75}, HasQ: true, Break: true}, {Label: "L", Break: true}}},
		{name: "primed label", in: "X-X'", want: []pathCorner{{Label: "X"}, {Label: "X'"}}},
		{name: "one corner", in: "G", wantErr: "at least two corners"},
		{name: "empty", in: "  ", wantErr: "empty path"},
		{name: "empty label", in: "G--X", wantErr: "empty label"},
		{name: "bad coordinate", in: "G=0,0,0 X=0.5,zero", wantErr: `corner 2 (X): component 2: "zero" is not a number`},
		{name: "bad label character", in: "G-X*", wantErr: `'*' is not a letter`},
		{name: "label without coordinates value", in: "G= X=0.5", wantErr: "corner 1 (G)"},
		{name: "long label", in: "G-ABCDEFGHIJKLMNOPQ", wantErr: "longer than 16"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := parsePath(tc.in)
			checkErr(t, err, tc.wantErr)
			if tc.wantErr == "" && !reflect.DeepEqual(got, tc.want) {
				t.Errorf("got %+v; want %+v", got, tc.want)
			}
		})
	}
}

func TestParseTemps(t *testing.T) {
	tests := []struct {
		name      string
		in        string
		wantList  []float64
		wantRange *tempRange
		wantErr   string
	}{
		{name: "range", in: "0:1000:10", wantRange: &tempRange{0, 1000, 10}},
		{name: "list", in: "300", wantList: []float64{300}},
		{name: "list of three", in: "10, 100.5,300", wantList: []float64{10, 100.5, 300}},
		{name: "one-point range", in: "300:300:1", wantRange: &tempRange{300, 300, 1}},
		{name: "negative", in: "-1,300", wantErr: "≥ 0 K"},
		{name: "range negative start", in: "-10:100:10", wantErr: "start must be ≥ 0 K"},
		{name: "range reversed", in: "300:0:10", wantErr: "below start"},
		{name: "zero step", in: "0:100:0", wantErr: "step must be > 0"},
		{name: "two parts", in: "0:100", wantErr: "start:stop:step"},
		{name: "not a number", in: "0:hot:10", wantErr: `stop: "hot" is not a number`},
		{name: "too many", in: "0:1e9:1", wantErr: "more than"},
		{name: "NaN", in: "NaN", wantErr: "not a finite number"},
		{name: "empty", in: "", wantErr: "empty"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			list, r, err := parseTemps(tc.in)
			checkErr(t, err, tc.wantErr)
			if tc.wantErr != "" {
				return
			}
			if !reflect.DeepEqual(list, tc.wantList) || !reflect.DeepEqual(r, tc.wantRange) {
				t.Errorf("got %v, %+v; want %v, %+v", list, r, tc.wantList, tc.wantRange)
			}
		})
	}
}

func TestRangeTemps(t *testing.T) {
	tests := []struct {
		name string
		r    tempRange
		want int
		last float64
	}{
		{name: "stop on the step", r: tempRange{0, 1000, 10}, want: 101, last: 1000},
		{name: "stop off the step", r: tempRange{0, 25, 10}, want: 3, last: 20},
		{name: "one point", r: tempRange{300, 300, 5}, want: 1, last: 300},
		{name: "fractional step", r: tempRange{0, 1, 0.1}, want: 11, last: 1}, // 0.1 is inexact: the 1e-9 step slack keeps 1.0
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := rangeTemps(tc.r)
			if len(got) != tc.want || got[len(got)-1]-tc.last > 1e-12 || tc.last-got[len(got)-1] > 1e-12 {
				t.Errorf("got %d temperatures ending %v; want %d ending %v", len(got), got[len(got)-1], tc.want, tc.last)
			}
		})
	}
}

func TestParseEnums(t *testing.T) {
	tests := []struct {
		name    string
		parse   func(string) (any, error)
		in      string
		want    any
		wantErr string
	}{
		{name: "unit thz", parse: anyUnit, in: "thz", want: modegridv1.FrequencyUnit_FREQUENCY_UNIT_THZ},
		{name: "unit meV", parse: anyUnit, in: "meV", want: modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV},
		{name: "unit cm-1", parse: anyUnit, in: "cm-1", want: modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1},
		{name: "unit bad", parse: anyUnit, in: "hz", wantErr: "thz, mev or cm-1"},
		{name: "method tetrahedron", parse: anyMethod, in: "tetrahedron", want: modegridv1.DosMethod_DOS_METHOD_TETRAHEDRON},
		{name: "method gaussian", parse: anyMethod, in: "Gaussian", want: modegridv1.DosMethod_DOS_METHOD_GAUSSIAN},
		{name: "method histogram", parse: anyMethod, in: "histogram", want: modegridv1.DosMethod_DOS_METHOD_HISTOGRAM},
		{name: "method bad", parse: anyMethod, in: "smear", wantErr: "tetrahedron, gaussian or histogram"},
		{name: "format csv", parse: anyFormat, in: "CSV", want: "csv"},
		{name: "format bad", parse: anyFormat, in: "yaml", wantErr: "table, csv or json"},
		{name: "plot png", parse: anyPlot, in: "out/fig.PNG", want: "png"},
		{name: "plot svg", parse: anyPlot, in: "fig.svg", want: "svg"},
		{name: "plot pdf", parse: anyPlot, in: "fig.pdf", wantErr: ".png or .svg"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := tc.parse(tc.in)
			checkErr(t, err, tc.wantErr)
			if tc.wantErr == "" && got != tc.want {
				t.Errorf("got %v; want %v", got, tc.want)
			}
		})
	}
}

func anyUnit(s string) (any, error)   { return parseUnit(s) }
func anyMethod(s string) (any, error) { return parseMethod(s) }
func anyFormat(s string) (any, error) { return parseFormat(s) }
func anyPlot(s string) (any, error)   { return plotKind(s) }

// TestUnitNames: the CSV suffix of each unit is its --unit spelling.
func TestUnitNames(t *testing.T) {
	for name, u := range units {
		if got := unitName(u); got != name {
			t.Errorf("unitName(%v) = %q; want %q", u, got, name)
		}
	}
	if got := unitName(modegridv1.FrequencyUnit_FREQUENCY_UNIT_UNSPECIFIED); got != "thz" {
		t.Errorf("unspecified unit is %q; want thz", got)
	}
}

// TestSiteColumns: a label shared by several sites gets the site index.
func TestSiteColumns(t *testing.T) {
	got := siteColumns("dos_", []string{"P", "Q", "Q", "R"}, []int{0, 1, 2, 3})
	want := []string{"dos_P", "dos_Q_1", "dos_Q_2", "dos_R"}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("got %v; want %v", got, want)
	}
}

func checkErr(t *testing.T, err error, want string) {
	t.Helper()
	switch {
	case want == "" && err != nil:
		t.Fatalf("unexpected error: %v", err)
	case want != "" && err == nil:
		t.Fatalf("no error; want one containing %q", want)
	case want != "" && !strings.Contains(err.Error(), want):
		t.Fatalf("error %q does not contain %q", err, want)
	}
}
