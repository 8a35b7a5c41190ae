package main

import (
	"math"
	"strconv"
	"strings"
	"testing"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// FuzzParseSamples: --samples never panics; every accepted sample has a
// known kind, a finite positive size (films: a finite non-zero normal),
// and printing it back in the flag's syntax (size in metres) parses to
// the same geometry.
func FuzzParseSamples(f *testing.F) {
	for _, s := range []string{"bulk", "film:100nm", "film:2.5um:1,0,0", "wire:50nm grain:1mm", "grain:1m;bulk", "film:0nm", "film:1nm:0,0,0",
		"wire", "grain:1e400nm", "film:1nm:1,2", "x:1nm", "  ", "grain:-3um", "film:10nm:NaN,1,1"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		if len(s) > fuzzMaxInput {
			return
		}
		gs, err := parseSamples(s, 0.25)
		if err != nil {
			checkErrMessage(t, s, err)
			return
		}
		var parts []string
		for _, g := range gs {
			switch g.GetKind() {
			case modegridv1.SampleKind_SAMPLE_KIND_BULK:
				parts = append(parts, "bulk")
				continue
			case modegridv1.SampleKind_SAMPLE_KIND_FILM, modegridv1.SampleKind_SAMPLE_KIND_WIRE, modegridv1.SampleKind_SAMPLE_KIND_GRAIN:
			default:
				t.Fatalf("%q: kind %v", s, g.GetKind())
			}
			if !(g.GetSizeM() > 0) || math.IsInf(g.GetSizeM(), 0) || g.GetSpecularity() != 0.25 {
				t.Fatalf("%q: size %v, specularity %v", s, g.GetSizeM(), g.GetSpecularity())
			}
			p := strings.ToLower(strings.TrimPrefix(g.GetKind().String(), "SAMPLE_KIND_")) + ":" + strconv.FormatFloat(g.GetSizeM(), 'g', -1, 64) + "m"
			if n := g.GetNormal(); g.GetKind() == modegridv1.SampleKind_SAMPLE_KIND_FILM {
				for _, x := range []float64{n.GetX(), n.GetY(), n.GetZ()} {
					if math.IsNaN(x) || math.IsInf(x, 0) {
						t.Fatalf("%q: normal %v", s, n)
					}
				}
				p += ":" + strconv.FormatFloat(n.GetX(), 'g', -1, 64) + "," + strconv.FormatFloat(n.GetY(), 'g', -1, 64) + "," + strconv.FormatFloat(n.GetZ(), 'g', -1, 64)
			}
			parts = append(parts, p)
		}
		again, err := parseSamples(strings.Join(parts, " "), 0.25)
		if err != nil || len(again) != len(gs) {
			t.Fatalf("%q printed as %q: %v", s, strings.Join(parts, " "), err)
		}
		for i := range gs {
			if again[i].GetKind() != gs[i].GetKind() || again[i].GetSizeM() != gs[i].GetSizeM() {
				t.Fatalf("%q: sample %d printed and parsed back as %v; want %v", s, i, again[i], gs[i])
			}
		}
	})
}
