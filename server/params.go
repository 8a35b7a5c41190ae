package server

import (
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// Canonical parameters.
//
// Every response carries the canonical form of the parameters that
// produced it, and the cache keys results by (model hash, canonical
// parameters), so two requests equal in meaning share one entry however
// they are spelled: defaults are resolved (an unspecified unit is "thz"),
// options that do not apply are dropped (a width without Gaussian
// smearing), mesh components past the dimensionality are 1, and
// temperature lists and ranges expand to the same list. Real numbers are
// never rounded: the computation uses the exact float64 given (−0 as 0),
// and the key prints it in its shortest form that parses back to the same
// float64, so two requests share a key only when the computation sees the
// same numbers (a fitting client's 1e-12 change is a new computation).
//
// The form is "key=value" pairs joined by ";", in a fixed order per call.

// canonFloat is the value a real-valued parameter is computed with: x
// itself, with −0 made 0.
func canonFloat(x float64) float64 { return x + 0 } // −0 + 0 = +0

// fmtFloat prints a canonical number in its shortest round-trip form: the
// text parses back to exactly canonFloat(x), so the text identifies it.
func fmtFloat(x float64) string { return strconv.FormatFloat(canonFloat(x), 'g', -1, 64) }

// params builds a canonical parameter string.
type params struct{ b strings.Builder }

func (p *params) add(key, value string) {
	if p.b.Len() > 0 {
		p.b.WriteByte(';')
	}
	p.b.WriteString(key)
	p.b.WriteByte('=')
	p.b.WriteString(value)
}

func (p *params) addBool(key string, v bool) {
	if v {
		p.add(key, "true")
	} else {
		p.add(key, "false")
	}
}

func (p *params) String() string { return p.b.String() }

// unitName is the canonical name of a frequency unit.
func unitName(u physics.Unit) string { return u.String() }

func unitFromProto(u modegridv1.FrequencyUnit) physics.Unit {
	switch u {
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV:
		return physics.MeV
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1:
		return physics.CM1
	case modegridv1.FrequencyUnit_FREQUENCY_UNIT_RAD_PER_S:
		return physics.RadPerS
	default:
		return physics.THz
	}
}

// unitToProto is the explicit proto value of a unit (never UNSPECIFIED),
// so responses state their unit.
func unitToProto(u physics.Unit) modegridv1.FrequencyUnit {
	switch u {
	case physics.MeV:
		return modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV
	case physics.CM1:
		return modegridv1.FrequencyUnit_FREQUENCY_UNIT_CM1
	case physics.RadPerS:
		return modegridv1.FrequencyUnit_FREQUENCY_UNIT_RAD_PER_S
	default:
		return modegridv1.FrequencyUnit_FREQUENCY_UNIT_THZ
	}
}

// validUnit reports whether u is a known enum value.
func validUnit(u modegridv1.FrequencyUnit) bool {
	_, ok := modegridv1.FrequencyUnit_name[int32(u)]
	return ok
}

// meshString is "N1xN2xN3".
func meshString(m [3]int) string {
	return strconv.Itoa(m[0]) + "x" + strconv.Itoa(m[1]) + "x" + strconv.Itoa(m[2])
}

// gridParam is the canonical name of a grid spec: "mp:8x8x8",
// "mp-shifted:8x8x1" or "cells:10x1x1".
func gridParam(g mesh.GridSpec) string {
	switch {
	case g.Finite:
		return "cells:" + meshString(g.Mesh)
	case g.Shifted:
		return "mp-shifted:" + meshString(g.Mesh)
	default:
		return "mp:" + meshString(g.Mesh)
	}
}

// tempsParam prints a temperature list compactly: runs of three or more
// strictly increasing values t0 + i·step (as a range expands, rangeValue)
// as "t0:step:tn", others one by one, joined by ",". The text determines
// the list exactly: every number round-trips, and a run is the values
// rangeValue(t0, step, i) up to tn.
func tempsParam(ts []float64) string {
	var parts []string
	for i := 0; i < len(ts); {
		if i+2 < len(ts) {
			step := canonFloat(ts[i+1] - ts[i])
			j := i + 1
			for step > 0 && j < len(ts) && ts[j] > ts[j-1] && ts[j] == rangeValue(ts[i], step, j-i) {
				j++
			}
			if j-i >= 3 {
				parts = append(parts, fmtFloat(ts[i])+":"+fmtFloat(step)+":"+fmtFloat(ts[j-1]))
				i = j
				continue
			}
		}
		parts = append(parts, fmtFloat(ts[i]))
		i++
	}
	return strings.Join(parts, ",")
}

// rangeValue is the i-th temperature of a range, start + i·step rounded
// once (a fused multiply-add): the float64 nearest the exact value, with
// no error growing along the range and no rounding to decimal digits.
func rangeValue(start, step float64, i int) float64 {
	return canonFloat(math.FMA(float64(i), step, start))
}

// labelList is the sorted labels of a set of standard points, for
// messages.
func labelList(std map[string][3]float64) string {
	labels := make([]string, 0, len(std))
	for l := range std {
		labels = append(labels, l)
	}
	sort.Strings(labels)
	return strings.Join(labels, ", ")
}
