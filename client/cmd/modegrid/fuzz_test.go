package main

// Fuzz targets of the command-line parsers: q-point lists, grid
// divisions, paths and temperature ranges. Invariants: no panic, bounded
// time (inputs past 64 KiB are not considered), an error is a non-empty
// sentence, and an accepted value is well-formed and survives a round trip
// through its own printed form. `make fuzz-short` runs each for a few
// seconds, `make fuzz` for FUZZTIME each.

import (
	"math"
	"reflect"
	"strconv"
	"strings"
	"testing"
)

// fuzzMaxInput is the longest command-line value considered, bytes.
const fuzzMaxInput = 64 << 10

func formatVec(v [3]float64) string {
	return strconv.FormatFloat(v[0], 'g', -1, 64) + "," + strconv.FormatFloat(v[1], 'g', -1, 64) + "," + strconv.FormatFloat(v[2], 'g', -1, 64)
}

func checkFinite(t *testing.T, what string, xs ...float64) {
	t.Helper()
	for _, x := range xs {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			t.Fatalf("%s: accepted a non-finite number %v", what, x)
		}
	}
}

func checkErrMessage(t *testing.T, in string, err error) {
	t.Helper()
	if strings.TrimSpace(err.Error()) == "" {
		t.Fatalf("%q: an empty error message", in)
	}
}

func FuzzParseQList(f *testing.F) {
	for _, s := range []string{"0.5", "0,0,0; 0.5,0,0.5 ;0.25,-0.25", "0.1;", "1e-3,2E-1", " ; ", "0,0,0,0", "0.5;a", "NaN", "0,+Inf", "0,,1", "0x1p-2", "1_000", "-0", "9e999"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		if len(s) > fuzzMaxInput {
			return
		}
		pts, err := parseQList(s)
		if err != nil {
			checkErrMessage(t, s, err)
			return
		}
		if len(pts) == 0 || len(pts) > maxListItems {
			t.Fatalf("%q: %d points; want 1…%d", s, len(pts), maxListItems)
		}
		parts := make([]string, len(pts))
		for i, p := range pts {
			checkFinite(t, s, p[:]...)
			parts[i] = formatVec(p)
		}
		again, err := parseQList(strings.Join(parts, ";"))
		if err != nil || !reflect.DeepEqual(again, pts) {
			t.Fatalf("%q: printed as %q, parsed back as %v, %v; want %v", s, strings.Join(parts, ";"), again, err, pts)
		}
	})
}

func FuzzParseMesh(f *testing.F) {
	for _, s := range []string{"8", "100", "4x6x8", "4X6×8", "16x32", "0", "-4", "4x", "4xx4", "2x2x2x2", "2.5", "99999999999", "4294967295x1", " 3 x 3 "} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		if len(s) > fuzzMaxInput {
			return
		}
		mesh, err := parseMesh(s)
		if err != nil {
			checkErrMessage(t, s, err)
			return
		}
		if len(mesh) < 1 || len(mesh) > 3 {
			t.Fatalf("%q: %d divisions; want 1…3", s, len(mesh))
		}
		parts := make([]string, len(mesh))
		for i, n := range mesh {
			if n < 1 {
				t.Fatalf("%q: division %d is %d; want ≥ 1", s, i, n)
			}
			parts[i] = strconv.FormatUint(uint64(n), 10)
		}
		again, err := parseMesh(strings.Join(parts, "x"))
		if err != nil || !reflect.DeepEqual(again, mesh) {
			t.Fatalf("%q: printed as %q, parsed back as %v, %v; want %v", s, strings.Join(parts, "x"), again, err, mesh)
		}
		for d := 1; d <= 3; d++ {
			e := expandMesh(mesh, d)
			if len(mesh) == 1 && len(e) != d || len(mesh) != 1 && !reflect.DeepEqual(e, mesh) {
				t.Fatalf("expandMesh(%v, %d) = %v", mesh, d, e)
			}
		}
	})
}

// formatPath prints corners in a form parsePath reads back: the dash form
// when no corner has coordinates, the LABEL=q form otherwise.
func formatPath(cs []pathCorner) string {
	coords := false
	for _, c := range cs {
		coords = coords || c.HasQ
	}
	var b strings.Builder
	for i, c := range cs {
		switch {
		case i > 0 && c.Break:
			b.WriteString("|")
			if coords {
				b.WriteString(" ")
			}
		case i > 0 && coords:
			b.WriteString(" ")
		case i > 0:
			b.WriteString("-")
		}
		b.WriteString(c.Label)
		if c.HasQ {
			b.WriteString("=" + formatVec(c.Q))
		}
	}
	return b.String()
}

func FuzzParsePath(f *testing.F) {
	for _, s := range []string{"G-X-W-L-G", "G-X|K-G", "G=0,0,0 X=0.5,0,0.5 | L", "Γ=0,0 X=0.5,0", "gamma-X", "G", "G--X", "G=0,0,NaN X", "A=1 | | B", "|G X=0.5", "L′-Z_1-Y'"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		if len(s) > fuzzMaxInput {
			return
		}
		cs, err := parsePath(s)
		if err != nil {
			checkErrMessage(t, s, err)
			return
		}
		if len(cs) < 2 || len(cs) > maxListItems {
			t.Fatalf("%q: %d corners; want 2…%d", s, len(cs), maxListItems)
		}
		if cs[0].Break {
			t.Fatalf("%q: the first corner breaks the path", s)
		}
		for i, c := range cs {
			if err := checkLabel(c.Label); err != nil {
				t.Fatalf("%q: corner %d has a bad label: %v", s, i, err)
			}
			checkFinite(t, s, c.Q[:]...)
			if !c.HasQ && c.Q != ([3]float64{}) {
				t.Fatalf("%q: corner %d has coordinates %v without HasQ", s, i, c.Q)
			}
		}
		p := formatPath(cs)
		again, err := parsePath(p)
		if err != nil || !reflect.DeepEqual(again, cs) {
			t.Fatalf("%q: printed as %q, parsed back as %+v, %v; want %+v", s, p, again, err, cs)
		}
	})
}

// serverRangeCount is the number of temperatures the server makes of a
// range (server/thermal.go): floor((stop − start)/step + 1e-9) + 1.
func serverRangeCount(r tempRange) float64 { return math.Floor((r.Stop-r.Start)/r.Step+1e-9) + 1 }

func FuzzParseTemps(f *testing.F) {
	for _, s := range []string{"0:1000:10", "100,300", "300", "0:0:1", "10:5:1", "0:10:0", "-5:10:1", "0:1e6:1e-300", "5,-1", "0.1:0.3:0.1", "1:2:3:4", "nan:1:1", "1e300:1e300:1"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		if len(s) > fuzzMaxInput {
			return
		}
		list, r, err := parseTemps(s)
		if err != nil {
			checkErrMessage(t, s, err)
			return
		}
		if (list == nil) == (r == nil) {
			t.Fatalf("%q: list %v and range %v; want exactly one", s, list, r)
		}
		if r == nil {
			checkTempList(t, s, list)
			return
		}
		checkTempRange(t, s, *r)
	})
}

// checkTempList checks a list of temperatures parsed from s: 1 to
// maxListItems finite values ≥ 0 K that print and parse back unchanged.
func checkTempList(t *testing.T, s string, list []float64) {
	t.Helper()
	if len(list) == 0 || len(list) > maxListItems {
		t.Fatalf("%q: %d temperatures; want 1…%d", s, len(list), maxListItems)
	}
	parts := make([]string, len(list))
	for i, x := range list {
		checkFinite(t, s, x)
		if x < 0 {
			t.Fatalf("%q: accepted %v K", s, x)
		}
		parts[i] = strconv.FormatFloat(x, 'g', -1, 64)
	}
	again, rr, err := parseTemps(strings.Join(parts, ","))
	if err != nil || rr != nil || !reflect.DeepEqual(again, list) {
		t.Fatalf("%q: printed as %q, parsed back as %v, %v, %v", s, strings.Join(parts, ","), again, rr, err)
	}
}

// checkTempRange checks a range parsed from s: finite, ordered, a step
// > 0, and expanding to 1 to maxListItems ascending temperatures within
// it, as many as the server makes of it.
func checkTempRange(t *testing.T, s string, r tempRange) {
	t.Helper()
	checkFinite(t, s, r.Start, r.Stop, r.Step)
	if r.Start < 0 || r.Stop < r.Start || !(r.Step > 0) {
		t.Fatalf("%q: accepted the range %+v", s, r)
	}
	ts := rangeTemps(r)
	if len(ts) == 0 || len(ts) > maxListItems {
		t.Fatalf("%q: %d temperatures in the range; want 1…%d", s, len(ts), maxListItems)
	}
	for i, x := range ts {
		if x < r.Start || x > r.Stop+1e-9*r.Step || (i > 0 && x < ts[i-1]) {
			t.Fatalf("%q: temperature %d is %v, outside [%v, %v] or out of order", s, i, x, r.Start, r.Stop)
		}
	}
	// rangeTemps promises the server's list. Where a step is below the
	// resolution of the temperatures (start + step == start) the two
	// cannot agree; the CLI sends the range itself, so only the count
	// shown locally would differ (noted for the CLI owner).
	if r.Start+r.Step > r.Start && r.Stop+r.Step > r.Stop {
		if n := serverRangeCount(r); n <= maxListItems && float64(len(ts)) != n {
			t.Fatalf("%q: rangeTemps gives %d temperatures, the server %v", s, len(ts), n)
		}
	}
}
