package scatter

import (
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
)

// Frame is the coordinate frame in which a Q is given.
type Frame int

// Frames. Fractional is the zero value.
const (
	// Fractional: coordinates of the model's reciprocal lattice vectors b_k
	// (reciprocal-lattice units of the model's own cell).
	Fractional Frame = iota
	// Cartesian: Å⁻¹ (2π included), the model's Cartesian axes.
	Cartesian
	// Conventional: (h, k, l) in units of 2π/a along the Cartesian axes, a
	// the conventional cubic lattice constant (Å) given with it; for a
	// primitive fcc or bcc cell these are the conventional cube's
	// reciprocal-lattice units.
	Conventional
)

// QConv converts Q from a frame to the model's fractional coordinates.
type QConv struct {
	Frame Frame
	A     float64 // conventional lattice constant, Å (Conventional only)
}

// MaxQInvA bounds |Q| in Å⁻¹ (far beyond any measurement: 1000 Å⁻¹).
const MaxQInvA = 1e3

// ToFrac converts v to fractional coordinates of m's reciprocal lattice.
// A Cartesian Q of a crystal of fewer than three dimensions must lie in
// the span of its reciprocal vectors. field names the violations.
func (c QConv) ToFrac(m *physics.Model, v [3]float64, field string, vs *physics.Violations) [3]float64 {
	for k, x := range v {
		if !(math.Abs(x) <= 1e6) {
			vs.Add(fmt.Sprintf("%s.q%d", field, k+1), "must be a finite number within ±1e6, got %v", x)
			return [3]float64{}
		}
	}
	var qf [3]float64
	switch c.Frame {
	case Fractional:
		qf = v
		for k := m.Dim(); k < 3; k++ {
			if v[k] != 0 {
				vs.Add(fmt.Sprintf("%s.q%d", field, k+1), "must be 0 for a %d-dimensional crystal, got %v", m.Dim(), v[k])
			}
		}
	case Cartesian, Conventional:
		qc := v
		if c.Frame == Conventional {
			if !(c.A > 0 && c.A <= 1e4) {
				vs.Add("conventional_a", "the conventional lattice constant must be in (0, 1e4] Å, got %v", c.A)
				return [3]float64{}
			}
			for a := range qc {
				qc[a] *= 2 * math.Pi / c.A
			}
		}
		lat := m.Lattice()
		for k := 0; k < m.Dim(); k++ {
			qf[k] = (qc[0]*lat[k][0] + qc[1]*lat[k][1] + qc[2]*lat[k][2]) / (2 * math.Pi)
		}
		back := cartOf(m.Reciprocal(), qf)
		d := math.Hypot(math.Hypot(back[0]-qc[0], back[1]-qc[1]), back[2]-qc[2])
		if d > 1e-9*math.Max(1, math.Hypot(math.Hypot(qc[0], qc[1]), qc[2])) {
			vs.Add(field, "Q = %v Å⁻¹ has a component of %.3g Å⁻¹ outside the reciprocal space of this %d-dimensional crystal", qc, d, m.Dim())
		}
	default:
		vs.Add("frame", "unknown frame %d", int(c.Frame))
	}
	if qn := norm(cartOf(m.Reciprocal(), qf)); !(qn <= MaxQInvA) {
		vs.Add(field, "|Q| = %.4g Å⁻¹ is over the bound %g Å⁻¹", qn, MaxQInvA)
	}
	return qf
}

func cartOf(recip [3][3]float64, qf [3]float64) [3]float64 {
	var q [3]float64
	for k := 0; k < 3; k++ {
		for a := 0; a < 3; a++ {
			q[a] += qf[k] * recip[k][a]
		}
	}
	return q
}

func norm(v [3]float64) float64 { return math.Sqrt(v[0]*v[0] + v[1]*v[1] + v[2]*v[2]) }

// QSample is one Q of a single-crystal computation.
type QSample struct {
	Q            [3]float64 // fractional
	DistanceInvA float64    // along a path (0 otherwise)
	Label        string     // a path corner's label, else ""
	U, V         float64    // slice coordinates (slices only)
}

// PathCorner is a corner of a Q path, already fractional.
type PathCorner struct {
	Q           [3]float64
	Label       string
	BreakBefore bool // start a new piece here (no segment from the previous corner)
}

// MaxQSamples bounds the Q points of one single-crystal computation.
const MaxQSamples = 1_000_000

// SamplePath places n samples (at least one per corner) along the
// segments between corners by their Cartesian length; DistanceInvA is the
// distance from the start (breaks add nothing).
func SamplePath(m *physics.Model, corners []PathCorner, n int) []QSample {
	recip := m.Reciprocal()
	var total float64
	seg := make([]float64, len(corners))
	for i := 1; i < len(corners); i++ {
		if corners[i].BreakBefore {
			continue
		}
		a, b := cartOf(recip, corners[i-1].Q), cartOf(recip, corners[i].Q)
		seg[i] = norm([3]float64{b[0] - a[0], b[1] - a[1], b[2] - a[2]})
		total += seg[i]
	}
	inner := max(0, n-len(corners))
	var out []QSample
	dist := 0.0
	for i, c := range corners {
		if i > 0 && !c.BreakBefore {
			steps := 1
			if total > 0 {
				steps = max(1, int(math.Round(float64(inner)*seg[i]/total))+1)
			}
			a := corners[i-1].Q
			for s := 1; s < steps; s++ {
				t := float64(s) / float64(steps)
				var q [3]float64
				for k := range q {
					q[k] = a[k] + t*(c.Q[k]-a[k])
				}
				out = append(out, QSample{Q: q, DistanceInvA: dist + t*seg[i]})
			}
			dist += seg[i]
		}
		out = append(out, QSample{Q: c.Q, DistanceInvA: dist, Label: c.Label})
	}
	return out
}

// Slice is a plane of Q: Q = Origin + u·U + v·V (fractional) for NU values
// of u evenly from U0 to U1 and NV values of v from V0 to V1.
type Slice struct {
	Origin, U, V   [3]float64
	U0, U1, V0, V1 float64
	NU, NV         int
}

// Samples lists the slice's points, u fastest.
func (s Slice) Samples() []QSample {
	out := make([]QSample, 0, s.NU*s.NV)
	at := func(lo, hi float64, i, n int) float64 {
		if n == 1 {
			return lo
		}
		return lo + (hi-lo)*float64(i)/float64(n-1)
	}
	for j := 0; j < s.NV; j++ {
		v := at(s.V0, s.V1, j, s.NV)
		for i := 0; i < s.NU; i++ {
			u := at(s.U0, s.U1, i, s.NU)
			var q [3]float64
			for k := range q {
				q[k] = s.Origin[k] + u*s.U[k] + v*s.V[k]
			}
			out = append(out, QSample{Q: q, U: u, V: v})
		}
	}
	return out
}
