// The dipole–dipole term at one q: the real-space blocks with their
// phases, the reciprocal sum, the non-analytic limit at Γ, and the
// derivatives for group velocities.

package polar

import (
	"math"

	"github.com/materials-lab/modegrid/physics"
)

// pollEvery is the number of reciprocal vectors or real-space cells
// between two polls of the stop function.
const pollEvery = 64

// reduce returns q reduced modulo 1 (D is periodic in the cell phase
// convention, and the reduction is exact) and whether it is Γ, in which
// case it is exactly 0.
func reduce(q [3]float64) ([3]float64, bool) {
	if physics.IsGamma(q) {
		return [3]float64{}, true
	}
	for k := range q {
		q[k] -= math.Round(q[k])
	}
	return q, false
}

// cartQ converts fractional q to Cartesian Å⁻¹.
func (t *Term) cartQ(q [3]float64) [3]float64 {
	var c [3]float64
	for k := 0; k < 3; k++ {
		for a := 0; a < 3; a++ {
			c[a] += q[k] * t.recip[k][a]
		}
	}
	return c
}

// AddTo implements physics.LongRange: it adds to the lower triangle of a
// the dipole–dipole term in the cell phase convention,
//
//	C_{iα,jβ}(q) = e²/(4πε₀) [ Σ_n Z_iᵀ T_short(R_n + τ_j − τ_i) Z_j e^{iq·R_n}
//	             + (4π/Ω) Σ_{G, K=q+G≠0} (K·Z_i)_α (K·Z_j)*_β e^{−K·ε·K/4Λ²}/(K·ε·K) e^{−iK·(τ_j−τ_i)} ]
//	             + δ_ij (onsite_i), all divided by sqrt(m_i m_j),
//
// and at Γ with a direction u the K = 0 term in its limit,
// (4π/Ω)(u·Z_i)(u·Z_j)/(u·ε·u) (physics/polar/doc.go derives each part).
func (t *Term) AddTo(q, dir [3]float64, a []complex128, stop func() bool) bool {
	nm := 3 * t.n
	qr, gamma := reduce(q)
	s := t.pool.Get().(*scratch)
	defer t.pool.Put(s)
	if !t.addReal(qr, a, nm, s.phase, stop) {
		return false
	}
	t.addConstant(a, nm)
	kq := t.cartQ(qr)
	eq, qeq := t.epsTimes(kq)
	pre := 4 * math.Pi / t.omega * physics.CoulombEVA
	l2 := 4 * t.lambda * t.lambda
	t.qTables(kq, eq, s)
	cq := pre * math.Exp(-qeq/l2)
	for gi, g := range t.gvecs {
		if gi%pollEvery == 0 && stop != nil && stop() {
			return false
		}
		kek := t.geg[gi] + 2*(g[0]*eq[0]+g[1]*eq[1]+g[2]*eq[2]) + qeq
		if kek/l2 > gaussCut {
			continue
		}
		k := [3]float64{kq[0] + g[0], kq[1] + g[1], kq[2] + g[2]}
		if k == ([3]float64{}) {
			continue // K = 0 (Γ): the non-analytic term, below
		}
		m := &t.gm[gi]
		gauss := t.gauss[gi] * s.tab[0][int(m[0])+t.greach[0]] * s.tab[1][int(m[1])+t.greach[1]] * s.tab[2][int(m[2])+t.greach[2]]
		t.phasedVectors(k, s.qph, t.gphase[gi*t.n:(gi+1)*t.n], s.v)
		rankOne(a, nm, cq*gauss/kek, s.v)
	}
	if gamma && dir != ([3]float64{}) {
		ded := quad(dir, &t.eps, dir)
		t.siteVectors(dir, s.v, false)
		rankOne(a, nm, pre/ded, s.v)
	}
	return true
}

// epsTimes returns ε∞·q and q·ε∞·q: with G·ε·G kept per vector, K·ε·K =
// G·ε·G + 2G·(εq) + q·ε·q costs three products per G. (No digits are
// lost: the reduced q is at most half a reciprocal vector, so |K| is not
// much below |G| unless G = 0, where K·ε·K = q·ε·q exactly.)
func (t *Term) epsTimes(q [3]float64) ([3]float64, float64) {
	var e [3]float64
	for a := 0; a < 3; a++ {
		e[a] = t.eps[3*a]*q[0] + t.eps[3*a+1]*q[1] + t.eps[3*a+2]*q[2]
	}
	return e, q[0]*e[0] + q[1]*e[1] + q[2]*e[2]
}

// addReal adds the real-space blocks with their phases e^{2πi q·n}: the
// cells' phases first, then each pair's blocks summed in a local 3×3
// accumulator and written once.
func (t *Term) addReal(q [3]float64, a []complex128, nm int, ph []complex128, stop func() bool) bool {
	t.cellPhases(q, ph)
	for pi, p := range t.pairs {
		if pi%pollEvery == 0 && stop != nil && stop() {
			return false
		}
		var acc [9]complex128
		for k := p.lo; k < p.hi; k++ {
			b := &t.real[k]
			z := ph[b.cell]
			for e, v := range b.b {
				acc[e] += complex(v*real(z), v*imag(z))
			}
		}
		t.addPair(a, nm, p, &acc)
	}
	return true
}

// addPair adds the pair's accumulated block, weighted 1/√(m_i m_j), to
// the lower triangle of a.
func (t *Term) addPair(a []complex128, nm int, p realPair, acc *[9]complex128) {
	f := complex(t.w[p.i]*t.w[p.j], 0)
	for x := 0; x < 3; x++ {
		row := a[(3*p.i+x)*nm+3*p.j:]
		top := 3
		if p.i == p.j {
			top = x + 1
		}
		for y := 0; y < top; y++ {
			row[y] += f * acc[3*x+y]
		}
	}
}

// cellPhases fills ph with e^{2πi q·n} of every cell of the real-space
// sum.
func (t *Term) cellPhases(q [3]float64, ph []complex128) {
	for ci := range t.cells {
		n := &t.cells[ci].n
		sn, cs := math.Sincos(2 * math.Pi * (q[0]*float64(n[0]) + q[1]*float64(n[1]) + q[2]*float64(n[2])))
		ph[ci] = complex(cs, sn)
	}
}

// qTables prepares what AddTo's reciprocal vectors share at one q: the
// site phases e^{iq·τ_s}, and per axis k the powers x_k^m (|m| ≤
// greach_k) of x_k = e^{−2 b_k·(εq)/4Λ²}, so that the Gaussian of K = q+G
// is e^{−G·ε·G/4Λ²} (kept per G) · Π_k x_k^{m_k} · e^{−q·ε·q/4Λ²} — three
// multiplications instead of an exponential (and e^{iK·τ_s} a product of
// two kept phases instead of a sine and cosine). Each power is a product
// of at most greach_k factors: relative error a few ε·greach_k.
func (t *Term) qTables(kq, eq [3]float64, s *scratch) {
	for i, tau := range t.tau {
		sn, cs := math.Sincos(kq[0]*tau[0] + kq[1]*tau[1] + kq[2]*tau[2])
		s.qph[i] = complex(cs, sn)
	}
	l2 := 4 * t.lambda * t.lambda
	for k := 0; k < 3; k++ {
		r := t.greach[k]
		tab := s.tab[k][:2*r+1]
		x := math.Exp(-2 * (t.recip[k][0]*eq[0] + t.recip[k][1]*eq[1] + t.recip[k][2]*eq[2]) / l2)
		tab[r] = 1
		up, down := 1.0, 1.0
		for m := 1; m <= r; m++ {
			up *= x
			down /= x
			tab[r+m], tab[r-m] = up, down
		}
	}
}

// phasedVectors fills v with (K·Z_s)_α e^{iq·τ_s} e^{iG·τ_s}/√m_s (the
// site vectors of siteVectors from kept phases).
func (t *Term) phasedVectors(k [3]float64, qph, gph []complex128, v []complex128) {
	for i := 0; i < t.n; i++ {
		z := &t.z[i]
		ph := qph[i] * gph[i] * complex(t.w[i], 0)
		for al := 0; al < 3; al++ {
			kz := k[0]*z[al] + k[1]*z[3+al] + k[2]*z[6+al]
			v[3*i+al] = complex(kz, 0) * ph
		}
	}
}

// siteVectors fills v with (K·Z_i)_α e^{iK·τ_i}/√m_i (the phase only when
// phase is set: the non-analytic limit has K → 0).
func (t *Term) siteVectors(k [3]float64, v []complex128, phase bool) {
	for i := 0; i < t.n; i++ {
		z := &t.z[i]
		ph := complex(t.w[i], 0)
		if phase {
			sn, cs := math.Sincos(k[0]*t.tau[i][0] + k[1]*t.tau[i][1] + k[2]*t.tau[i][2])
			ph = complex(t.w[i]*cs, t.w[i]*sn)
		}
		for al := 0; al < 3; al++ {
			kz := k[0]*z[al] + k[1]*z[3+al] + k[2]*z[6+al]
			v[3*i+al] = complex(kz, 0) * ph
		}
	}
}

// rankOne adds w·v vᴴ to the lower triangle of the nm×nm matrix a.
func rankOne(a []complex128, nm int, w float64, v []complex128) {
	for r := 0; r < nm; r++ {
		vr := complex(w, 0) * v[r]
		row := a[r*nm : r*nm+r+1]
		for c := range row {
			row[c] += vr * complex(real(v[c]), -imag(v[c]))
		}
	}
}

// AddGradTo implements physics.LongRange: ∂C/∂q_μ. Real space: each
// block times iR_μ. Reciprocal: the product rule on w(K) v_i(K) v_j(K)*
// with ∂w/∂K_μ = −w (εK)_μ (1/2Λ² + 2/K·ε·K) and ∂v_iα/∂K_μ =
// (Z_i,μα + iτ_iμ (K·Z_i)_α) e^{iK·τ_i}/√m_i. At Γ the K = 0 term is left
// out (see physics.LongRange).
func (t *Term) AddGradTo(q [3]float64, g *[3][]complex128, stop func() bool) bool {
	nm := 3 * t.n
	qr, _ := reduce(q)
	s := t.pool.Get().(*scratch)
	defer t.pool.Put(s)
	if !t.addRealGrad(qr, g, nm, s.phase, stop) {
		return false
	}
	kq := t.cartQ(qr)
	pre := 4 * math.Pi / t.omega * physics.CoulombEVA
	l2 := 4 * t.lambda * t.lambda
	for gi, gv := range t.gvecs {
		if gi%pollEvery == 0 && stop != nil && stop() {
			return false
		}
		k := [3]float64{kq[0] + gv[0], kq[1] + gv[1], kq[2] + gv[2]}
		kek := quad(k, &t.eps, k)
		if kek == 0 || kek/l2 > gaussCut {
			continue
		}
		w := pre * math.Exp(-kek/l2) / kek
		t.siteVectors(k, s.v, true)
		t.siteGrads(k, s)
		var ek [3]float64
		for m := 0; m < 3; m++ {
			ek[m] = t.eps[3*m]*k[0] + t.eps[3*m+1]*k[1] + t.eps[3*m+2]*k[2]
		}
		for m := 0; m < 3; m++ {
			dw := -w * ek[m] * (2/l2 + 2/kek)
			gradRankOne(g[m], nm, w, dw, s.v, s.dv[m])
		}
	}
	return true
}

// siteGrads fills s.dv[μ] with ∂v/∂K_μ for the v of siteVectors.
func (t *Term) siteGrads(k [3]float64, s *scratch) {
	for i := 0; i < t.n; i++ {
		z := &t.z[i]
		sn, cs := math.Sincos(k[0]*t.tau[i][0] + k[1]*t.tau[i][1] + k[2]*t.tau[i][2])
		ph := complex(t.w[i]*cs, t.w[i]*sn)
		for m := 0; m < 3; m++ {
			it := complex(0, t.tau[i][m])
			for al := 0; al < 3; al++ {
				s.dv[m][3*i+al] = complex(z[3*m+al], 0)*ph + it*s.v[3*i+al]
			}
		}
	}
}

// gradRankOne adds dw·v vᴴ + w·(dv vᴴ + v dvᴴ) to the lower triangle of g.
func gradRankOne(g []complex128, nm int, w, dw float64, v, dv []complex128) {
	for r := 0; r < nm; r++ {
		row := g[r*nm : r*nm+r+1]
		a := complex(dw, 0)*v[r] + complex(w, 0)*dv[r]
		b := complex(w, 0) * v[r]
		for c := range row {
			vc := complex(real(v[c]), -imag(v[c]))
			dc := complex(real(dv[c]), -imag(dv[c]))
			row[c] += a*vc + b*dc
		}
	}
}

// addRealGrad adds iR_μ times each real-space block with its phase,
// summed per pair as in addReal.
func (t *Term) addRealGrad(q [3]float64, g *[3][]complex128, nm int, ph []complex128, stop func() bool) bool {
	t.cellPhases(q, ph)
	for pi, p := range t.pairs {
		if pi%pollEvery == 0 && stop != nil && stop() {
			return false
		}
		var acc [3][9]complex128
		for k := p.lo; k < p.hi; k++ {
			b := &t.real[k]
			r := &t.cells[b.cell].r
			z := ph[b.cell] * complex(0, 1) // i·e^{iθ}
			for m := 0; m < 3; m++ {
				if r[m] == 0 {
					continue
				}
				zm := z * complex(r[m], 0)
				for e, v := range b.b {
					acc[m][e] += complex(v*real(zm), v*imag(zm))
				}
			}
		}
		for m := 0; m < 3; m++ {
			t.addPair(g[m], nm, p, &acc[m])
		}
	}
	return true
}

// addConstant adds the q-independent blocks: each site's on-site
// constant and, when the sum-rule correction has an antisymmetric part,
// the constant blocks between sites (pairFix), lower triangle only.
func (t *Term) addConstant(a []complex128, nm int) {
	for i := 0; i < t.n; i++ {
		for j := 0; j <= i; j++ {
			var b *[9]float64
			switch {
			case i == j:
				b = &t.onsite[i]
			case t.pairFix != nil:
				b = &t.pairFix[i*t.n+j]
			default:
				continue
			}
			f := t.w[i] * t.w[j]
			for x := 0; x < 3; x++ {
				row := a[(3*i+x)*nm+3*j:]
				top := 3
				if i == j {
					top = x + 1
				}
				for y := 0; y < top; y++ {
					row[y] += complex(f*b[3*x+y], 0)
				}
			}
		}
	}
}
