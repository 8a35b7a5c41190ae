package server

import (
	"fmt"
	"math"

	"google.golang.org/protobuf/reflect/protoreflect"
)

// nonFinite returns the path of a NaN or ±Inf number (double or float
// field, single or repeated, at any depth) of m, as "points[3].s[17]"
// under prefix (the first met, in Range's order), or "" when every number
// is finite. No
// response may carry one: clients would print it as a number.
func nonFinite(m protoreflect.Message, prefix string) string {
	var at string
	m.Range(func(fd protoreflect.FieldDescriptor, v protoreflect.Value) bool {
		name := string(fd.Name())
		if prefix != "" {
			name = prefix + "." + name
		}
		switch {
		case fd.IsMap():
			return true // no response has a map of numbers
		case fd.IsList() && fd.Message() != nil:
			l := v.List()
			for i := 0; i < l.Len() && at == ""; i++ {
				at = nonFinite(l.Get(i).Message(), fmt.Sprintf("%s[%d]", name, i))
			}
		case fd.IsList() && isFloat(fd):
			l := v.List()
			for i := 0; i < l.Len(); i++ {
				if notFinite(l.Get(i).Float()) {
					at = fmt.Sprintf("%s[%d]", name, i)
					break
				}
			}
		case fd.Message() != nil:
			at = nonFinite(v.Message(), name)
		case isFloat(fd) && notFinite(v.Float()):
			at = name
		}
		return at == ""
	})
	return at
}

func isFloat(fd protoreflect.FieldDescriptor) bool {
	return fd.Kind() == protoreflect.DoubleKind || fd.Kind() == protoreflect.FloatKind
}

func notFinite(x float64) bool { return math.IsNaN(x) || math.IsInf(x, 0) }
