package main

import (
	"fmt"
	"strings"

	"codeberg.org/sbinet/npyio/npz"
)

// npzArray is one array read from a .npz: its shape and its numbers in C
// (row-major) order, whatever order the file stored them in.
type npzArray struct {
	shape []int
	f     []float64
	ints  []int64
	isInt bool
}

// npzFile reads the named arrays of a .npz and gathers every problem, so
// that one run names them all.
type npzFile struct {
	r        *npz.Reader
	problems []string
}

func (z *npzFile) problemf(format string, args ...any) {
	z.problems = append(z.problems, fmt.Sprintf(format, args...))
}

// has reports whether the archive holds the array name (numpy stores it as
// name.npy).
func (z *npzFile) has(name string) bool {
	for _, k := range z.r.Keys() {
		if k == name || k == name+".npy" {
			return true
		}
	}
	return false
}

// key is the archive member of array name.
func (z *npzFile) key(name string) string {
	for _, k := range z.r.Keys() {
		if k == name+".npy" {
			return k
		}
	}
	return name
}

// read returns array name as numbers: float64 (<f8) or, when integer is
// set, int64 or int32 (<i8, <i4). A missing array, another dtype or a
// read failure is a problem and a nil result.
func (z *npzFile) read(name string, integer bool) *npzArray {
	if !z.has(name) {
		z.problemf("%s: missing", name)
		return nil
	}
	key := z.key(name)
	h := z.r.Header(key)
	if h == nil {
		z.problemf("%s: unreadable header", name)
		return nil
	}
	a := &npzArray{shape: append([]int(nil), h.Descr.Shape...), isInt: integer}
	var err error
	typ := strings.Trim(h.Descr.Type, `'"`)
	switch dt := strings.TrimPrefix(strings.TrimPrefix(typ, "<"), "|"); {
	case !integer && dt == "f8":
		err = z.r.Read(key, &a.f)
	case integer && dt == "i8":
		err = z.r.Read(key, &a.ints)
	case integer && dt == "i4":
		var v []int32
		if err = z.r.Read(key, &v); err == nil {
			for _, x := range v {
				a.ints = append(a.ints, int64(x))
			}
		}
	case integer:
		z.problemf("%s: dtype %s, want int64 or int32 (little-endian)", name, typ)
		return nil
	default:
		z.problemf("%s: dtype %s, want float64 (little-endian)", name, typ)
		return nil
	}
	if err != nil {
		z.problemf("%s: %v", name, err)
		return nil
	}
	if h.Descr.Fortran {
		a.f, a.ints = toCOrder(a.f, a.shape), toCOrder(a.ints, a.shape)
	}
	return a
}

// toCOrder reorders column-major data of the given shape to row-major.
func toCOrder[T any](v []T, shape []int) []T {
	if len(v) == 0 || len(shape) < 2 {
		return v
	}
	out := make([]T, len(v))
	idx := make([]int, len(shape))
	for c := range v {
		// idx is the index of c in row-major order; f its column-major offset.
		f, stride := 0, 1
		for k := range shape {
			f += idx[k] * stride
			stride *= shape[k]
		}
		out[c] = v[f]
		for k := len(shape) - 1; k >= 0; k-- {
			if idx[k]++; idx[k] < shape[k] {
				break
			}
			idx[k] = 0
		}
	}
	return out
}

// shapeIs checks a's shape against want (−1 matches any length) and names
// the array and both shapes when they differ.
func (z *npzFile) shapeIs(name string, a *npzArray, want []int, wantText string) bool {
	if a == nil {
		return false
	}
	ok := len(a.shape) == len(want)
	for k := 0; ok && k < len(want); k++ {
		ok = want[k] < 0 || want[k] == a.shape[k]
	}
	if !ok {
		z.problemf("%s: shape %s, want %s", name, shapeText(a.shape), wantText)
	}
	return ok
}

func shapeText(s []int) string {
	parts := make([]string, len(s))
	for k, v := range s {
		parts[k] = fmt.Sprint(v)
	}
	return "(" + strings.Join(parts, ", ") + ")"
}
