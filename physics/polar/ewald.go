// The dipole–dipole term by Ewald summation: its set-up (lattice sums,
// self term, sum-rule correction) and the Term that the core adds to D(q).

package polar

import (
	"context"
	"fmt"
	"math"
	"sync"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/lattice"
)

// Truncation of the two Ewald sums. A reciprocal vector K enters while
// K·ε∞·K/(4Λ²) ≤ gaussCut (its Gaussian factor e^{−36} ≈ 2.3e-16); a
// real-space term while Λρ ≤ erfcCut, ρ = sqrt(d·ε∞⁻¹·d) (erfc(6) ≈
// 2.2e-17, e^{−36} ≈ 2.3e-16 in the other terms of the dipole tensor):
// every term left out is below 1e-15 of the largest kept, so the sum does
// not depend on Λ beyond rounding (tested to 1e-8 at three values).
const (
	gaussCut = 36.0
	erfcCut  = 6.0
)

// maxRealBytes bounds the real-space blocks a term keeps (72 bytes each):
// the default Λ is raised until they fit, moving work to the reciprocal
// sum, which keeps only its vectors.
const maxRealBytes = 32 << 20

// MaxCandidates bounds the lattice points the set-up of either Ewald sum
// tests: the box of cell offsets that holds its cut-off sphere (times the
// site pairs, for the real-space sum). A cell so small or skewed against
// the cut-offs that it needs more is refused (a *physics.ValidationError
// on "lattice"), so no model makes the compile run for minutes; the
// examples need a few thousand.
const MaxCandidates = 2e7

// Params are the parameters of the Ewald sum. The zero value chooses them.
type Params struct {
	// LambdaInvA is the Ewald parameter Λ, Å⁻¹: the real-space terms decay
	// as erfc(Λρ), the reciprocal ones as exp(−K·ε∞·K/4Λ²). 0 chooses
	// Λ = √π (det ε∞)^{1/6} / Ω^{1/3}, which balances the number of terms
	// of the two sums (DefaultLambda); results do not depend on it.
	LambdaInvA float64
}

// Builder returns the builder of the dipole–dipole term with default
// parameters, for physics.Options.LongRange.
func Builder() physics.LongRangeBuilder { return BuilderWith(Params{}) }

// BuilderWith returns the builder of the dipole–dipole term with the given
// parameters (tests compare Ewald parameters with it).
func BuilderWith(p Params) physics.LongRangeBuilder {
	return func(ctx context.Context, m *physics.Model) (physics.LongRange, error) {
		return NewTerm(ctx, m, p)
	}
}

// Term is the dipole–dipole term of a polar model: a physics.LongRange. It
// is immutable after NewTerm and safe for concurrent use.
type Term struct {
	n       int           // sites
	lambda  float64       // Λ, Å⁻¹
	omega   float64       // cell volume Ω, Å³
	eps     [9]float64    // ε∞, symmetric
	epsInv  [9]float64    // ε∞⁻¹
	sqrtDet float64       // sqrt(det ε∞)
	z       [][9]float64  // Born charges, e
	w       []float64     // 1/sqrt(m_i), amu^−½
	tau     [][3]float64  // Cartesian positions, Å
	lat     [3][3]float64 // lattice vectors (rows), Å
	recip   [3][3]float64 // reciprocal vectors (rows), Å⁻¹, 2π included

	gvecs  [][3]float64 // reciprocal lattice vectors of the sum, Cartesian
	gm     [][3]int32   // their integer coordinates, G = Σ m_k b_k
	greach [3]int       // the largest |m_k|
	geg    []float64    // G·ε∞·G of each, Å⁻²: K·ε·K = G·ε·G + 2G·(εq) + q·ε·q
	gauss  []float64    // e^{−G·ε∞·G/4Λ²} of each
	gphase []complex128 // e^{iG·τ_s}, G-major (gphase[g·n + s])
	cells  []realCell   // the cell offsets of the real-space terms
	pairs  []realPair   // the site pairs (i ≥ j) with real-space terms
	real   []realBlock  // the blocks, pair by pair
	// onsite is the constant added to each site's diagonal block, raw
	// (eV/Å², not mass-weighted): minus the self term of the reciprocal
	// sum plus the symmetric sum-rule correction.
	onsite [][9]float64
	// pairFix, when not nil, is the raw constant block X_ij (i-major,
	// n×n) that carries the antisymmetric part of the sum-rule correction
	// (sumRule); nil when that part is zero.
	pairFix [][9]float64

	asymmetry float64 // largest antisymmetric part of a sum-rule correction, eV/Å²
	scale     float64 // row bound of the term, eV/Å²/amu
	pool      sync.Pool
}

// realCell is a cell offset n of the real-space sum.
type realCell struct {
	n [3]int
	r [3]float64 // Cartesian lattice vector R_n, Å
}

// realPair names the real-space blocks of the row site i ≥ column site j.
type realPair struct {
	i, j   int
	lo, hi int // real[lo:hi]
}

// realBlock is Z_iᵀ T(R_n + τ_j − τ_i) Z_j·e²/(4πε₀), raw (eV/Å²), of its
// pair at the cell offset cells[cell].
type realBlock struct {
	cell int
	b    [9]float64
}

// scratch is the per-call work space of AddTo and AddGradTo.
type scratch struct {
	v  []complex128    // K·Z_i e^{iK·τ_i}/√m_i, 3 per site
	dv [3][]complex128 // its derivatives along K_μ
	// phase holds e^{iq·R_n} of every cell of the real-space sum.
	phase []complex128
	// qph holds e^{iq·τ_s} per site, tab the per-axis Gaussian factors
	// of AddTo's reciprocal sum (qTables).
	qph []complex128
	tab [3][]float64
}

// DefaultLambda is the Ewald parameter (Å⁻¹) that balances the terms of
// the two sums for a cell of volume omegaA3 (Å³) and ε∞ of determinant
// detEps: the real sum counts the lattice points in a ball of radius
// 6/Λ stretched by ε∞^½ (volume ∝ sqrt(det ε)·Λ⁻³/Ω points), the
// reciprocal one those in a ball of radius 12Λ shrunk by ε∞^−½ (∝
// Λ³Ω/sqrt(det ε)); equal counts give Λ⁶ = π³ det ε / Ω².
func DefaultLambda(omegaA3, detEps float64) float64 {
	return math.Sqrt(math.Pi) * math.Pow(detEps, 1.0/6) / math.Cbrt(omegaA3)
}

// NewTerm builds the dipole–dipole term of a compiled polar model m: the
// reciprocal vectors and real-space blocks of the Ewald sum at parameter
// p.LambdaInvA (or the default), the self term, and the correction that
// makes the term obey the acoustic sum rule. It returns ctx.Err() when ctx
// ends first, and an error for a model without polar data or not 3D.
func NewTerm(ctx context.Context, m *physics.Model, p Params) (*Term, error) {
	born := m.BornCharges()
	eps, ok := m.EpsilonInf()
	if !ok || m.Dim() != 3 || m.Polarizations() != 3 {
		return nil, fmt.Errorf("polar: the dipole–dipole term needs a 3D model with 3 polarizations and Born charges")
	}
	t := &Term{n: m.Sites(), omega: m.CellVolumeA3(), eps: eps, z: born, tau: m.Positions(),
		lat: m.Lattice(), recip: m.Reciprocal()}
	t.epsInv, t.sqrtDet = inverse3(eps)
	t.lambda = p.LambdaInvA
	var err error
	if t.lambda == 0 {
		t.lambda, err = t.defaultLambda()
	} else if !(t.lambda > 0) || math.IsInf(t.lambda, 0) {
		return nil, fmt.Errorf("polar: the Ewald parameter must be a positive number of Å⁻¹, got %v", p.LambdaInvA)
	}
	if err == nil {
		err = t.checkSize(t.lambda)
	}
	if err != nil {
		return nil, err
	}
	t.pool.New = func() any { return t.newScratch() }
	t.w = make([]float64, t.n)
	for i := range t.w {
		t.w[i] = 1 // raw sums first: the sum-rule correction is mass-free
	}
	t.setReciprocal()
	if err := t.realSpace(ctx); err != nil {
		return nil, err
	}
	t.onsite = make([][9]float64, t.n)
	for i := range t.onsite {
		t.onsite[i] = t.selfTerm(i)
	}
	if err := t.sumRule(ctx); err != nil {
		return nil, err
	}
	for i := range t.w {
		t.w[i] = 1 / math.Sqrt(m.MassAmu(i))
	}
	t.scale = t.rowBound()
	return t, nil
}

// defaultLambda is DefaultLambda for the term's cell, raised when the
// real-space blocks would exceed maxRealBytes.
func (t *Term) defaultLambda() (float64, error) {
	l := DefaultLambda(t.omega, t.sqrtDet*t.sqrtDet)
	if err := t.checkSize(l); err != nil {
		return 0, err
	}
	if b := 72 * float64(t.countReal(l)); b > maxRealBytes {
		l *= math.Cbrt(b / maxRealBytes)
	}
	return l, nil
}

// checkSize refuses a set-up at parameter lambda that would test more
// than MaxCandidates lattice points in either sum.
func (t *Term) checkSize(lambda float64) error {
	realBox := float64(t.n*(t.n+1)) / 2
	for _, r := range t.realReach(lambda) {
		realBox *= float64(2*r + 1)
	}
	recip := 1.0
	for _, r := range t.recipReach(lambda) {
		recip *= float64(2*r + 1)
	}
	if realBox > MaxCandidates || recip > MaxCandidates || math.IsNaN(realBox+recip) {
		var vs physics.Violations
		vs.Add("lattice", "the dipole–dipole (Ewald) sum of this cell would test %.3g real-space and %.3g reciprocal lattice points, more than the limit of %.0e: the cell is too skewed or its sites too many for the polar data", realBox, recip, float64(MaxCandidates))
		return vs.Err()
	}
	return nil
}

// inverse3 returns the inverse of a symmetric positive definite 3×3
// tensor and the square root of its determinant.
func inverse3(e [9]float64) ([9]float64, float64) {
	c := [9]float64{
		e[4]*e[8] - e[5]*e[7], e[2]*e[7] - e[1]*e[8], e[1]*e[5] - e[2]*e[4],
		e[5]*e[6] - e[3]*e[8], e[0]*e[8] - e[2]*e[6], e[2]*e[3] - e[0]*e[5],
		e[3]*e[7] - e[4]*e[6], e[1]*e[6] - e[0]*e[7], e[0]*e[4] - e[1]*e[3],
	}
	det := e[0]*c[0] + e[1]*c[3] + e[2]*c[6]
	for k := range c {
		c[k] /= det
	}
	return c, math.Sqrt(det)
}

// quad returns x·A·y for a 3×3 row-major A.
func quad(x [3]float64, a *[9]float64, y [3]float64) float64 {
	var s float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			s += x[i] * a[3*i+j] * y[j]
		}
	}
	return s
}

// enorm is the ε-norm sqrt(x·a·x) of x for a symmetric positive
// definite a.
func enorm(x [3]float64, a *[9]float64) float64 { return math.Sqrt(quad(x, a, x)) }

// The cut-offs are ellipsoids: K·ε·K ≤ (2Λ)²·gaussCut in reciprocal
// space, d·ε⁻¹·d ≤ (erfcCut/Λ)² in real space. Over the ellipsoid
// x·A·x ≤ R² the largest w·x is R·sqrt(w·A⁻¹·w), so the integer
// coordinates of its lattice points are bounded plane by plane: m_k =
// G·a_k/2π ≤ 2Λ√gaussCut·sqrt(a_k·ε⁻¹·a_k)/2π, n_k = d·b_k/2π ≤
// (erfcCut/Λ)·sqrt(b_k·ε·b_k)/2π, each plus what the reduced q (|q_k| ≤
// ½) or the site separations add.

// reciprocalVectors lists every G that can pass the reciprocal cut-off
// for some reduced q (fractional components in [−½, ½]): by the triangle
// inequality of the ε-norm, ‖G‖_ε ≤ 2Λ√gaussCut + ½Σ_k‖b_k‖_ε.
func (t *Term) reciprocalVectors() ([][3]float64, [][3]int32) {
	lim := 2*t.lambda*math.Sqrt(gaussCut) + t.qMaxE()
	reach := t.recipReach(t.lambda)
	each := func(fn func(g [3]float64, m [3]int)) {
		var m [3]int
		for m[0] = -reach[0]; m[0] <= reach[0]; m[0]++ {
			for m[1] = -reach[1]; m[1] <= reach[1]; m[1]++ {
				for m[2] = -reach[2]; m[2] <= reach[2]; m[2]++ {
					if g := t.cartG(m); enorm(g, &t.eps) <= lim {
						fn(g, m)
					}
				}
			}
		}
	}
	n := 0
	each(func([3]float64, [3]int) { n++ }) // counted first: one allocation
	gs, ms := make([][3]float64, 0, n), make([][3]int32, 0, n)
	each(func(g [3]float64, m [3]int) {
		gs = append(gs, g)
		ms = append(ms, [3]int32{int32(m[0]), int32(m[1]), int32(m[2])})
	})
	return gs, ms
}

// setReciprocal lists the reciprocal vectors and what every q shares of
// their terms: G·ε·G, the Gaussian factor and the site phases e^{iG·τ_s}
// (AddTo then needs no exponential or sine per vector: see there).
func (t *Term) setReciprocal() {
	t.gvecs, t.gm = t.reciprocalVectors()
	for _, m := range t.gm {
		for k := 0; k < 3; k++ {
			t.greach[k] = max(t.greach[k], int(m[k]), -int(m[k]))
		}
	}
	l2 := 4 * t.lambda * t.lambda
	t.geg, t.gauss = make([]float64, len(t.gvecs)), make([]float64, len(t.gvecs))
	t.gphase = make([]complex128, len(t.gvecs)*t.n)
	for i, g := range t.gvecs {
		t.geg[i] = quad(g, &t.eps, g)
		t.gauss[i] = math.Exp(-t.geg[i] / l2)
		for s, tau := range t.tau {
			sn, cs := math.Sincos(g[0]*tau[0] + g[1]*tau[1] + g[2]*tau[2])
			t.gphase[i*t.n+s] = complex(cs, sn)
		}
	}
}

// qMaxE bounds the ε-norm of a reduced wavevector: ½Σ_k ‖b_k‖_ε.
func (t *Term) qMaxE() float64 {
	s := 0.0
	for k := 0; k < 3; k++ {
		s += 0.5 * enorm(t.recip[k], &t.eps)
	}
	return s
}

// recipReach is the range of integer coordinates m_k (G = Σ m_k b_k)
// that holds every G of the sum, for every reduced q.
func (t *Term) recipReach(lambda float64) [3]int {
	var reach [3]int
	for k := 0; k < 3; k++ {
		x := 2*lambda*math.Sqrt(gaussCut)*enorm(t.lat[k], &t.epsInv)/(2*math.Pi) + 0.5
		reach[k] = int(math.Min(math.Ceil(x), 1e9)) + 1
	}
	return reach
}

// cartG is Σ m_k b_k, Å⁻¹.
func (t *Term) cartG(m [3]int) [3]float64 {
	var g [3]float64
	for k := 0; k < 3; k++ {
		for a := 0; a < 3; a++ {
			g[a] += float64(m[k]) * t.recip[k][a]
		}
	}
	return g
}

// cartR is Σ n_k a_k, Å.
func (t *Term) cartR(n [3]int) [3]float64 {
	var r [3]float64
	for k := 0; k < 3; k++ {
		for a := 0; a < 3; a++ {
			r[a] += float64(n[k]) * t.lat[k][a]
		}
	}
	return r
}

// realReach is the range of cell offsets n that holds every real-space
// term at parameter lambda: n_k = b_k·(d − τ_j + τ_i)/2π over the cut-off
// ellipsoid and the site separations.
func (t *Term) realReach(lambda float64) [3]int {
	var reach [3]int
	for k := 0; k < 3; k++ {
		sep := 0.0
		for i := range t.tau {
			for j := range t.tau {
				sep = math.Max(sep, math.Abs(lattice.Dot(t.recip[k], lattice.Sub(t.tau[j], t.tau[i]))))
			}
		}
		x := (erfcCut/lambda*enorm(t.recip[k], &t.eps) + sep) / (2 * math.Pi)
		reach[k] = int(math.Min(math.Ceil(x), 1e9)) + 1
	}
	return reach
}

// eachReal calls fn for every real-space term (i ≥ j, cell n) within the
// cut-off at parameter lambda, with its separation d = R_n + τ_j − τ_i;
// it stops with ctx.Err() if ctx ends first (polled per cell).
func (t *Term) eachReal(ctx context.Context, lambda float64, fn func(i, j int, n [3]int, d [3]float64)) error {
	reach := t.realReach(lambda)
	rho2 := (erfcCut / lambda) * (erfcCut / lambda)
	var n [3]int
	for n[0] = -reach[0]; n[0] <= reach[0]; n[0]++ {
		for n[1] = -reach[1]; n[1] <= reach[1]; n[1]++ {
			for n[2] = -reach[2]; n[2] <= reach[2]; n[2]++ {
				if ctx != nil && ctx.Err() != nil {
					return ctx.Err()
				}
				r := t.cartR(n)
				for i := 0; i < t.n; i++ {
					for j := 0; j <= i; j++ {
						if i == j && n == ([3]int{}) {
							continue
						}
						d := lattice.Sub(lattice.Add(r, t.tau[j]), t.tau[i])
						if quad(d, &t.epsInv, d) <= rho2 {
							fn(i, j, n, d)
						}
					}
				}
			}
		}
	}
	return nil
}

// countReal counts the real-space terms at parameter lambda.
func (t *Term) countReal(lambda float64) int {
	c := 0
	_ = t.eachReal(nil, lambda, func(int, int, [3]int, [3]float64) { c++ })
	return c
}

// realSpace computes the real-space blocks, stored pair by pair (each
// pair's blocks together, so that D(q) sums a pair's blocks in one pass
// and writes it once) in arrays counted first and allocated once: a
// counting sort of eachReal's cell-major order.
func (t *Term) realSpace(ctx context.Context) error {
	pairIndex := func(i, j int) int { return i*(i+1)/2 + j } // i ≥ j
	count := make([]int, t.n*(t.n+1)/2)
	cells := 0
	var last [3]int
	total := 0
	if err := t.eachReal(ctx, t.lambda, func(i, j int, n [3]int, _ [3]float64) {
		if total == 0 || n != last {
			cells++
			last = n
		}
		count[pairIndex(i, j)]++
		total++
	}); err != nil {
		return err
	}
	t.real, t.cells = make([]realBlock, total), make([]realCell, 0, cells)
	next := make([]int, len(count))
	for i := 0; i < t.n; i++ {
		for j := 0; j <= i; j++ {
			p := pairIndex(i, j)
			if count[p] > 0 {
				lo := 0
				if len(t.pairs) > 0 {
					lo = t.pairs[len(t.pairs)-1].hi
				}
				t.pairs = append(t.pairs, realPair{i: i, j: j, lo: lo, hi: lo + count[p]})
				next[p] = lo
			}
		}
	}
	return t.eachReal(ctx, t.lambda, func(i, j int, n [3]int, d [3]float64) {
		if c := len(t.cells); c == 0 || t.cells[c-1].n != n {
			t.cells = append(t.cells, realCell{n: n, r: t.cartR(n)})
		}
		tt := t.shortTensor(d)
		p := pairIndex(i, j)
		t.real[next[p]] = realBlock{cell: len(t.cells) - 1, b: t.sandwich(i, &tt, j, physics.CoulombEVA)}
		next[p]++
	})
}

// shortTensor is the real-space part of the screened dipole tensor at
// separation d (Å⁻³): T = −∂γ∂δ h(ρ), h = erfc(Λρ)/(ρ sqrt(det ε)),
// ρ = sqrt(d·A·d), A = ε⁻¹. With s = A d,
//
//	∂γ∂δ h = h''(ρ) s_γ s_δ/ρ² + h'(ρ)/ρ (A_γδ − s_γ s_δ/ρ²),
//	h'  = −[erfc(Λρ)/ρ² + (2Λ/√π) e^{−Λ²ρ²}/ρ] / sqrt(det ε),
//	h'' = [2 erfc(Λρ)/ρ³ + (4Λ/√π) e^{−Λ²ρ²}/ρ² + (4Λ³/√π) e^{−Λ²ρ²}] / sqrt(det ε).
//
// For Λ → 0 and ε = 1 it is the dipole tensor (δ r² − 3 d d)/r⁵.
func (t *Term) shortTensor(d [3]float64) [9]float64 {
	a := &t.epsInv
	var s [3]float64
	for g := 0; g < 3; g++ {
		s[g] = a[3*g]*d[0] + a[3*g+1]*d[1] + a[3*g+2]*d[2]
	}
	rho := math.Sqrt(s[0]*d[0] + s[1]*d[1] + s[2]*d[2])
	l := t.lambda
	ec, ex := math.Erfc(l*rho), math.Exp(-l*l*rho*rho)
	c := 2 * l / math.Sqrt(math.Pi) * ex
	h1 := -(ec/(rho*rho) + c/rho) / t.sqrtDet
	h2 := (2*ec/(rho*rho*rho) + 2*c/(rho*rho) + 2*l*l*c) / t.sqrtDet
	var out [9]float64
	for g := 0; g < 3; g++ {
		for e := 0; e < 3; e++ {
			ss := s[g] * s[e] / (rho * rho)
			out[3*g+e] = -(h2*ss + h1/rho*(a[3*g+e]-ss))
		}
	}
	return out
}

// sandwich returns f·Z_iᵀ T Z_j: element (α, β) = f Σ_γδ Z_i,γα T_γδ Z_j,δβ.
func (t *Term) sandwich(i int, tt *[9]float64, j int, f float64) [9]float64 {
	zi, zj := &t.z[i], &t.z[j]
	var tz [9]float64 // T Z_j
	for g := 0; g < 3; g++ {
		for b := 0; b < 3; b++ {
			tz[3*g+b] = tt[3*g]*zj[b] + tt[3*g+1]*zj[3+b] + tt[3*g+2]*zj[6+b]
		}
	}
	var out [9]float64
	for a := 0; a < 3; a++ {
		for b := 0; b < 3; b++ {
			out[3*a+b] = f * (zi[a]*tz[b] + zi[3+a]*tz[3+b] + zi[6+a]*tz[6+b])
		}
	}
	return out
}

// selfTerm is the raw on-site constant of site i from the self
// interaction the reciprocal sum includes: the limit at d → 0 of the
// smooth part −∂∂[erf(Λρ)/(ρ sqrt(det ε))], (4Λ³/3√π) ε⁻¹/sqrt(det ε),
// sandwiched by Z_i and subtracted.
func (t *Term) selfTerm(i int) [9]float64 {
	l := t.lambda
	f := 4 * l * l * l / (3 * math.Sqrt(math.Pi)) / t.sqrtDet
	var tt [9]float64
	for k := range tt {
		tt[k] = f * t.epsInv[k]
	}
	return t.sandwich(i, &tt, i, -physics.CoulombEVA)
}

// sumRule adds the acoustic-sum-rule correction: the term at q = 0
// (analytic part) acting on a rigid translation must give no force, so
// the row sums A_i = Σ_j C_ij(0) (raw blocks, self term included) must be
// cancelled. Each site's diagonal block gets −sym(A_i) (Gonze & Lee 1997,
// who subtract A_i itself: the same when A_i is symmetric, as
// at sites of cubic or axial symmetry). An antisymmetric part K_i of
// −A_i cannot sit in a diagonal block of a Hermitian D; Σ_i K_i = 0
// (Σ_ij C_ij is symmetric), and the least symmetric change of the
// cell's blocks that restores the row sums is X_ij = (K_i − K_j)/n
// (minimum Frobenius norm among symmetric X with Σ_j X_ij = K_i), a
// constant block between the sites of one cell. Its largest element is
// Asymmetry (0 whenever the A_i are symmetric).
func (t *Term) sumRule(ctx context.Context) error {
	nm := 3 * t.n
	a := make([]complex128, nm*nm)
	if !t.AddTo([3]float64{}, [3]float64{}, a, func() bool { return ctx.Err() != nil }) {
		return ctx.Err()
	}
	// Complete the Hermitian (here real symmetric) matrix from its lower
	// triangle, then sum each row block.
	full := func(r, c int) float64 {
		if c > r {
			r, c = c, r
		}
		return real(a[r*nm+c])
	}
	k := make([][9]float64, t.n) // antisymmetric remainders K_i
	for i := 0; i < t.n; i++ {
		var s [9]float64
		for j := 0; j < t.n; j++ {
			for x := 0; x < 3; x++ {
				for y := 0; y < 3; y++ {
					s[3*x+y] += full(3*i+x, 3*j+y)
				}
			}
		}
		for x := 0; x < 3; x++ {
			for y := 0; y < 3; y++ {
				t.onsite[i][3*x+y] -= (s[3*x+y] + s[3*y+x]) / 2
				k[i][3*x+y] = -(s[3*x+y] - s[3*y+x]) / 2
				t.asymmetry = math.Max(t.asymmetry, math.Abs(k[i][3*x+y]))
			}
		}
	}
	if t.asymmetry > 0 {
		t.pairFix = make([][9]float64, t.n*t.n)
		for i := 0; i < t.n; i++ {
			for j := 0; j < t.n; j++ {
				for e := range k[i] {
					t.pairFix[i*t.n+j][e] = (k[i][e] - k[j][e]) / float64(t.n)
				}
			}
		}
	}
	return ctx.Err()
}

// rowBound is a bound of the sum of |terms| entering one row of D(q)
// (eV/Å²/amu): the rounding scale of the term.
func (t *Term) rowBound() float64 {
	rows := make([]float64, 3*t.n)
	add := func(i int, b *[9]float64, f float64) {
		for x := 0; x < 3; x++ {
			rows[3*i+x] += f * (math.Abs(b[3*x]) + math.Abs(b[3*x+1]) + math.Abs(b[3*x+2]))
		}
	}
	for _, p := range t.pairs {
		for k := p.lo; k < p.hi; k++ {
			b := &t.real[k].b
			add(p.i, b, t.w[p.i]*t.w[p.j])
			add(p.j, b, t.w[p.i]*t.w[p.j])
		}
	}
	for i := range t.onsite {
		add(i, &t.onsite[i], t.w[i]*t.w[i])
		for j := 0; j < t.n && t.pairFix != nil; j++ {
			add(i, &t.pairFix[i*t.n+j], t.w[i]*t.w[j])
		}
	}
	// Reciprocal sum at q = 0: every term w|K·Z_i||K·Z_j|/√(m_i m_j).
	pre := 4 * math.Pi / t.omega * physics.CoulombEVA
	for _, g := range t.gvecs {
		kek := quad(g, &t.eps, g)
		if kek == 0 || kek/(4*t.lambda*t.lambda) > gaussCut {
			continue
		}
		w := pre * math.Exp(-kek/(4*t.lambda*t.lambda)) / kek
		var tot float64
		for j := 0; j < t.n; j++ {
			tot += t.w[j] * kzNorm(g, &t.z[j])
		}
		for i := 0; i < t.n; i++ {
			ki := t.w[i] * kzNorm(g, &t.z[i])
			for x := 0; x < 3; x++ {
				rows[3*i+x] += w * ki * tot
			}
		}
	}
	out := 0.0
	for _, r := range rows {
		out = math.Max(out, r)
	}
	return out
}

// kzNorm is the 1-norm of the vector K·Z (components Σ_γ K_γ Z_γα).
func kzNorm(k [3]float64, z *[9]float64) float64 {
	s := 0.0
	for a := 0; a < 3; a++ {
		s += math.Abs(k[0]*z[a] + k[1]*z[3+a] + k[2]*z[6+a])
	}
	return s
}

// LambdaInvA is the Ewald parameter Λ used, Å⁻¹.
func (t *Term) LambdaInvA() float64 { return t.lambda }

// RealTerms is the number of real-space blocks (site pairs × lattice
// vectors) summed at every q.
func (t *Term) RealTerms() int { return len(t.real) }

// ReciprocalVectors is the number of reciprocal lattice vectors summed at
// every q.
func (t *Term) ReciprocalVectors() int { return len(t.gvecs) }

// Asymmetry is the largest element of the antisymmetric part of the
// sum-rule corrections, eV/Å² (zero for sites of cubic or axial
// symmetry): the part carried by constant blocks between the sites of a
// cell instead of the diagonal blocks (see sumRule).
func (t *Term) Asymmetry() float64 { return t.asymmetry }

// Scale implements physics.LongRange: the row bound of the term.
func (t *Term) Scale() float64 { return t.scale }

// Terms implements physics.LongRange: the terms summed into one element.
func (t *Term) Terms() int { return len(t.cells) + len(t.gvecs) + 1 }

// FlopsPerQ implements physics.LongRange: per real-space block a complex
// 3×3 update (36 operations), per cell a phase (about 40), per reciprocal
// vector its weight and the site vectors (about 60 per site) and a
// rank-one update of the lower triangle (8 per element, (3n)²/2
// elements).
func (t *Term) FlopsPerQ() float64 {
	return Flops(t.n, len(t.real), len(t.cells), len(t.gvecs))
}

// Method implements physics.LongRange: the method, its version and Λ (in
// the model hash: results differ in the last digits between parameters).
func (t *Term) Method() string {
	return fmt.Sprintf("dipole-dipole/ewald/v1 lambda=%x", math.Float64bits(t.lambda))
}

func (t *Term) newScratch() *scratch {
	s := &scratch{v: make([]complex128, 3*t.n), phase: make([]complex128, len(t.cells)), qph: make([]complex128, t.n)}
	for k := range s.tab {
		s.tab[k] = make([]float64, 2*t.greach[k]+1)
	}
	for a := range s.dv {
		s.dv[a] = make([]complex128, 3*t.n)
	}
	return s
}
