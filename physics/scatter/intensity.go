package scatter

import (
	"context"
	"fmt"
	"math"
	"math/cmplx"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/mesh"
)

// Options configures the scattering computations.
type Options struct {
	Probe Probe
	// Sites holds what every site of the model scatters with, in site
	// order (Resolve builds it from the request and the built-in table).
	Sites       []SiteScatterer
	TempK       float64 // sample temperature, K (0 ≤ T ≤ thermo.MaxTempK)
	DebyeWaller DWOptions
	Axis        Axis
	Resolution  Resolution
	// AllowUnstable leaves imaginary modes out (and counts them) instead
	// of failing.
	AllowUnstable bool
	// Cache keeps grid reductions for reuse (nil: none).
	Cache *mesh.ReductionCache
}

// recoilMeV is ħ²/(2 m_u Å²) in meV: the recoil energy ħ²Q²/2M of a mass
// of 1 amu at Q = 1 Å⁻¹ (≈ 2.0901 meV, CODATA 2018 constants).
var recoilMeV = physics.ReducedPlanckJS * physics.ReducedPlanckJS /
	(2 * physics.AtomicMassKg * physics.AngstromM * physics.AngstromM) / physics.ElementaryChargeC * 1e3

// fm2ToBarn converts fm² to barn (1 barn = 100 fm²).
const fm2ToBarn = 0.01

// degenerateTol groups modes whose intensities are shared: the intensity
// of each mode of a degenerate group depends on the basis the solver
// picked, their sum does not. Relative to the largest |ν| at the Q (about
// 1e-6 THz for modes of 5–10 THz), so that the grouping does not depend on
// the frequency scale.
const degenerateTol = 1.5e-7

// setup is what every Q point needs: the model, its scatterers, the
// Debye–Waller tensors and the constants.
type setup struct {
	m        *physics.Model
	probe    Probe
	sites    []SiteScatterer
	u        [][9]float64 // ⟨u uᵀ⟩ per site, Å²
	frac     [][3]float64
	invSqrtM []float64
	recip    [3][3]float64
	kTmeV    float64
	scale    float64 // fm² → barn for neutrons, 1 for X-rays
	p, n     int
}

func newSetup(m *physics.Model, opt Options, u [][9]float64) *setup {
	s := &setup{m: m, probe: opt.Probe, sites: opt.Sites, u: u, recip: m.Reciprocal(),
		kTmeV: physics.BoltzmannEVPerK * opt.TempK * 1e3, scale: 1, p: m.Polarizations(), n: m.ModeCount()}
	if opt.Probe == Neutron {
		s.scale = fm2ToBarn
	}
	for i := 0; i < m.Sites(); i++ {
		s.frac = append(s.frac, m.SiteFrac(i))
		s.invSqrtM = append(s.invSqrtM, 1/math.Sqrt(m.MassAmu(i)))
	}
	return s
}

// cart converts fractional Q to Cartesian Å⁻¹.
func (s *setup) cart(qf [3]float64) [3]float64 {
	var q [3]float64
	for k := 0; k < 3; k++ {
		for a := 0; a < 3; a++ {
			q[a] += qf[k] * s.recip[k][a]
		}
	}
	return q
}

// Lines are the one-phonon lines at one Q: per mode (ascending, as the
// solver gives them) its energy and the integrated weight of its line at
// +E (creation) and −E (annihilation), barn/sr per cell for neutrons
// (electrons² per cell for X-rays: times r_e² for the cross-section).
// Modes of zero or negative (imaginary) energy have no line (weight 0).
type Lines struct {
	EnergyMeV    []float64
	Creation     []float64
	Annihilation []float64
	Imaginary    int // imaginary modes left out
}

// lineWork is one worker's state: the solver and the per-site amplitudes.
type lineWork struct {
	s      *setup
	solver *physics.PointSolver
	a      []complex128
	f2     []float64
}

func (s *setup) newWork(done <-chan struct{}) *lineWork {
	return &lineWork{s: s, solver: s.m.NewPointSolver(done), a: make([]complex128, s.m.Sites()), f2: make([]float64, s.n)}
}

// lines computes the one-phonon lines at fractional Q into out (whose
// slices it sizes). It returns false when stopped.
//
// With eigenvectors e of D(q) in the cell convention (site j of cell l
// moves as e_j exp(i q·R_l)/√m_j), the amplitude of mode s at Q = G + q
// is (Squires, Introduction to the Theory of Thermal Neutron Scattering,
// ch. 3, eq. 3.120; the site position enters explicitly because the cell
// convention leaves it out of e):
//
//	F_s(Q) = Σ_j (b_j/√m_j) e^{−W_j(Q)} (Q·e*_js) e^{iQ·r_j},
//
// and its line weights ħ²|F_s|²/(2E_s)·(n_s + 1) at E = +E_s and
// ħ²|F_s|²/(2E_s)·n_s at E = −E_s, n the Bose factor at T. D(q) is
// periodic, so the modes at q are those at Q itself.
func (w *lineWork) lines(qf [3]float64, out *Lines) bool {
	return w.linesAt(qf, w.s.cart(qf), out)
}

// linesAt is lines with the Cartesian Q given: the q of the modes is qf,
// and for a crystal of fewer than three dimensions qc may have components
// outside its reciprocal space (a powder average), which enter Q·e and
// the Debye–Waller exponent but not q.
func (w *lineWork) linesAt(qf, qc [3]float64, out *Lines) bool {
	s := w.s
	freq, vecs, ok := w.solver.Solve(qf)
	if !ok {
		return false
	}
	qn := math.Sqrt(qc[0]*qc[0] + qc[1]*qc[1] + qc[2]*qc[2])
	for j := range w.a {
		u := &s.u[j]
		var quq float64
		for a := 0; a < 3; a++ {
			for b := 0; b < 3; b++ {
				quq += qc[a] * u[3*a+b] * qc[b]
			}
		}
		x := s.frac[j]
		ph := qf[0]*x[0] + qf[1]*x[1] + qf[2]*x[2]
		ph -= math.Round(ph)
		amp := s.sites[j].amplitude(s.probe, qn) * s.invSqrtM[j] * math.Exp(-quq/2)
		w.a[j] = complex(amp, 0) * cmplx.Exp(complex(0, 2*math.Pi*ph))
	}
	n, p := s.n, s.p
	for k := 0; k < n; k++ {
		var f complex128
		e := vecs[k*n : (k+1)*n]
		for j, aj := range w.a {
			var qe complex128
			for a := 0; a < p; a++ {
				qe += complex(qc[a], 0) * cmplx.Conj(e[j*p+a])
			}
			f += aj * qe
		}
		w.f2[k] = real(f)*real(f) + imag(f)*imag(f)
	}
	averageGroups(freq, w.f2)
	out.size(n)
	out.Imaginary = 0
	mev := physics.MeV.PerTHz()
	for k, nu := range freq {
		E := nu * mev
		out.EnergyMeV[k] = E
		out.Creation[k], out.Annihilation[k] = 0, 0
		if nu < 0 {
			out.Imaginary++
		}
		if !(nu > 0) {
			continue
		}
		base := s.scale * recoilMeV * w.f2[k] / E
		nb := bose(E, s.kTmeV)
		out.Creation[k] = base * (nb + 1)
		out.Annihilation[k] = base * nb
	}
	return true
}

func (l *Lines) size(n int) {
	if cap(l.EnergyMeV) < n {
		l.EnergyMeV, l.Creation, l.Annihilation = make([]float64, n), make([]float64, n), make([]float64, n)
	}
	l.EnergyMeV, l.Creation, l.Annihilation = l.EnergyMeV[:n], l.Creation[:n], l.Annihilation[:n]
}

// bose is the Bose–Einstein occupation 1/(e^{E/kT} − 1) (0 at T = 0).
func bose(eMeV, kTmeV float64) float64 {
	if kTmeV <= 0 {
		return 0
	}
	return 1 / math.Expm1(eMeV/kTmeV)
}

// averageGroups replaces the values of each group of degenerate modes
// (ascending frequencies within degenerateTol × the largest |ν| of the
// previous) by the group's mean.
func averageGroups(freq, v []float64) {
	if len(freq) == 0 {
		return
	}
	tol := degenerateTol * max(math.Abs(freq[0]), math.Abs(freq[len(freq)-1]))
	for lo := 0; lo < len(freq); {
		hi := lo + 1
		for hi < len(freq) && freq[hi]-freq[hi-1] <= tol {
			hi++
		}
		if hi-lo > 1 {
			sum := 0.0
			for k := lo; k < hi; k++ {
				sum += v[k]
			}
			for k := lo; k < hi; k++ {
				v[k] = sum / float64(hi-lo)
			}
		}
		lo = hi
	}
}

// checkOptions checks what every computation shares: the sites, the
// temperature, the probe.
func checkOptions(m *physics.Model, opt Options, vs *physics.Violations) {
	if opt.Probe != Neutron && opt.Probe != XRay {
		vs.Add("probe", "unknown probe %d", int(opt.Probe))
	}
	if len(opt.Sites) != m.Sites() {
		vs.Add("sites", "one scatterer per site is needed: %d for %d sites", len(opt.Sites), m.Sites())
	}
	for i, st := range opt.Sites {
		checkScatterer(i, st, vs)
	}
	if !(opt.TempK >= 0 && opt.TempK <= 1e6) {
		vs.Add("temperature_k", "must be a temperature in [0, 1e+06] K, got %v", opt.TempK)
	}
	for k := 0; k < 3; k++ {
		if n := opt.DebyeWaller.Mesh[k]; n < 0 || n > 1024 || (k >= m.Dim() && n > 1) {
			vs.Add(fmt.Sprintf("debye_waller.mesh[%d]", k), "must be 0 (default) or 1…1024 along the crystal's %d directions, got %d", m.Dim(), n)
		}
	}
}

// prepare checks the shared options and finds the Debye–Waller tensors.
func prepare(ctx context.Context, m *physics.Model, opt Options) (*setup, *DWResult, error) {
	dw, err := DebyeWaller(ctx, m, opt.DebyeWaller, opt.TempK, opt.AllowUnstable, opt.Cache)
	if err != nil {
		return nil, nil, err
	}
	if err := checkDW(dw, opt.TempK); err != nil {
		return nil, nil, err
	}
	return newSetup(m, opt, dw.U), dw, nil
}

// Bounds of what a site scatters with: a length, cross-section or
// form-factor coefficient is 0 or of a magnitude in [MinScatter,
// MaxScatter] (fm, barn, electrons, Å²). Real lengths are 0.1–20 fm; below
// 1e-6 fm a square of the amplitudes nears the smallest floating-point
// numbers and loses its precision, or underflows to a silent 0.
const (
	MinScatter = 1e-6
	MaxScatter = 1e6
)

// checkScatterer adds the violations of site i's scatterer.
func checkScatterer(i int, st SiteScatterer, vs *physics.Violations) {
	for _, v := range append(append([]float64{st.CoherentFm, st.IncoherentBarn, st.FormFactor.C}, st.FormFactor.A[:]...), st.FormFactor.B[:]...) {
		if a := math.Abs(v); !(v == 0 || (a >= MinScatter && a <= MaxScatter)) {
			vs.Add(fmt.Sprintf("sites[%d]", i), "every length, cross-section and form-factor coefficient must be 0 or of a size within [%g, %g], got %v", MinScatter, MaxScatter, v)
			break
		}
	}
	if st.IncoherentBarn < 0 {
		vs.Add(fmt.Sprintf("sites[%d].incoherent_barn", i), "must be ≥ 0, got %v", st.IncoherentBarn)
	}
	for k, b := range st.FormFactor.B {
		if b < 0 {
			// exp(−b·s²) with b < 0 grows without bound (to +Inf at large |Q|);
			// the published parametrisations have b > 0.
			vs.Add(fmt.Sprintf("sites[%d].form_factor.b_a2[%d]", i, k), "must be ≥ 0 Å² (a form factor falls with |Q|), got %v", b)
		}
	}
}
