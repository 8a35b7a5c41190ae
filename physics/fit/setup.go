// The free parameters resolved: paths, ties and bounds checked against
// the starting model.

package fit

import (
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
)

// member is one number of the model that moves with a free parameter:
// value = factor × the parameter.
type member struct {
	path   Path
	factor float64
}

// param is a free parameter as the fit moves it.
type param struct {
	name    string   // canonical path of the free number
	members []member // the free number itself (factor 1), then its ties
	start   float64
	lo, hi  float64 // effective bounds: the user's, within the model's force limit
	userLo  bool    // the lower bound was given (not only the force limit)
	userHi  bool
}

func (p *Problem) checkParams(vs *physics.Violations) { p.params(vs) }

// params resolves the free parameters and ties of p, adding what is wrong
// to vs (the returned list is then incomplete).
func (p *Problem) params(vs *physics.Violations) []param {
	c := p.Crystal
	if len(p.Free) == 0 {
		vs.Add("free", "at least one free parameter is required (a path such as springs[0].k_long)")
	}
	seen := map[string]string{} // canonical path → field that named it
	var out []param
	index := map[string]int{}
	for i, f := range p.Free {
		field := fmt.Sprintf("free[%d]", i)
		path, err := ParsePath(c, f.Path)
		if err != nil {
			vs.Add(field+".path", "%v", err)
			continue
		}
		name := path.String()
		if prev, ok := seen[name]; ok {
			vs.Add(field+".path", "%s is already named by %s", name, prev)
			continue
		}
		seen[name] = field + ".path"
		limit := paramLimit(c, path)
		pr := param{name: name, members: []member{{path, 1}}, start: path.Get(c), lo: -limit, hi: limit}
		if !checkBounds(vs, field, f, pr.start, limit) {
			continue
		}
		if f.HasLower {
			pr.lo, pr.userLo = f.Lower, true
		}
		if f.HasUpper {
			pr.hi, pr.userHi = f.Upper, true
		}
		index[name] = len(out)
		out = append(out, pr)
	}
	for i, t := range p.Ties {
		p.addTie(vs, fmt.Sprintf("ties[%d]", i), t, seen, index, out)
	}
	return out
}

// checkBounds checks the bounds of free parameter f, whose starting value
// is start.
func checkBounds(vs *physics.Violations, field string, f Free, start, limit float64) bool {
	ok := true
	for _, b := range []struct {
		has  bool
		v    float64
		name string
	}{{f.HasLower, f.Lower, "lower"}, {f.HasUpper, f.Upper, "upper"}} {
		if b.has && (!finite(b.v) || math.Abs(b.v) > limit) {
			vs.Add(field+"."+b.name, "must be a finite number within the parameter's limit ±%g (the model's force limit, or the largest Born charge in e), got %v", limit, b.v)
			ok = false
		}
	}
	if !ok {
		return false
	}
	if f.HasLower && f.HasUpper && !(f.Lower < f.Upper) {
		vs.Add(field+".upper", "must be greater than lower (%v), got %v", f.Lower, f.Upper)
		return false
	}
	if (f.HasLower && start < f.Lower) || (f.HasUpper && start > f.Upper) {
		vs.Add(field, "the starting value %v of %s lies outside its bounds [%s, %s]", start, f.Path, boundString(f.HasLower, f.Lower), boundString(f.HasUpper, f.Upper))
		return false
	}
	return true
}

func boundString(has bool, v float64) string {
	if !has {
		return "none"
	}
	return fmt.Sprint(v)
}

// addTie adds tie t to the free parameter it follows.
func (p *Problem) addTie(vs *physics.Violations, field string, t Tie, seen map[string]string, index map[string]int, params []param) {
	path, err := ParsePath(p.Crystal, t.Path)
	if err != nil {
		vs.Add(field+".path", "%v", err)
		return
	}
	name := path.String()
	if prev, ok := seen[name]; ok {
		vs.Add(field+".path", "%s is already named by %s: a tied parameter is neither free nor tied twice", name, prev)
		return
	}
	seen[name] = field + ".path"
	to, err := ParsePath(p.Crystal, t.To)
	if err != nil {
		vs.Add(field+".to", "%v", err)
		return
	}
	x, ok := index[to.String()]
	if !ok {
		vs.Add(field+".to", "%s is not a free parameter: a tie follows one of the free parameters", to.String())
		return
	}
	ratio := t.Ratio
	if ratio == 0 {
		ratio = 1
	}
	if !finite(ratio) || math.Abs(ratio) > 1e6 || math.Abs(ratio) < 1e-6 {
		vs.Add(field+".ratio", "must be 0 (equal) or a finite ratio with 1e-6 ≤ |ratio| ≤ 1e6, got %v", t.Ratio)
		return
	}
	pr := &params[x]
	if path.isCharge() != pr.members[0].path.isCharge() {
		vs.Add(field+".to", "%s and %s are of different sorts (a Born charge, in e, and a force constant): a tie joins numbers of one sort", name, to.String())
		return
	}
	limit := paramLimit(p.Crystal, path)
	pr.members = append(pr.members, member{path, ratio})
	// The tied number must stay within its limit too.
	pr.lo = math.Max(pr.lo, -limit/math.Abs(ratio))
	pr.hi = math.Min(pr.hi, limit/math.Abs(ratio))
}

// forceLimit is the largest |force constant| a model accepts, in its unit.
func forceLimit(c *physics.Crystal) float64 {
	if c.ForceUnit == physics.NPerM {
		return physics.MaxForceEVPerA2 * physics.EVPerA2InNPerM
	}
	return physics.MaxForceEVPerA2
}

// crystalAt returns a copy of base with every member of every parameter
// set from x.
func crystalAt(base *physics.Crystal, params []param, x []float64) *physics.Crystal {
	c := cloneForces(base)
	for j, pr := range params {
		for _, m := range pr.members {
			m.path.set(c, m.factor*x[j])
		}
	}
	return c
}
