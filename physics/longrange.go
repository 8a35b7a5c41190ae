// Long-range terms of the dynamical matrix and the polar data they come
// from. The core validates and compiles a crystal's Born effective charges
// and high-frequency dielectric tensor (they are part of the model and its
// hash); the dipole–dipole term they imply is built above the core, by
// physics/polar, through Options.LongRange, and added to every D(q) where
// D(q) is assembled (dynmat.go): the core never imports polar.

package physics

import (
	"context"
	"errors"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics/lattice"
)

// LongRange is a term of the dynamical matrix that short-range force
// constants cannot hold: physics/polar's dipole–dipole (Ewald) sum. Its
// D(q) is not analytic at Γ: there it depends on the direction from which
// q approaches Γ. A Model with a long-range term adds it to D(q) wherever
// D(q) is assembled (modes, lists, paths, grids, the symmetry test) and
// its derivative to ∂D/∂q (group velocities).
//
// Every method must be safe for concurrent use.
type LongRange interface {
	// AddTo adds the term at q (fractional reciprocal coordinates) to the
	// lower triangle of a (row-major, n×n with n = Model.ModeCount(),
	// eV/Å²/amu, the cell phase convention of doc.go); the strict upper
	// triangle is left as it is. At a reciprocal lattice vector (IsGamma)
	// dir is the Cartesian direction from which q approaches it (any
	// length): the non-analytic part is taken in that limit; a zero dir
	// leaves it out (the analytic part only). If stop is not nil it is
	// polled now and then, and AddTo returns false (a unfinished) when it
	// says so.
	AddTo(q, dir [3]float64, a []complex128, stop func() bool) bool
	// AddGradTo adds ∂/∂q_α of the term (α Cartesian, q in Å⁻¹; eV/Å²/amu·Å)
	// to the lower triangles of g[α]. At a reciprocal lattice vector the
	// non-analytic part, whose derivative is zero along the direction of
	// approach and undefined across it, is left out. stop as for AddTo.
	AddGradTo(q [3]float64, g *[3][]complex128, stop func() bool) bool
	// Scale bounds the size of the term's contribution to any element of
	// D(q) summed over a row (eV/Å²/amu), and Terms is the number of terms
	// summed into one element: together the rounding of the term, which
	// widens the model's eigenvalue tolerance (EigenTol).
	Scale() float64
	Terms() int
	// FlopsPerQ is the work of one AddTo (floating-point operations), for
	// the cost estimates (GridSize.LongRangeFlops).
	FlopsPerQ() float64
	// Method names the method, its version and its parameters: it is part
	// of the model hash.
	Method() string
}

// LongRangeBuilder builds the long-range term of a compiled model from its
// polar data (BornCharges, EpsilonInf and the geometry). physics/polar's
// Builder is one. It returns ctx.Err() when ctx ends first.
type LongRangeBuilder func(ctx context.Context, m *Model) (LongRange, error)

// ErrNoLongRangeBuilder is returned by Compile for a crystal with Born
// effective charges when Options.LongRange is nil: without the
// dipole–dipole term such a model would give wrong frequencies.
var ErrNoLongRangeBuilder = errors.New("physics: the crystal has Born effective charges: compile it with Options.LongRange (physics/polar.Builder) to add their dipole–dipole term")

// Bounds of the polar data.
const (
	// MaxBornCharge bounds |Z*_{αβ}|, e: ten times any measured charge.
	MaxBornCharge = 100.0
	// MinEpsilonInf and MaxEpsilonInf bound the eigenvalues of ε∞ (and
	// MaxEpsilonInf its elements). The static permittivity of a stable
	// medium is at least 1: ε(0) − 1 = (2/π)∫₀^∞ ε″(ω)/ω dω ≥ 0 by the
	// Kramers–Kronig relations (Landau & Lifshitz, Electrodynamics of
	// Continuous Media, §123), and ε∞ is the electrons' static
	// permittivity. 1000 is far above any measured ε∞ (a few tens at
	// most, common practice) and bounds the anisotropy the Ewald sum's
	// cut-offs must cover.
	MinEpsilonInf = 1.0
	MaxEpsilonInf = 1e3
	// EpsilonSymTol is how far ε∞ may be from symmetric, relative to its
	// largest element; its symmetric part is used.
	EpsilonSymTol = 1e-6
)

// polarData is the compiled polar data of a model.
type polarData struct {
	born      [][9]float64 // per site, e, row-major; neutral when enforced
	epsInf    [9]float64   // symmetric part of ε∞
	violation float64      // max |Σ_s Z*_s,αβ| as given, e
	enforced  bool         // the charge sum rule was imposed
}

// checkPolar validates the Born effective charges and ε∞: nine finite
// numbers each, all sites charged or none, both or neither, ε∞ symmetric
// and positive definite within its bounds, on a 3D crystal with 3
// polarizations.
func (v *validator) checkPolar() {
	c, vs := v.c, v.vs
	charged := 0
	for _, s := range c.Sites {
		if len(s.BornCharge) > 0 {
			charged++
		}
	}
	if charged == 0 && len(c.EpsilonInf) == 0 {
		return
	}
	if v.d != 3 || c.P() != 3 {
		vs.Add("epsilon_inf", "polar data (Born charges and ε∞) need a three-dimensional crystal with 3 polarizations (the dipole–dipole sum is the 3D Ewald sum), got %d lattice vectors and %d polarizations", v.d, c.P())
		return
	}
	for i, s := range c.Sites {
		f := fmt.Sprintf("sites[%d].born_charge", i)
		switch {
		case len(s.BornCharge) == 0:
			vs.Add(f, "is missing: when any site has a Born charge every site needs one (9 numbers, e; zeros for a neutral site)")
		case len(s.BornCharge) != 9:
			vs.Add(f, "must have 9 numbers (3×3 row-major, e), got %d", len(s.BornCharge))
		}
		for k, x := range s.BornCharge {
			if !(math.Abs(x) <= MaxBornCharge) {
				vs.Add(fmt.Sprintf("%s[%d]", f, k), "must be finite with |Z*| ≤ %g e, got %v", MaxBornCharge, x)
			}
		}
	}
	v.checkEpsilon(charged)
}

// checkEpsilon validates ε∞ (see checkPolar); charged is the number of
// sites with a Born charge.
func (v *validator) checkEpsilon(charged int) {
	e, vs := v.c.EpsilonInf, v.vs
	if len(e) == 0 {
		vs.Add("epsilon_inf", "is missing: Born charges need the high-frequency dielectric tensor ε∞ (9 numbers, dimensionless)")
		return
	}
	if charged == 0 {
		vs.Add("epsilon_inf", "is given but no site has a Born charge: give both (every site's born_charge) or neither")
	}
	// Checked whether or not charges came with it: every violation at
	// once, and nothing below reads a tensor of the wrong length.
	if len(e) != 9 {
		vs.Add("epsilon_inf", "must have 9 numbers (3×3 row-major, dimensionless), got %d", len(e))
		return
	}
	ok := true
	for k, x := range e {
		if !(math.Abs(x) <= MaxEpsilonInf) {
			vs.Add(fmt.Sprintf("epsilon_inf[%d]", k), "must be finite with |ε| ≤ %g, got %v", MaxEpsilonInf, x)
			ok = false
		}
	}
	if !ok {
		return
	}
	big := 0.0
	for _, x := range e {
		big = math.Max(big, math.Abs(x))
	}
	for a := 0; a < 3; a++ {
		for b := a + 1; b < 3; b++ {
			if d := math.Abs(e[3*a+b] - e[3*b+a]); d > EpsilonSymTol*big {
				vs.Add("epsilon_inf", "must be symmetric: element (%d,%d) = %v and (%d,%d) = %v differ by more than %g of the largest element", a+1, b+1, e[3*a+b], b+1, a+1, e[3*b+a], EpsilonSymTol)
				return
			}
		}
	}
	// The closed form is accurate to about 1e-10 of the largest
	// eigenvalue; a tensor on a bound within 1e-8 of it passes.
	lo, hi := symEig3(symmetricPart(e))
	if !(lo >= MinEpsilonInf-1e-8*hi && hi <= MaxEpsilonInf*(1+1e-8)) {
		vs.Add("epsilon_inf", "must be positive definite with eigenvalues in [%g, %g], got eigenvalues from %.6g to %.6g", MinEpsilonInf, MaxEpsilonInf, lo, hi)
	}
}

// symmetricPart returns (e + eᵀ)/2 of a 3×3 row-major tensor (9 numbers).
func symmetricPart(e []float64) [9]float64 {
	var s [9]float64
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			s[3*a+b] = posZero((e[3*a+b] + e[3*b+a]) / 2)
		}
	}
	return s
}

// symEig3 returns the smallest and largest eigenvalue of a symmetric 3×3
// tensor by the closed form of O. K. Smith (Commun. ACM 4, 168 (1961)),
// on the tensor scaled by its largest element so that no intermediate
// under- or overflows (a library solver panicked on elements near 1e-153).
func symEig3(s [9]float64) (lo, hi float64) {
	big := 0.0
	for _, x := range s {
		big = math.Max(big, math.Abs(x))
	}
	if big == 0 || math.IsInf(big, 0) || math.IsNaN(big) {
		return 0, 0
	}
	var a [9]float64
	for k, x := range s {
		a[k] = x / big
	}
	p1 := a[1]*a[1] + a[2]*a[2] + a[5]*a[5]
	q := (a[0] + a[4] + a[8]) / 3
	if p1 == 0 {
		return big * math.Min(a[0], math.Min(a[4], a[8])), big * math.Max(a[0], math.Max(a[4], a[8]))
	}
	p2 := (a[0]-q)*(a[0]-q) + (a[4]-q)*(a[4]-q) + (a[8]-q)*(a[8]-q) + 2*p1
	p := math.Sqrt(p2 / 6)
	var b [9]float64
	for k := range a {
		b[k] = a[k] / p
	}
	for k := 0; k < 9; k += 4 {
		b[k] -= q / p
	}
	r := (b[0]*(b[4]*b[8]-b[5]*b[7]) - b[1]*(b[3]*b[8]-b[5]*b[6]) + b[2]*(b[3]*b[7]-b[4]*b[6])) / 2
	r = math.Max(-1, math.Min(1, r))
	phi := math.Acos(r) / 3
	e1 := q + 2*p*math.Cos(phi)             // largest
	e3 := q + 2*p*math.Cos(phi+2*math.Pi/3) // smallest
	return big * e3, big * e1
}

// setPolar compiles the validated polar data of c: ε∞ symmetrised, the
// charges copied with negative zeros made +0, the neutrality violation
// measured and, with enforce, removed by the smallest correction —
// subtracting the mean tensor from every site, the least change in the sum
// of squares of the charges that makes them sum to zero (common practice).
func (m *Model) setPolar(c *Crystal, enforce bool) {
	if len(c.EpsilonInf) == 0 {
		return
	}
	pd := &polarData{epsInf: symmetricPart(c.EpsilonInf), enforced: enforce}
	var sum [9]float64
	for _, s := range c.Sites {
		var z [9]float64
		for k := range z {
			z[k] = posZero(s.BornCharge[k])
			sum[k] += z[k]
		}
		pd.born = append(pd.born, z)
	}
	for k := range sum {
		pd.violation = math.Max(pd.violation, math.Abs(sum[k]))
	}
	if enforce && pd.violation > 0 {
		n := float64(len(pd.born))
		for i := range pd.born {
			for k := range sum {
				pd.born[i][k] = posZero(pd.born[i][k] - sum[k]/n)
			}
		}
	}
	m.polar = pd
}

// buildLongRange builds the long-range term of a model with polar data
// with opt.LongRange.
func (m *Model) buildLongRange(ctx context.Context, opt Options) error {
	if m.polar == nil {
		return nil
	}
	if opt.LongRange == nil {
		return ErrNoLongRangeBuilder
	}
	lr, err := opt.LongRange(ctx, m)
	if err != nil {
		return fmt.Errorf("physics: building the long-range term: %w", err)
	}
	m.longRange = lr
	return nil
}

// hashPolar writes the polar data and the long-range method into the
// hash; nothing for a model without them, so that their hashes are those
// of models compiled before polar data existed.
func (m *Model) hashPolar(enc *hashWriter) {
	if m.polar == nil {
		return
	}
	enc.str("polar")
	for _, z := range m.polar.born {
		for _, x := range z {
			enc.float(x)
		}
	}
	for _, x := range m.polar.epsInf {
		enc.float(x)
	}
	enc.float(m.polar.violation)
	if m.longRange != nil {
		enc.str(m.longRange.Method())
	}
}

// Polar reports whether the model has Born effective charges (and ε∞).
func (m *Model) Polar() bool { return m.polar != nil }

// BornCharges returns the Born effective-charge tensors Z* of the sites
// (e, row-major: row α the dipole or field direction, column β the
// displacement), as the model uses them (neutral when the sum rule was
// enforced); nil for a model without them. The slice is a fresh copy.
func (m *Model) BornCharges() [][9]float64 {
	if m.polar == nil {
		return nil
	}
	return append([][9]float64(nil), m.polar.born...)
}

// EpsilonInf returns the symmetric high-frequency dielectric tensor ε∞
// (dimensionless, row-major) and whether the model has one.
func (m *Model) EpsilonInf() ([9]float64, bool) {
	if m.polar == nil {
		return [9]float64{}, false
	}
	return m.polar.epsInf, true
}

// ChargeNeutralityViolation is max_{αβ} |Σ_s Z*_{s,αβ}| (e) of the charges
// as given, before any enforcement; 0 without charges.
func (m *Model) ChargeNeutralityViolation() float64 {
	if m.polar == nil {
		return 0
	}
	return m.polar.violation
}

// ChargeNeutralityEnforced reports whether the charge sum rule was imposed
// (Options.EnforceChargeNeutrality on a model with charges).
func (m *Model) ChargeNeutralityEnforced() bool { return m.polar != nil && m.polar.enforced }

// LongRangeTerm returns the model's long-range term, nil when it has none.
func (m *Model) LongRangeTerm() LongRange { return m.longRange }

// Positions returns the Cartesian site positions, Å (a fresh copy).
func (m *Model) Positions() [][3]float64 { return append([][3]float64(nil), m.pos...) }

// CellVolumeA3 returns the volume of the cell of a 3D model, Å³ (for a
// model of lower dimension the length or area of its cell).
func (m *Model) CellVolumeA3() float64 { return cellMeasure(m) }

// CartesianQ converts fractional reciprocal coordinates to a Cartesian
// wavevector, Å⁻¹ (2π included).
func (m *Model) CartesianQ(q [3]float64) [3]float64 { return m.cartQ(q) }

// longRangeTol is the rounding allowance of the long-range term in the
// eigenvalue tolerance: c·terms·ε·scale, like the short-range part's.
func (m *Model) longRangeTol() float64 {
	if m.longRange == nil {
		return 0
	}
	return eigenTolFactor * float64(m.longRange.Terms()) * 0x1p-52 * m.longRange.Scale()
}

// addLongRange adds the long-range term (if any) at q, approached along
// dir at Γ, to the lower triangle of a; false if stopped.
func (m *Model) addLongRange(q, dir [3]float64, a []complex128, stop func() bool) bool {
	if m.longRange == nil {
		return true
	}
	return m.longRange.AddTo(q, dir, a, stop)
}

// ModesToward returns the frequencies (THz, ascending) and eigenvectors
// (as ModesAt) at q, where a reciprocal lattice vector q is approached
// along the Cartesian direction dir: for a model with a long-range term
// this is the direction-dependent limit of D at Γ (LO–TO splitting); for
// other models, and away from Γ, it is ModesAt. Preconditions as ModesAt,
// and dir finite (it panics otherwise).
func (m *Model) ModesToward(q, dir [3]float64) ([]float64, []complex128) {
	mustQ("ModesToward", q)
	if !finite3(dir) {
		panic(fmt.Sprintf("physics: ModesToward: direction %v is not finite", dir))
	}
	w := m.newPointWork(nil)
	w.ph.gammaDir = dir
	w.solve(q, true)
	out := make([]float64, m.ModeCount())
	w.freqs(out)
	return out, w.eig.Vectors()
}

// polarSoundVelocities is SoundVelocities for a model with a long-range
// term, along the Cartesian unit vector u: the long-wave expansion of the
// short-range part does not hold the dipole–dipole term (whose limit at Γ
// depends on the direction), so the speeds come from the p lowest
// frequencies at two small wavevectors along u, ω(κ)/κ at κ = h and h/2,
// extrapolated to κ → 0 (Richardson: v = (4 f(h/2) − f(h))/3, error
// O(h⁴)); h is 1e-3 of the shortest reciprocal vector. Nil when the
// charges are not neutral (above 1e-9 e): the "acoustic" branches then
// have a gap at Γ and no sound velocity.
func (m *Model) polarSoundVelocities(ctx context.Context, u [3]float64) ([]float64, error) {
	if m.polar != nil && !m.polar.enforced && m.polar.violation > 1e-9 {
		return nil, nil
	}
	h := math.Inf(1)
	for k := 0; k < m.dim; k++ {
		h = math.Min(h, lattice.Norm(m.recip[k]))
	}
	h *= 1e-3
	speeds := func(kappa float64) []float64 {
		var qf [3]float64 // fractional q of κu: q_k = κ u·a_k / 2π
		for k := 0; k < m.dim; k++ {
			qf[k] = kappa * lattice.Dot(u, m.lattice[k]) / (2 * math.Pi)
		}
		f := m.FrequenciesTHz(qf)[:m.p]
		out := make([]float64, m.p)
		for s, nu := range f {
			// 2πν/κ: THz·Å → km/s (1 THz·Å = 0.1 km/s).
			out[s] = 2 * math.Pi * nu / kappa * 0.1
		}
		return out
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	a, b := speeds(h), speeds(h/2)
	out := make([]float64, m.p)
	for s := range out {
		out[s] = (4*b[s] - a[s]) / 3
	}
	return out, ctx.Err()
}

// symmetricPolar averages the Born charges and ε∞ of c over the group
// into out (see Symmetrize): Z̄_i = Σ_g C_gᵀ Z_{g(i)} C_g / N,
// ε̄ = Σ_g C_gᵀ ε C_g / N. Nothing for a crystal without them.
func symmetricPolar(ops []SymOp, c *Crystal, out *Crystal) {
	if len(c.EpsilonInf) != 9 {
		return
	}
	avg := func(pick func(op *SymOp) []float64) []float64 {
		var s [9]float64
		for x := range ops {
			t, cr := pick(&ops[x]), &ops[x].Cart
			for a := 0; a < 3; a++ {
				for b := 0; b < 3; b++ {
					var v float64
					for e := 0; e < 3; e++ {
						for f := 0; f < 3; f++ {
							v += cr[e][a] * t[3*e+f] * cr[f][b]
						}
					}
					s[3*a+b] += v / float64(len(ops))
				}
			}
		}
		r := make([]float64, 9)
		for k := range r {
			r[k] = posZero(s[k])
		}
		return r
	}
	eps := symmetricPart(c.EpsilonInf)
	out.EpsilonInf = avg(func(*SymOp) []float64 { return eps[:] })
	for i := range out.Sites {
		out.Sites[i].BornCharge = avg(func(op *SymOp) []float64 { return c.Sites[op.Perm[i]].BornCharge })
	}
}

// splitGamma gives the samples of a path on Γ their directions of
// approach, for a model with a long-range term (nothing changes for
// others): the incoming segment's, the outgoing one's, and for a corner
// where the two differ in direction both, as two samples at the same
// distance (the second continuing the piece). A segment passing through
// Γ has one direction on both sides.
func (m *Model) splitGamma(samples []PathSample, pieceStart []bool) ([]PathSample, []bool) {
	if m.longRange == nil {
		return samples, pieceStart
	}
	var outS []PathSample
	var outP []bool
	for i, s := range samples {
		if !IsGamma(s.Q) {
			outS, outP = append(outS, s), append(outP, pieceStart[i])
			continue
		}
		var in, out [3]float64
		if !pieceStart[i] {
			in = fracDir(s.Q, samples[i-1].Q)
		}
		if i+1 < len(samples) && !pieceStart[i+1] {
			out = fracDir(samples[i+1].Q, s.Q)
		}
		switch {
		case in == [3]float64{}:
			s.GammaDir = out
		case out == [3]float64{} || m.parallelQ(in, out):
			s.GammaDir = in
		default:
			a, b := s, s
			a.GammaDir, b.GammaDir = in, out
			outS, outP = append(outS, a, b), append(outP, pieceStart[i], false)
			continue
		}
		outS, outP = append(outS, s), append(outP, pieceStart[i])
	}
	return outS, outP
}

// fracDir is b − a scaled to a largest |component| of 1 (zero if equal).
func fracDir(b, a [3]float64) [3]float64 {
	d := [3]float64{b[0] - a[0], b[1] - a[1], b[2] - a[2]}
	s := math.Max(math.Abs(d[0]), math.Max(math.Abs(d[1]), math.Abs(d[2])))
	if s == 0 {
		return d
	}
	return [3]float64{posZero(d[0] / s), posZero(d[1] / s), posZero(d[2] / s)}
}

// parallelQ reports whether two fractional directions are parallel (or
// opposite) in Cartesian space, within 1e-9 of the sine of their angle:
// the non-analytic limit depends on the direction's line only.
func (m *Model) parallelQ(a, b [3]float64) bool {
	ca, cb := m.cartQ(a), m.cartQ(b)
	c := lattice.Cross(ca, cb)
	return lattice.Norm(c) <= 1e-9*lattice.Norm(ca)*lattice.Norm(cb)
}

// gammaDirsOf returns the Cartesian directions of approach of the path
// samples for StreamModes (nil when no sample has one).
func (m *Model) gammaDirsOf(samples []PathSample) [][3]float64 {
	var dirs [][3]float64
	for i, s := range samples {
		if s.GammaDir == ([3]float64{}) {
			continue
		}
		if dirs == nil {
			dirs = make([][3]float64, len(samples))
		}
		dirs[i] = m.cartQ(s.GammaDir)
	}
	return dirs
}
