// The infrared response of a polar model: the Γ modes with their mode
// effective charges and oscillator strengths, the dielectric function
// ε(ω), the static ε₀ and the normal-incidence reflectivity.

package polar

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/cmplx"

	"gonum.org/v1/gonum/mat"

	"github.com/materials-lab/modegrid/physics"
)

// ErrUnstableGamma is wrapped by Infrared when a Γ mode other than the
// acoustic ones is imaginary or zero and carries charge: ε₀ (its 1/ω²
// term) is then not defined.
var ErrUnstableGamma = errors.New("polar: an infrared-active mode at Γ is imaginary or zero")

// ActiveThreshold is the infrared-activity threshold, relative: a Γ mode
// is infrared active when |Z̃_m|² exceeds ActiveThreshold times the
// oscillator-strength sum rule Σ_m |Z̃_m|² = Σ_s tr(Z_sᵀZ_s)/m_s (the
// whole charge the modes share). Modes silent by symmetry come out at
// rounding, 1e-30 and below relative; real weak modes far above.
const ActiveThreshold = 1e-10

// Default sampling of the dielectric function.
const (
	// DefaultIRPoints is the number of frequencies sampled when none is
	// given: from 0 to DefaultIRSpan times the highest LO frequency.
	DefaultIRPoints = 1001
	DefaultIRSpan   = 1.25
	// DefaultDampingFraction is the damping of every mode when none is
	// given, a fraction of the highest optical frequency at Γ.
	DefaultDampingFraction = 0.01
)

// IROptions selects the infrared response computed.
type IROptions struct {
	// Direction is the Cartesian direction (any length, non-zero) of the
	// light's electric field in the crystal: ε(ω) and R(ω) are taken along
	// it, ê·ε(ω)·ê, and the LO frequencies are those of Γ approached along
	// it (the phonons that this field's longitudinal component excites).
	Direction [3]float64
	// FreqTHz are the frequencies at which ε(ω) and R(ω) are sampled, THz,
	// each ≥ 0; nil for DefaultIRPoints from 0 to DefaultIRSpan times the
	// highest LO frequency.
	FreqTHz []float64
	// Points is the number of default samples when FreqTHz is nil (0:
	// DefaultIRPoints; at least 2).
	Points int
	// DampingTHz is the damping γ of the modes as an ordinary frequency
	// (THz; γ in ω units is 2π times it): one value for every mode, one
	// per Γ mode (in ascending order of frequency), or nil for
	// DefaultDampingFraction of the highest optical frequency. Each ≥ 0;
	// a zero damping with a sample on a TO frequency is an error (ε is
	// infinite there).
	DampingTHz []float64
}

// IRMode is one mode at Γ (the analytic limit: the transverse optical and
// acoustic modes).
type IRMode struct {
	FreqTHz  float64 // frequency, THz (negative: imaginary)
	Acoustic bool    // one of the 3 acoustic modes (excluded from ε)
	// Charge is the mode effective charge Z̃_α = Σ_{s,β} Z_s,αβ U_sβ with
	// U = e/√m the displacement of the normalised eigenvector e, e/√amu
	// (Gonze & Lee, Phys. Rev. B 55, 10355 (1997)). Within a group
	// of degenerate modes the eigenvectors are any basis, and so would be
	// the charges: the modes are rotated so that their charges are
	// mutually orthogonal, the last of the group's charged modes having
	// the largest charge along the direction (in a cubic crystal: exactly
	// along it — the mode that becomes longitudinal), the others along the
	// axes after it (orthogonal); the largest component (the first, of
	// equal ones) is positive.
	Charge [3]float64
	// Strength is the oscillator strength S_αβ = Z̃_α Z̃_β, e²/amu
	// (Gonze & Lee 1997).
	Strength [9]float64
	Active   bool    // |Z̃|² above ActiveThreshold of the sum rule
	DampTHz  float64 // its damping γ, THz
}

// IRSample is the response at one frequency along the direction.
type IRSample struct {
	FreqTHz      float64
	Eps          complex128 // ê·ε(ω)·ê: ε′ + iε″
	Reflectivity float64    // |(n − 1)/(n + 1)|², n = √ε
}

// IRResult is the infrared response of a model.
type IRResult struct {
	Modes     []IRMode
	LOFreqTHz []float64  // frequencies at Γ approached along Direction, ascending
	EpsInf    [9]float64 // ε∞
	EpsStatic [9]float64 // ε₀ = ε∞ + (4π/Ω)Σ S_m/ω_m² (Gaussian form)
	// EpsStaticDir and EpsInfDir are ê·ε₀·ê and ê·ε∞·ê.
	EpsStaticDir, EpsInfDir float64
	Samples                 []IRSample
	Direction               [3]float64 // the unit direction used
}

// Infrared computes the infrared response of the polar model m (see the
// package documentation, Infrared response, for the formulas and units).
// Invalid options return a *physics.ValidationError (fields "direction",
// "frequencies[i]", "damping[i]"); a model without Born charges an error;
// an imaginary or zero active Γ mode an error wrapping ErrUnstableGamma.
func Infrared(ctx context.Context, m *physics.Model, opt IROptions) (*IRResult, error) {
	if !m.Polar() {
		return nil, errors.New("polar: the model has no Born effective charges")
	}
	u, err := checkIROptions(m, opt)
	if err != nil {
		return nil, err
	}
	res := &IRResult{Direction: u}
	res.EpsInf, _ = m.EpsilonInf()
	if res.Modes, err = gammaModes(ctx, m, u); err != nil {
		return nil, err
	}
	res.LOFreqTHz, _ = m.ModesToward([3]float64{}, u)
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	if err := res.static(m); err != nil {
		return nil, err
	}
	res.setDamping(opt.DampingTHz)
	freqs := opt.FreqTHz
	if freqs == nil {
		np := opt.Points
		if np == 0 {
			np = DefaultIRPoints
		}
		top := res.LOFreqTHz[len(res.LOFreqTHz)-1] * DefaultIRSpan
		freqs = make([]float64, np)
		for i := range freqs {
			freqs[i] = top * float64(i) / float64(np-1)
		}
	}
	if err := res.sample(ctx, m, freqs); err != nil {
		return nil, err
	}
	return res, nil
}

// checkIROptions validates the options and returns the unit direction.
func checkIROptions(m *physics.Model, opt IROptions) ([3]float64, error) {
	var vs physics.Violations
	d := opt.Direction
	l := math.Sqrt(d[0]*d[0] + d[1]*d[1] + d[2]*d[2])
	if !(l > 0) || math.IsInf(l, 0) {
		vs.Add("direction", "must be a finite, non-zero Cartesian vector, got %v", d)
	}
	for i, f := range opt.FreqTHz {
		if !(f >= 0) || math.IsInf(f, 0) {
			vs.Add(fmt.Sprintf("frequencies[%d]", i), "must be a finite frequency ≥ 0, got %v", f)
		}
	}
	if opt.Points < 0 || opt.Points == 1 {
		vs.Add("points", "must be 0 (the default, %d) or at least 2, got %d", DefaultIRPoints, opt.Points)
	}
	if n := len(opt.DampingTHz); n > 1 && n != m.ModeCount() {
		vs.Add("damping", "must have one value for every mode or one per mode at Γ (%d), got %d", m.ModeCount(), n)
	}
	for i, g := range opt.DampingTHz {
		if !(g >= 0) || math.IsInf(g, 0) {
			vs.Add(fmt.Sprintf("damping[%d]", i), "must be a finite damping ≥ 0, got %v", g)
		}
	}
	if err := vs.Err(); err != nil {
		return [3]float64{}, err
	}
	return [3]float64{d[0] / l, d[1] / l, d[2] / l}, nil
}

// gammaModes diagonalises the analytic D(Γ) — real symmetric: its
// imaginary parts, rounding of the reciprocal sum, are dropped — and
// returns the modes with their charges and strengths (degenerate groups
// oriented by the unit direction u). The 3 modes of smallest |λ| are the
// acoustic ones.
func gammaModes(ctx context.Context, m *physics.Model, u [3]float64) ([]IRMode, error) {
	n := m.ModeCount()
	d := m.DynamicalMatrix([3]float64{}, nil)
	// Scaled by its largest element, so that the library solver sees no
	// subnormal or huge numbers (it panicked on a 3×3 of 1e-153 once).
	big := 0.0
	for _, z := range d {
		big = math.Max(big, math.Abs(real(z)))
	}
	if big == 0 || math.IsInf(big, 0) || math.IsNaN(big) {
		big = 1
	}
	sym := mat.NewSymDense(n, nil)
	for r := 0; r < n; r++ {
		for c := 0; c <= r; c++ {
			sym.SetSym(r, c, (real(d[r*n+c])+real(d[c*n+r]))/2/big)
		}
	}
	var eig mat.EigenSym
	if !eig.Factorize(sym, true) {
		return nil, errors.New("polar: the dynamical matrix at Γ could not be diagonalised")
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	vals := eig.Values(nil)
	for k := range vals {
		vals[k] *= big
	}
	var vecs mat.Dense
	eig.VectorsTo(&vecs)
	born := m.BornCharges()
	modes := make([]IRMode, n)
	charges := mat.NewDense(3, n, nil)
	for k := 0; k < n; k++ {
		for s := range born {
			w := 1 / math.Sqrt(m.MassAmu(s))
			for al := 0; al < 3; al++ {
				var z float64
				for be := 0; be < 3; be++ {
					z += born[s][3*al+be] * vecs.At(3*s+be, k) * w
				}
				charges.Set(al, k, charges.At(al, k)+z)
			}
		}
	}
	tol := m.EigenTol()
	for _, k := range acousticIndices(vals, 3) {
		modes[k].Acoustic = true
	}
	for k := range modes {
		lam := vals[k]
		if math.Abs(lam) <= tol {
			lam = 0
		}
		modes[k].FreqTHz = math.Copysign(math.Sqrt(math.Abs(lam))*physics.NuUnitTHz, lam)
	}
	orthogonalCharges(modes, charges, u)
	return modes, nil
}

// acousticIndices returns the indices of the p values of smallest |λ|.
func acousticIndices(vals []float64, p int) []int {
	used := make([]bool, len(vals))
	var out []int
	for range p {
		best := -1
		for k, v := range vals {
			if !used[k] && (best < 0 || math.Abs(v) < math.Abs(vals[best])) {
				best = k
			}
		}
		if best < 0 {
			break
		}
		used[best] = true
		out = append(out, best)
	}
	return out
}

// degenerateRelTHz groups Γ modes whose frequencies differ by less than
// this (THz, or this relative to the highest) into one degenerate group.
const degenerateRelTHz = 1e-7

// orthogonalCharges sets each mode's charge and strength from the 3×n
// charge matrix C, rotating each group of degenerate modes (within
// degenerateRelTHz) to the orthonormal basis v of its g modes that
// Gram–Schmidt makes of Cᵀf₁, Cᵀf₂, Cᵀf₃ (f the frame of the direction u
// and the Cartesian axes after it), then of the unit vectors (the modes
// without charge): the charges C v are then orthogonal, the first along
// f₁ as far as the group allows. The charged modes are stored in reverse
// (the one along u last) and the group's total strength Σ Z̃Z̃ᵀ is
// unchanged. The sign of each charge is fixed by its largest component.
func orthogonalCharges(modes []IRMode, charges *mat.Dense, u [3]float64) {
	n := len(modes)
	top := 0.0
	for _, md := range modes {
		top = math.Max(top, math.Abs(md.FreqTHz))
	}
	frame := gramSchmidt([][]float64{u[:], {1, 0, 0}, {0, 1, 0}, {0, 0, 1}}, 3, 1e-8)
	for lo := 0; lo < n; {
		hi := lo + 1
		for hi < n && math.Abs(modes[hi].FreqTHz-modes[lo].FreqTHz) <= degenerateRelTHz*math.Max(1, top) {
			hi++
		}
		g := hi - lo
		c := charges.Slice(0, 3, lo, hi)
		var seq [][]float64
		for _, f := range frame {
			v := make([]float64, g)
			for k := 0; k < g; k++ {
				v[k] = f[0]*c.At(0, k) + f[1]*c.At(1, k) + f[2]*c.At(2, k)
			}
			seq = append(seq, v)
		}
		charged := len(gramSchmidt(seq, g, 1e-8))
		for k := 0; k < g; k++ {
			e := make([]float64, g)
			e[k] = 1
			seq = append(seq, e)
		}
		basis := gramSchmidt(seq, g, 1e-8)
		for i, j := 0, charged-1; i < j; i, j = i+1, j-1 {
			basis[i], basis[j] = basis[j], basis[i]
		}
		for k, v := range basis {
			var z [3]float64
			for al := 0; al < 3; al++ {
				for x := 0; x < g; x++ {
					z[al] += c.At(al, x) * v[x]
				}
			}
			setCharge(&modes[lo+k], z)
		}
		lo = hi
	}
}

// gramSchmidt returns the orthonormal vectors (of length dim) that
// modified Gram–Schmidt makes of seq in order, dropping each whose part
// orthogonal to those before is below tol of its length (or zero), at
// most dim of them.
func gramSchmidt(seq [][]float64, dim int, tol float64) [][]float64 {
	var out [][]float64
	for _, s := range seq {
		if len(out) == dim {
			break
		}
		v := append([]float64(nil), s...)
		n0 := norm(v)
		for _, b := range out {
			d := dot(v, b)
			for k := range v {
				v[k] -= d * b[k]
			}
		}
		n := norm(v)
		if n == 0 || n <= tol*n0 {
			continue
		}
		for k := range v {
			v[k] /= n
		}
		out = append(out, v)
	}
	return out
}

func dot(a, b []float64) float64 {
	s := 0.0
	for k := range a {
		s += a[k] * b[k]
	}
	return s
}

func norm(a []float64) float64 { return math.Sqrt(dot(a, a)) }

// setCharge stores a mode's charge, its sign fixed by the largest
// component (the first of those within 1e-9 of the largest, so that
// rounding cannot flip a tie between equal components), and its strength.
func setCharge(md *IRMode, z [3]float64) {
	top := math.Max(math.Abs(z[0]), math.Max(math.Abs(z[1]), math.Abs(z[2])))
	big := 0
	for math.Abs(z[big]) < (1-1e-9)*top {
		big++
	}
	if z[big] < 0 {
		z = [3]float64{-z[0], -z[1], -z[2]}
	}
	md.Charge = z
	for al := 0; al < 3; al++ {
		for be := 0; be < 3; be++ {
			md.Strength[3*al+be] = z[al] * z[be]
		}
	}
}

// oscillatorPrefactor is 4π·e²/(4πε₀)/Ω = 4π·CoulombEVA/Ω, eV·Å/Å³:
// with S in e²/amu and ω² in eV/Å²/amu, (4π e²/(4πε₀)/Ω)·S/ω² is a pure
// number (see doc.go, Infrared response).
func oscillatorPrefactor(m *physics.Model) float64 {
	return 4 * math.Pi * physics.CoulombEVA / m.CellVolumeA3()
}

// static marks the active modes and sums ε₀ = ε∞ + (4π/Ω)Σ_m S_m/ω_m²
// over the optical modes (Gonze & Lee 1997, at ω = 0), with ω_m²
// the eigenvalue λ_m in eV/Å²/amu.
func (res *IRResult) static(m *physics.Model) error {
	var rule float64 // Σ_s tr(Z_sᵀ Z_s)/m_s = Σ_m |Z̃_m|²
	for s, z := range m.BornCharges() {
		for _, x := range z {
			rule += x * x / m.MassAmu(s)
		}
	}
	pre := oscillatorPrefactor(m)
	res.EpsStatic = res.EpsInf
	for k := range res.Modes {
		md := &res.Modes[k]
		q := md.Charge[0]*md.Charge[0] + md.Charge[1]*md.Charge[1] + md.Charge[2]*md.Charge[2]
		md.Active = !md.Acoustic && q > ActiveThreshold*rule
		if !md.Active {
			continue
		}
		if !(md.FreqTHz > 0) {
			return fmt.Errorf("%w: mode %d at %.6g THz has |Z̃|² = %.3g e²/amu", ErrUnstableGamma, k, md.FreqTHz, q)
		}
		lam := sq(md.FreqTHz / physics.NuUnitTHz)
		for x := range res.EpsStatic {
			res.EpsStatic[x] += pre * md.Strength[x] / lam
		}
	}
	u := res.Direction
	res.EpsStaticDir = quad(u, &res.EpsStatic, u)
	res.EpsInfDir = quad(u, &res.EpsInf, u)
	return nil
}

func sq(x float64) float64 { return x * x }

// setDamping assigns every mode its damping (THz): the one value, the
// per-mode values, or the default fraction of the highest frequency.
func (res *IRResult) setDamping(d []float64) {
	top := 0.0
	for _, md := range res.Modes {
		top = math.Max(top, md.FreqTHz)
	}
	for k := range res.Modes {
		switch len(d) {
		case 0:
			res.Modes[k].DampTHz = DefaultDampingFraction * top
		case 1:
			res.Modes[k].DampTHz = d[0]
		default:
			res.Modes[k].DampTHz = d[k]
		}
	}
}

// sample evaluates ε(ω) along the direction and R(ω) at each frequency:
//
//	ε(ω) = ε∞ + (4π/Ω) Σ_m S_m / (ω_m² − ω² − iγ_m ω)
//
// (Gonze & Lee 1997, with the damping of a Lorentz oscillator),
// n = √ε on the branch with Re n ≥ 0, R = |(n − 1)/(n + 1)|² (normal
// incidence from vacuum; Born & Wolf, Principles of Optics, §1.5).
func (res *IRResult) sample(ctx context.Context, m *physics.Model, freqs []float64) error {
	pre := oscillatorPrefactor(m)
	u := res.Direction
	type osc struct{ lam, s, g float64 }
	var os []osc
	for _, md := range res.Modes {
		if md.Active {
			os = append(os, osc{sq(md.FreqTHz / physics.NuUnitTHz), pre * quad(u, &md.Strength, u), md.DampTHz / physics.NuUnitTHz})
		}
	}
	res.Samples = make([]IRSample, len(freqs))
	for i, f := range freqs {
		if i%1024 == 0 && ctx.Err() != nil {
			return ctx.Err()
		}
		w := f / physics.NuUnitTHz
		eps := complex(res.EpsInfDir, 0)
		for _, o := range os {
			den := complex(o.lam-w*w, -o.g*w)
			if den == 0 {
				var vs physics.Violations
				vs.Add("damping", "is 0 for the mode at %.6g THz, and frequencies[%d] = %v lies on it: ε is infinite there (give a damping > 0)", math.Sqrt(o.lam)*physics.NuUnitTHz, i, f)
				return vs.Err()
			}
			eps += complex(o.s, 0) / den
		}
		n := cmplx.Sqrt(eps)
		r := cmplx.Abs((n - 1) / (n + 1))
		res.Samples[i] = IRSample{FreqTHz: f, Eps: eps, Reflectivity: r * r}
	}
	return nil
}
