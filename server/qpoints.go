package server

import (
	"crypto/sha256"
	"encoding/binary"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// qset is a parsed q-point set: an explicit list or a regular grid.
type qset struct {
	list  []mesh.QPoint // explicit points (weight 1), nil for a grid
	grid  mesh.GridSpec // when list is nil
	count int
	// dirs are the directions of approach of a list's Γ points
	// (fractional reciprocal; zero elsewhere), nil when none was given.
	dirs [][3]float64
}

// param is the canonical description of the set. A list is named by its
// length and the full SHA-256 of its exact coordinates (a shorter digest
// would let two different lists share a cache key).
func (q *qset) param() string {
	if q.list == nil {
		return gridParam(q.grid)
	}
	h := sha256.New()
	var b [8]byte
	for _, p := range q.list {
		for _, v := range p.Q {
			binary.LittleEndian.PutUint64(b[:], math.Float64bits(v)) // exact bits (−0 made 0 on parsing)
			h.Write(b[:])
		}
	}
	if q.dirs != nil {
		h.Write([]byte("gamma_directions"))
		for _, d := range q.dirs {
			for _, v := range d {
				binary.LittleEndian.PutUint64(b[:], math.Float64bits(v))
				h.Write(b[:])
			}
		}
	}
	return fmt.Sprintf("list:%d:sha256-%x", len(q.list), h.Sum(nil))
}

// points lists the set's points with their weights, in order; a grid's
// components past the dimensionality dim are 0, shifted or not.
func (q *qset) points(dim int) []mesh.QPoint {
	if q.list != nil {
		return q.list
	}
	pts := q.grid.Points()
	for i := range pts { // the spec is not normalised: no shift past d
		for k := dim; k < 3; k++ {
			pts[i].Q[k] = 0
		}
	}
	return pts
}

// parseQSet checks a q-point set against the caps and, when dim > 0, the
// crystal's dimensionality, adding every problem to vs under field.
// allowList says whether an explicit list is acceptable.
func (s *Service) parseQSet(set *modegridv1.QPointSet, dim int, field string, allowList bool, vs *violations) *qset {
	switch x := set.GetSet().(type) {
	case *modegridv1.QPointSet_List:
		if !allowList {
			vs.Add(field+".list", "a Monkhorst–Pack grid or a finite crystal is required here, not an explicit list")
			return nil
		}
		pts := x.List.GetPoints()
		f := field + ".list.points"
		if len(pts) == 0 {
			vs.Add(f, "at least one q-point is required")
			return nil
		}
		if len(pts) > s.cfg.MaxQPoints {
			vs.Add(f, "%d q-points exceed this server's cap max-qpoints=%d", len(pts), s.cfg.MaxQPoints)
			return nil
		}
		out := &qset{list: make([]mesh.QPoint, len(pts)), count: len(pts)}
		bad := 0
		for i, p := range pts {
			q := [3]float64{canonFloat(p.GetQ1()), canonFloat(p.GetQ2()), canonFloat(p.GetQ3())} // as keyed: −0 is 0
			for k, v := range q {
				if bad >= 20 {
					break // enough to see the pattern in a huge list
				}
				switch {
				case !(math.Abs(v) <= physics.MaxQ):
					vs.Add(fmt.Sprintf("%s[%d].q%d", f, i, k+1), qRangeMsg, v)
					bad++
				case dim > 0 && k >= dim && v != 0:
					vs.Add(fmt.Sprintf("%s[%d].q%d", f, i, k+1), "must be 0 for a %d-dimensional crystal, got %v", dim, v)
					bad++
				}
			}
			out.list[i] = mesh.QPoint{Q: q, Weight: 1}
		}
		out.dirs = gammaDirections(x.List, out.list, dim, field+".list.gamma_directions", vs)
		return out
	case *modegridv1.QPointSet_Grid:
		g := s.parseMesh(x.Grid.GetMesh(), dim, field+".grid.mesh", vs)
		g.Shifted = x.Grid.GetShifted()
		return &qset{grid: g, count: g.Count()}
	case *modegridv1.QPointSet_Cells:
		g := s.parseMesh(x.Cells.GetCells(), dim, field+".cells.cells", vs)
		g.Finite = true
		return &qset{grid: g, count: g.Count()}
	default:
		vs.Add(field, "a q-point set is required (list, grid or cells)")
		return nil
	}
}

// qRangeMsg is the violation text of a q component out of the engine's
// domain (physics.MaxQ).
var qRangeMsg = fmt.Sprintf("must be a finite number within ±%g reciprocal-lattice units (D(q) is periodic: reduce q modulo 1), got %%v", physics.MaxQ)

// parseMesh checks mesh divisions: 1 to 3 numbers, each ≥ 1, 1 past the
// dimensionality (absent components are 1), their product within the cap.
func (s *Service) parseMesh(divs []uint32, dim int, field string, vs *violations) mesh.GridSpec {
	g := mesh.GridSpec{Mesh: [3]int{1, 1, 1}}
	if len(divs) == 0 || len(divs) > 3 {
		vs.Add(field, "must have 1 to 3 numbers (one per lattice vector), got %d", len(divs))
		return g
	}
	ok := true
	for k, n := range divs {
		switch {
		case n < 1:
			vs.Add(fmt.Sprintf("%s[%d]", field, k), "must be ≥ 1, got %d", n)
			ok = false
		case dim > 0 && k >= dim && n != 1:
			vs.Add(fmt.Sprintf("%s[%d]", field, k), "must be 1 (or absent) for a %d-dimensional crystal, got %d", dim, n)
			ok = false
		case n > uint32(s.cfg.MaxQPoints):
			vs.Add(fmt.Sprintf("%s[%d]", field, k), "%d divisions exceed this server's cap max-qpoints=%d", n, s.cfg.MaxQPoints)
			ok = false
		default:
			g.Mesh[k] = int(n)
		}
	}
	if dim > 0 && len(divs) < dim {
		vs.Add(field, "must have %d numbers for a %d-dimensional crystal, got %d", dim, dim, len(divs))
		ok = false
	}
	if ok {
		// In floating point: three divisions each within the cap can
		// overflow an int (2²²·2²²·2²² wraps to 0), and a wrapped product
		// would pass the cap and make the points list unbounded.
		if n := float64(g.Mesh[0]) * float64(g.Mesh[1]) * float64(g.Mesh[2]); n > float64(s.cfg.MaxQPoints) {
			vs.Add(field, "%s is %s q-points, over this server's cap max-qpoints=%d", meshString(g.Mesh), countString(n), s.cfg.MaxQPoints)
		}
	}
	return g
}

// countString prints a count computed in floating point: whole digits up
// to 10¹⁵, three significant digits beyond.
func countString(n float64) string {
	if n < 1e15 {
		return fmt.Sprintf("%.0f", n)
	}
	return fmt.Sprintf("%.3g", n)
}

// gammaDirections parses a list's directions of approach at Γ: none, or
// one per point, finite (within ±MaxQ like q) and zero at points that are
// not Γ (a direction there would mean nothing). Nil when none is given or
// all are zero.
func gammaDirections(l *modegridv1.QPointList, pts []mesh.QPoint, dim int, f string, vs *violations) [][3]float64 {
	ds := l.GetGammaDirections()
	if len(ds) == 0 {
		return nil
	}
	if len(ds) != len(pts) {
		vs.Add(f, "must be empty or have one direction per point (%d), got %d", len(pts), len(ds))
		return nil
	}
	out := make([][3]float64, len(ds))
	given := false
	for i, d := range ds {
		v := [3]float64{canonFloat(d.GetQ1()), canonFloat(d.GetQ2()), canonFloat(d.GetQ3())}
		for k, x := range v {
			switch {
			case !(math.Abs(x) <= physics.MaxQ):
				vs.Add(fmt.Sprintf("%s[%d].q%d", f, i, k+1), qRangeMsg, x)
			case dim > 0 && k >= dim && x != 0:
				vs.Add(fmt.Sprintf("%s[%d].q%d", f, i, k+1), "must be 0 for a %d-dimensional crystal, got %v", dim, x)
			}
		}
		if v != ([3]float64{}) && !physics.IsGamma(pts[i].Q) {
			vs.Add(fmt.Sprintf("%s[%d]", f, i), "points[%d] is not Γ: a direction of approach applies only at Γ (a reciprocal lattice vector); give 0 here", i)
		}
		out[i] = v
		given = given || v != [3]float64{}
	}
	if !given {
		return nil
	}
	return out
}
