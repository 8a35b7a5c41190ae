// Lattice types and their standard Brillouin-zone points.
//
// The type is recognised from the lattice vectors alone (any primitive
// basis, any orientation): sc, fcc, bcc and hexagonal in 3D; all five 2D
// nets (square, rectangular, centred rectangular, hexagonal, oblique); 1d. The labelled points of the 3D types
// are those of Setyawan & Curtarolo, Comput. Mater. Sci. 49, 299 (2010)
// (Tables for CUB, FCC, BCC and HEX), given there in fractional
// coordinates of the reciprocal vectors of their standard primitive cell
// (recalled from the paper, and checked against the Cartesian zone points
// in lattice_test.go).
// The engine finds that standard cell inside the caller's lattice — the
// choice of standard vectors closest to the caller's own — and converts
// the points to the caller's reciprocal basis, so for a lattice given in
// the standard setting the numbers are the paper's, and for any other
// setting they are the same points of the zone. The 2D and 1D points are
// the in-plane analogues (common practice): square Γ, X, M; rectangular
// Γ, X, Y, S; hexagonal Γ, M, K; 1D Γ, X. The zone of a centred
// rectangular or oblique net is a hexagon whose corners move with the
// cell's shape, so only Γ and the midpoints of its edges (fixed fractions of
// the reciprocal vectors) are built in: centred rectangular X (the edge
// across the long diagonal s₁+s₂ of the rhombic cell) and S (the edges
// across s₁ and s₂, one point by the net's mirror); oblique X, Y, S (the
// edges across b₁, b₂ and b₁+b₂ of the reduced cell with an acute angle,
// named as in the rectangular net it becomes at 90°).

package lattice

import (
	"math"
	"sort"
)

// TypeTol is the relative tolerance on lengths and on cosines of
// angles used to recognise a lattice type: 1e-4, loose enough for lattice
// vectors written with five or six digits (e.g. √3/2 as 0.86603).
const TypeTol = 1e-4

// Lattice type names returned by Detect.
const (
	SC          = "sc"
	FCC         = "fcc"
	BCC         = "bcc"
	Hexagonal   = "hexagonal"
	Square      = "square"
	Rectangular = "rectangular"
	CentredRect = "centred-rectangular"
	Oblique     = "oblique"
	Linear      = "1d"
)

// StandardFrac returns a fresh copy of the built-in points of a lattice
// type in fractional coordinates of the reciprocal vectors of the type's
// standard primitive cell (nil for an unknown type).
func StandardFrac(typ string) map[string][3]float64 {
	std, ok := standardFrac[typ]
	if !ok {
		return nil
	}
	out := make(map[string][3]float64, len(std))
	for k, v := range std {
		out[k] = v
	}
	return out
}

// standardFrac lists the points in fractional coordinates of the reciprocal
// vectors of each type's standard primitive cell (see standardCell).
var standardFrac = map[string]map[string][3]float64{
	// Setyawan & Curtarolo (2010), CUB.
	SC: {"G": {}, "M": {0.5, 0.5, 0}, "R": {0.5, 0.5, 0.5}, "X": {0, 0.5, 0}},
	// Setyawan & Curtarolo (2010), FCC.
	FCC: {"G": {}, "K": {3.0 / 8, 3.0 / 8, 3.0 / 4}, "L": {0.5, 0.5, 0.5},
		"U": {5.0 / 8, 1.0 / 4, 5.0 / 8}, "W": {0.5, 0.25, 0.75}, "X": {0.5, 0, 0.5}},
	// Setyawan & Curtarolo (2010), BCC.
	BCC: {"G": {}, "H": {0.5, -0.5, 0.5}, "P": {0.25, 0.25, 0.25}, "N": {0, 0, 0.5}},
	// Setyawan & Curtarolo (2010), HEX (a₁, a₂ at 120°, a₃ = c ẑ); in 2D
	// the in-plane points only.
	Hexagonal: {"G": {}, "A": {0, 0, 0.5}, "H": {1.0 / 3, 1.0 / 3, 0.5},
		"K": {1.0 / 3, 1.0 / 3, 0}, "L": {0.5, 0, 0.5}, "M": {0.5, 0, 0}},
	Square:      {"G": {}, "X": {0.5, 0, 0}, "M": {0.5, 0.5, 0}},
	Rectangular: {"G": {}, "X": {0.5, 0, 0}, "Y": {0, 0.5, 0}, "S": {0.5, 0.5, 0}},
	// Rhombic cell s₁, s₂ of equal length at an acute angle (b₁·b₂ < 0, so
	// the zone's edges lie across ±b₁, ±b₂, ±(b₁+b₂)).
	CentredRect: {"G": {}, "X": {0.5, 0.5, 0}, "S": {0.5, 0, 0}},
	// Reduced cell at an acute angle, the same three pairs of edges.
	Oblique: {"G": {}, "X": {0.5, 0, 0}, "Y": {0, 0.5, 0}, "S": {0.5, 0.5, 0}},
	Linear:  {"G": {}, "X": {0.5, 0, 0}},
}

// Detect recognises the type of the lattice spanned by the first d rows
// of lat (Å) and returns it with its standard points in fractional
// coordinates of lat's own reciprocal vectors; "G" (Γ) is always present,
// and an unrecognised lattice gives "" and Γ alone.
func Detect(lat [3][3]float64, d int) (string, map[string][3]float64) {
	user := make([][3]float64, d)
	copy(user, lat[:d])
	typ, frames := "", [][][3]float64(nil)
	switch d {
	case 1:
		typ, frames = Linear, [][][3]float64{{user[0]}}
	case 2:
		typ, frames = classify2D(user)
	case 3:
		typ, frames = classify3D(Reciprocal(lat, d), user)
	}
	pts := map[string][3]float64{"G": {}}
	if typ == "" || len(frames) == 0 {
		return "", pts
	}
	// The standard cell closest to the caller's vectors.
	best, bestScore := frames[0], math.Inf(-1)
	for _, f := range frames {
		var s float64
		for k := range f {
			s += Dot(f[k], user[k])
		}
		if s > bestScore+1e-9*math.Abs(s) {
			best, bestScore = f, s
		}
	}
	var std [3][3]float64
	copy(std[:], best)
	recip := Reciprocal(std, d)
	for label, f := range standardFrac[typ] {
		if d == 2 && f[2] != 0 {
			continue // 3D-only points (A, H, L of HEX)
		}
		var qc [3]float64
		for k := 0; k < d; k++ {
			for a := 0; a < 3; a++ {
				qc[a] += f[k] * recip[k][a]
			}
		}
		var q [3]float64
		for k := 0; k < d; k++ {
			q[k] = snap(Dot(qc, user[k]) / (2 * math.Pi))
		}
		pts[label] = q
	}
	return typ, pts
}

// snap rounds x to the nearest multiple of 1/48 when within 1e-9: every
// standard coordinate is such a multiple in the standard setting, and
// integer changes of basis keep it so.
func snap(x float64) float64 {
	r := math.Round(x*48) / 48
	if math.Abs(x-r) < 1e-9 {
		return r
	}
	return x
}

func near(a, b, scale float64) bool { return math.Abs(a-b) <= TypeTol*scale }

// reduceGreedy reduces a basis by repeated size reduction against every
// other vector until no vector gets shorter (greedy reduction, Minkowski-
// reduced for d ≤ 3: Nguyen & Stehlé, ACM Trans. Algorithms 5, 46 (2009)).
func reduceGreedy(u [][3]float64) {
	for changed := true; changed; {
		changed = false
		for i := range u {
			for j := range u {
				if i == j {
					continue
				}
				mu := math.Round(Dot(u[i], u[j]) / Dot(u[j], u[j]))
				if mu == 0 {
					continue
				}
				c := Sub(u[i], Scale(u[j], mu))
				if Dot(c, c) < Dot(u[i], u[i])*(1-1e-12) {
					u[i] = c
					changed = true
				}
			}
		}
	}
	sort.Slice(u, func(a, b int) bool { return Dot(u[a], u[a]) < Dot(u[b], u[b]) })
}

// classify2D recognises the five 2D nets and lists the candidate standard
// cells (s₁, s₂).
func classify2D(user [][3]float64) (string, [][][3]float64) {
	u := [][3]float64{user[0], user[1]}
	reduceGreedy(u)
	l1, l2 := Norm(u[0]), Norm(u[1])
	cos := Dot(u[0], u[1]) / (l1 * l2)
	var frames [][][3]float64
	switch {
	case near(l1, l2, l2) && math.Abs(cos) <= TypeTol:
		for _, s1 := range [][3]float64{u[0], Scale(u[0], -1), u[1], Scale(u[1], -1)} {
			for _, s2 := range [][3]float64{u[0], Scale(u[0], -1), u[1], Scale(u[1], -1)} {
				if math.Abs(Dot(s1, s2)) <= TypeTol*l1*l1 {
					frames = append(frames, [][3]float64{s1, s2})
				}
			}
		}
		return Square, frames
	case math.Abs(cos) <= TypeTol:
		for _, s1 := range [][3]float64{u[0], Scale(u[0], -1)} {
			for _, s2 := range [][3]float64{u[1], Scale(u[1], -1)} {
				frames = append(frames, [][3]float64{s1, s2})
			}
		}
		return Rectangular, frames
	case near(l1, l2, l2) && near(math.Abs(cos), 0.5, 1):
		// The six shortest vectors; standard pairs are at 120°.
		w := u[1]
		if cos > 0 {
			w = Scale(w, -1)
		}
		six := [][3]float64{u[0], w, Add(u[0], w)}
		for _, v := range six[:3] {
			six = append(six, Scale(v, -1))
		}
		for _, s1 := range six {
			for _, s2 := range six {
				if near(Dot(s1, s2)/(l1*l1), -0.5, 1) {
					frames = append(frames, [][3]float64{s1, s2})
				}
			}
		}
		return Hexagonal, frames
	}
	// The remaining nets, with the reduced pair at an acute angle.
	if cos < 0 {
		u[1] = Scale(u[1], -1)
	}
	switch {
	case near(l1, l2, l2):
		// A rhombic reduced cell: centred rectangular.
		return CentredRect, pairFrames(u[0], u[1], true)
	case near(2*Dot(u[0], u[1]), l1*l1, l1*l1):
		// u₂ projects onto half of u₁: u₂ and u₂ − u₁ are the rhombic cell.
		return CentredRect, pairFrames(u[1], Sub(u[1], u[0]), true)
	}
	return Oblique, pairFrames(u[0], u[1], false)
}

// pairFrames lists the cells (s₁, s₂) and (−s₁, −s₂), and when swap also
// (s₂, s₁) and (−s₂, −s₁): the settings of a centred rectangular or oblique
// net with the same standard points.
func pairFrames(s1, s2 [3]float64, swap bool) [][][3]float64 {
	f := [][][3]float64{{s1, s2}, {Scale(s1, -1), Scale(s2, -1)}}
	if swap {
		f = append(f, [][3]float64{s2, s1}, [][3]float64{Scale(s2, -1), Scale(s1, -1)})
	}
	return f
}

// classify3D recognises sc, fcc, bcc and hexagonal lattices and lists the
// candidate standard primitive cells.
func classify3D(recip [3][3]float64, user [][3]float64) (string, [][][3]float64) {
	u := [][3]float64{user[0], user[1], user[2]}
	reduceGreedy(u)
	ls := lattice3D{recip: recip, vol: math.Abs(Dot(u[0], Cross(u[1], u[2])))}
	ls.vecs, ls.shells = shortVectors(u)
	if typ, frames := ls.cubic(); typ != "" {
		return typ, frames
	}
	if frames := ls.hexagonal(); len(frames) > 0 {
		return Hexagonal, frames
	}
	return "", nil
}

// lattice3D holds what classify3D learns about a 3D lattice.
type lattice3D struct {
	recip  [3][3]float64 // reciprocal vectors, 2π convention
	vol    float64       // primitive cell volume
	vecs   [][3]float64  // short lattice vectors, shortest first
	shells []float64     // the distinct lengths of vecs, ascending
}

// shortVectors returns the integer combinations (each coefficient in
// [−2, 2], not all 0) of the reduced basis u, shortest first, and their
// distinct lengths.
func shortVectors(u [][3]float64) (vecs [][3]float64, shells []float64) {
	for a := -2; a <= 2; a++ {
		for b := -2; b <= 2; b++ {
			for c := -2; c <= 2; c++ {
				if a == 0 && b == 0 && c == 0 {
					continue
				}
				v := Add(Add(Scale(u[0], float64(a)), Scale(u[1], float64(b))), Scale(u[2], float64(c)))
				vecs = append(vecs, v)
			}
		}
	}
	sort.Slice(vecs, func(i, j int) bool { return Dot(vecs[i], vecs[i]) < Dot(vecs[j], vecs[j]) })
	for _, v := range vecs {
		l := Norm(v)
		if len(shells) == 0 || !near(l, shells[len(shells)-1], l) {
			shells = append(shells, l)
		}
	}
	return vecs, shells
}

// isLattice reports whether v is a lattice vector.
func (ls *lattice3D) isLattice(v [3]float64) bool {
	for k := 0; k < 3; k++ {
		f := Dot(v, ls.recip[k]) / (2 * math.Pi)
		if math.Abs(f-math.Round(f)) > TypeTol {
			return false
		}
	}
	return true
}

// ofLength returns the short vectors of length l.
func (ls *lattice3D) ofLength(l float64) [][3]float64 {
	var out [][3]float64
	for _, v := range ls.vecs {
		if near(Norm(v), l, l) {
			out = append(out, v)
		}
	}
	return out
}

// cubic looks for three orthogonal lattice vectors of one length a (the
// first shell for sc, the second for fcc and bcc) spanning a cube of
// volume a³ = V, 2V or 4V with the body or face centres on the lattice,
// and returns the type and its standard cells, or "".
func (ls *lattice3D) cubic() (string, [][][3]float64) {
	for si := 0; si < len(ls.shells) && si < 3; si++ {
		a := ls.shells[si]
		e, found := ls.cubeAxes(a)
		if !found {
			continue
		}
		typ := ls.cubicType(a, e)
		if typ == "" {
			continue
		}
		var frames [][][3]float64
		for _, f := range cubeFrames(e) {
			frames = append(frames, standardCell(typ, f))
		}
		return typ, frames
	}
	return "", nil
}

// cubeAxes finds two orthogonal short vectors of length a whose cross
// product over a is a lattice vector too.
func (ls *lattice3D) cubeAxes(a float64) ([3][3]float64, bool) {
	set := ls.ofLength(a)
	for _, e1 := range set {
		for _, e2 := range set {
			if math.Abs(Dot(e1, e2)) > TypeTol*a*a {
				continue
			}
			e3 := Scale(Cross(e1, e2), 1/a)
			if ls.isLattice(e3) {
				return [3][3]float64{e1, e2, e3}, true
			}
		}
	}
	return [3][3]float64{}, false
}

// cubicType names the cubic lattice with cube axes e of length a from the
// cube's volume in primitive cells and which centres are lattice points,
// or returns "".
func (ls *lattice3D) cubicType(a float64, e [3][3]float64) string {
	ratio := a * a * a / ls.vol
	half := func(v [3]float64) bool { return ls.isLattice(Scale(v, 0.5)) }
	switch {
	case near(ratio, 1, 1):
		return SC
	case near(ratio, 2, 2) && half(Add(Add(e[0], e[1]), e[2])):
		return BCC
	case near(ratio, 4, 4) && half(Add(e[0], e[1])) && half(Add(e[1], e[2])) && half(Add(e[0], e[2])):
		return FCC
	}
	return ""
}

// hexagonal lists every cell of two vectors of one length at 120° (no
// longer than the third shell) and a third orthogonal to both, spanning
// a cell of volume V.
func (ls *lattice3D) hexagonal() [][][3]float64 {
	var frames [][][3]float64
	limit := math.Inf(1)
	if len(ls.shells) > 2 {
		limit = ls.shells[2]
	}
	for _, v1 := range ls.vecs {
		l := Norm(v1)
		if l > limit*(1+TypeTol) {
			break
		}
		for _, v2 := range ls.vecs {
			if !near(Norm(v2), l, l) || !near(Dot(v1, v2)/(l*l), -0.5, 1) {
				continue
			}
			frames = append(frames, ls.hexCells(v1, v2, l)...)
		}
	}
	return frames
}

// hexCells completes the basal pair v1, v2 (of length l) with every short
// vector orthogonal to both that gives a primitive cell.
func (ls *lattice3D) hexCells(v1, v2 [3]float64, l float64) [][][3]float64 {
	var frames [][][3]float64
	for _, v3 := range ls.vecs {
		c := Norm(v3)
		if math.Abs(Dot(v1, v3)) > TypeTol*l*c || math.Abs(Dot(v2, v3)) > TypeTol*l*c {
			continue
		}
		if near(math.Abs(Dot(v1, Cross(v2, v3))), ls.vol, ls.vol) {
			frames = append(frames, [][3]float64{v1, v2, v3})
		}
	}
	return frames
}

// cubeFrames returns the 48 signed permutations of the cube axes e.
func cubeFrames(e [3][3]float64) [][3][3]float64 {
	var out [][3][3]float64
	perms := [6][3]int{{0, 1, 2}, {0, 2, 1}, {1, 0, 2}, {1, 2, 0}, {2, 0, 1}, {2, 1, 0}}
	for _, p := range perms {
		for s := 0; s < 8; s++ {
			var f [3][3]float64
			for k := 0; k < 3; k++ {
				sign := 1.0
				if s>>k&1 == 1 {
					sign = -1
				}
				f[k] = Scale(e[p[k]], sign)
			}
			out = append(out, f)
		}
	}
	return out
}

// standardCell returns the standard primitive vectors of Setyawan &
// Curtarolo (2010) for a cubic type, on the cube axes f (each of length a):
// CUB a f_k; FCC (f₂+f₃)/2, (f₁+f₃)/2, (f₁+f₂)/2; BCC (−f₁+f₂+f₃)/2,
// (f₁−f₂+f₃)/2, (f₁+f₂−f₃)/2.
func standardCell(typ string, f [3][3]float64) [][3]float64 {
	switch typ {
	case FCC:
		return [][3]float64{Scale(Add(f[1], f[2]), 0.5), Scale(Add(f[0], f[2]), 0.5), Scale(Add(f[0], f[1]), 0.5)}
	case BCC:
		return [][3]float64{
			Scale(Add(Sub(f[1], f[0]), f[2]), 0.5),
			Scale(Add(Sub(f[0], f[1]), f[2]), 0.5),
			Scale(Sub(Add(f[0], f[1]), f[2]), 0.5),
		}
	default:
		return [][3]float64{f[0], f[1], f[2]}
	}
}
