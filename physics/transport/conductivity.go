package transport

import (
	"context"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/parallel"
	"github.com/materials-lab/modegrid/physics/lattice"
	"github.com/materials-lab/modegrid/physics/mesh"
	"github.com/materials-lab/modegrid/physics/thermo"
)

// KappaPoint is the lattice thermal conductivity at one temperature.
type KappaPoint struct {
	TempK    float64
	KappaWmK [9]float64 // κ_αβ, W/(m·K), row-major, Cartesian
	MeanWmK  float64    // trace/3
}

// Series is κ(T) of one sample geometry.
type Series struct {
	Boundary Boundary
	Points   []KappaPoint
	// Unscattered counts modes (q-point × branch) no mechanism scatters in
	// this geometry (a film's modes moving along its surface with boundary
	// scattering alone): their τ is infinite, so they are left out and κ
	// is a lower bound; 0 with any bulk mechanism on.
	Unscattered int
	// Cumulative is κ accumulated over mean free path and frequency at
	// Options.CumulativeTempK (nil unless asked).
	Cumulative *Cumulative
}

// Cumulative is the cumulative conductivity (trace/3) at one temperature:
// KappaByMFP[i] is the part of κ carried by modes of mean free path
// Λ = |v|τ ≤ MFPM[i] (log-spaced), KappaByFreq[i] by modes of frequency
// ≤ FreqTHz[i] (even spacing). Both end at κ.
type Cumulative struct {
	TempK       float64
	MFPM        []float64
	KappaByMFP  []float64
	FreqTHz     []float64
	KappaByFreq []float64
}

// Result is Compute's answer.
type Result struct {
	Series   []Series
	VolumeA3 float64
	// The constants of the Umklapp rate actually used (0 when off).
	ThetaK, VelocityKmS, MeanMassAmu float64
	// DefectGamma is Γ of the point-defect rate (0 when off).
	DefectGamma float64
	// ImaginaryExcluded and ZeroExcluded count modes left out (q-point ×
	// branch): imaginary ones (AllowUnstable) and those of zero frequency
	// (the acoustic modes at Γ).
	ImaginaryExcluded, ZeroExcluded int
}

// modeData holds what the sums need of every mode of the grid.
type modeData struct {
	nu    []float64    // THz
	vel   [][3]float64 // m/s
	rint  []float64    // T-independent bulk rate, 1/s (defects, power law)
	ucoef []float64    // Umklapp rate / (T e^(−θ/3T)), 1/(s·K)
	theta float64      // θ of the Umklapp exponent, K
	keep  []bool       // positive frequency
}

// Compute is the lattice thermal conductivity in the relaxation-time
// approximation of kinetic theory (Ziman, Electrons and Phonons, 1960,
// ch. 8; Srivastava, The Physics of Phonons, 1990, ch. 6):
//
//	κ_αβ(T) = (1/(N V)) Σ_{q,j} C_qj(T) v_α v_β τ_qj(T),
//
// over the N points of opt.Grid (every point: velocities are vectors), V
// the cell volume, C = k_B x² eˣ/(eˣ−1)² the mode heat capacity (x =
// hν/k_BT), v the group velocity (physics, Hellmann–Feynman) and 1/τ the
// sum of the rates the options select (Matthiessen's rule): the sample's
// boundary, point defects, Umklapp and a power law. 3D crystals with three
// polarizations only. Imaginary modes fail with thermo.ErrUnstable unless
// opt.AllowUnstable.
func Compute(ctx context.Context, m *physics.Model, opt Options) (*Result, error) {
	spec, err := check(m, opt)
	if err != nil {
		return nil, err
	}
	pts, err := spec.PointsContext(ctx)
	if err != nil {
		return nil, err
	}
	res := &Result{}
	lat := m.Lattice()
	res.VolumeA3 = lattice.GramMeasure(lat[:3])
	md, err := collectModes(ctx, m, pts, opt, res)
	if err != nil {
		return nil, err
	}
	if err := md.rates(ctx, m, spec, opt, res); err != nil {
		return nil, err
	}
	bounds := opt.Boundaries
	if len(bounds) == 0 {
		bounds = []Boundary{{Kind: Bulk}}
	}
	scale := 1 / (float64(len(pts)) * res.VolumeA3 * 1e-30) // 1/(N V), 1/m³
	ops, err := m.Symmetry(ctx)
	if err != nil {
		return nil, err
	}
	res.Series = make([]Series, len(bounds))
	var vs physics.Violations
	for b, bd := range bounds {
		s, err := md.series(ctx, bd, opt.TempsK, scale)
		if err != nil {
			return nil, err
		}
		rots := sampleRotations(ops, bd)
		for i := range s.Points {
			s.Points[i].symmetrize(rots)
		}
		if opt.CumulativeTempK > 0 {
			s.Cumulative = md.cumulative(bd, opt.CumulativeTempK, scale, cmp(opt.CumulativeBins, DefaultCumulativeBins))
		}
		s.checkRange(&vs, b, len(opt.Boundaries) > 0)
		res.Series[b] = s
	}
	if err := vs.Err(); err != nil {
		return nil, err
	}
	return res, nil
}

// checkRange adds a violation for every temperature of s (series b; named
// by samples[b] when the request gave its samples) at which κ is past the
// range of a float64, and for its cumulative curves if they are. Each
// mode adds C·v⊗v·τ with τ = 1/Σ rates; a mode with a heat capacity but
// rates of order 10⁻³⁰⁰ 1/s or less (a point-defect variance of that
// order and no other mechanism, say) gives τ, and κ, beyond 1.8·10³⁰⁸:
// the model's κ is effectively infinite there, and no number stands for
// it. It is refused on the request's fields rather than answered with an
// infinity or NaN.
func (s *Series) checkRange(vs *physics.Violations, b int, named bool) {
	where := ""
	if named {
		where = fmt.Sprintf(" in samples[%d]", b)
	}
	const advice = "some modes are all but unscattered with these rates (τ = 1/Σ rates overflows); give a sample size (samples), larger point-defect variances, Umklapp or a power law, or a higher temperature"
	for t, p := range s.Points {
		if !allFinite(p.KappaWmK[:], []float64{p.MeanWmK}) {
			vs.Add(fmt.Sprintf("temperatures_k[%d]", t), "κ at %g K%s is beyond the range of a float64: %s", p.TempK, where, advice)
		}
	}
	if c := s.Cumulative; c != nil && !allFinite(c.MFPM, c.KappaByMFP, c.FreqTHz, c.KappaByFreq) {
		vs.Add("cumulative_temperature_k", "the cumulative κ at %g K%s is beyond the range of a float64: %s", c.TempK, where, advice)
	}
}

// allFinite reports whether every number of the slices is finite.
func allFinite(xss ...[]float64) bool {
	for _, xs := range xss {
		for _, x := range xs {
			if !finite(x) {
				return false
			}
		}
	}
	return true
}

func cmp(x, def int) int {
	if x > 0 {
		return x
	}
	return def
}

// check validates model and options together and returns the grid.
func check(m *physics.Model, opt Options) (mesh.GridSpec, error) {
	var vs physics.Violations
	if m.Dim() != 3 || m.Polarizations() != 3 {
		vs.Add("model", "thermal conductivity is computed for 3D crystals with 3 polarizations, got %d dimensions and %d polarizations", m.Dim(), m.Polarizations())
	}
	vs.AddErr("", "options", opt.Validate())
	spec, err := physics.NormalizeGrid(opt.Grid, max(m.Dim(), 1))
	vs.AddErr("", "mesh", err)
	n := m.ModeCount()
	if g := opt.Umklapp.GammaBranch; opt.Umklapp.On && len(g) > 0 && len(g) != n {
		vs.Add("umklapp.gruneisen_per_branch", "one γ per branch: the model has %d branches, got %d values", n, len(g))
	}
	if g := opt.Umklapp.GammaMode; opt.Umklapp.On && len(g) > 0 && err == nil && len(g) != spec.Count()*n {
		vs.Add("umklapp.volume_models", "one γ per mode of the grid: %d points × %d branches, got %d values", spec.Count(), n, len(g))
	}
	if g := opt.Defects.SiteG2; opt.Defects.On && len(g) > 0 && len(g) != m.Sites() {
		vs.Add("point_defects.site_g2", "one mass variance per site: the model has %d sites, got %d values", m.Sites(), len(g))
	}
	if opt.Defects.On && len(opt.Defects.SiteG2) == 0 {
		for i, l := range m.Labels() {
			if _, err := SiteMassVariance(l); err != nil {
				vs.Add("point_defects.site_g2", "site %d: %v", i, err)
			}
		}
	}
	return spec, vs.Err()
}

// collectModes streams frequencies and group velocities on every point.
func collectModes(ctx context.Context, m *physics.Model, pts []mesh.QPoint, opt Options, res *Result) (*modeData, error) {
	n := m.ModeCount()
	md := &modeData{nu: make([]float64, len(pts)*n), vel: make([][3]float64, len(pts)*n)}
	err := m.StreamModes(ctx, pts, physics.ModeOptions{Velocities: true}, func(c physics.ModeChunk) error {
		for j, p := range c.Points {
			i := c.Offset + j
			copy(md.nu[i*n:(i+1)*n], p.FreqTHz)
			for k, v := range p.VelKmS {
				md.vel[i*n+k] = [3]float64{v[0] * 1e3, v[1] * 1e3, v[2] * 1e3}
			}
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	md.keep = make([]bool, len(md.nu))
	low := math.Inf(1)
	for i, f := range md.nu {
		switch {
		case f > 0:
			md.keep[i] = true
		case f < 0:
			res.ImaginaryExcluded++
			low = math.Min(low, f)
		default:
			res.ZeroExcluded++
		}
	}
	if res.ImaginaryExcluded > 0 && !opt.AllowUnstable {
		return nil, fmt.Errorf("%w: %d of %d modes on the grid are imaginary (lowest %.6g THz)", thermo.ErrUnstable, res.ImaginaryExcluded, len(md.nu), low)
	}
	return md, nil
}

// series sums κ(T) of one geometry at every temperature, in a fixed order
// (deterministic under any scheduling).
func (md *modeData) series(ctx context.Context, bd Boundary, temps []float64, scale float64) (Series, error) {
	s := Series{Boundary: bd, Points: make([]KappaPoint, len(temps))}
	rb := make([]float64, len(md.nu))
	for i := range md.nu {
		if !md.keep[i] {
			continue
		}
		rb[i] = boundaryRate(bd, md.vel[i])
		if md.rint[i]+md.ucoef[i]+rb[i] == 0 {
			s.Unscattered++
		}
	}
	const chunk = 4096
	nsl := parallel.SliceCount(len(md.nu), chunk)
	acc := make([][]float64, nsl)
	for i := range acc {
		acc[i] = make([]float64, 9*len(temps))
	}
	err := parallel.Slices(ctx, len(md.nu), chunk, nsl, func(sl, lo, hi int) {
		a := acc[sl]
		for t, tK := range temps {
			if !(tK > 0) {
				continue
			}
			kappa := physics.THzToKelvin / tK
			u := tK * math.Exp(-md.theta/(3*tK))
			for i := lo; i < hi; i++ {
				if !md.keep[i] {
					continue
				}
				r := md.rint[i] + md.ucoef[i]*u + rb[i]
				c := modeHeat(kappa * md.nu[i])
				if !(r > 0) || c == 0 {
					continue
				}
				w := c / r
				v := md.vel[i]
				for a1 := 0; a1 < 3; a1++ {
					for b1 := 0; b1 < 3; b1++ {
						a[t*9+a1*3+b1] += w * v[a1] * v[b1]
					}
				}
			}
		}
	})
	if err != nil {
		return s, err
	}
	for t, tK := range temps {
		p := KappaPoint{TempK: tK}
		for _, a := range acc {
			for x := 0; x < 9; x++ {
				p.KappaWmK[x] += a[t*9+x]
			}
		}
		for x := range p.KappaWmK {
			p.KappaWmK[x] *= physics.BoltzmannJPerK * scale
		}
		p.MeanWmK = (p.KappaWmK[0] + p.KappaWmK[4] + p.KappaWmK[8]) / 3
		s.Points[t] = p
	}
	return s, nil
}

// sampleRotations are the Cartesian rotations of the crystal's point group
// that the sample keeps: all of them, but for a film those mapping its
// normal n onto ±n.
func sampleRotations(ops []physics.SymOp, bd Boundary) [][3][3]float64 {
	var n [3]float64
	if bd.Kind == Film {
		l := math.Sqrt(bd.Normal[0]*bd.Normal[0] + bd.Normal[1]*bd.Normal[1] + bd.Normal[2]*bd.Normal[2])
		n = [3]float64{bd.Normal[0] / l, bd.Normal[1] / l, bd.Normal[2] / l}
	}
	var out [][3][3]float64
	for _, op := range ops {
		if bd.Kind == Film {
			var rn [3]float64
			for a := 0; a < 3; a++ {
				rn[a] = op.Cart[a][0]*n[0] + op.Cart[a][1]*n[1] + op.Cart[a][2]*n[2]
			}
			if math.Abs(math.Abs(rn[0]*n[0]+rn[1]*n[1]+rn[2]*n[2])-1) > 1e-6 {
				continue
			}
		}
		out = append(out, op.Cart)
	}
	return out
}

// symmetrize replaces κ by its average (1/|G|) Σ_R R κ Rᵀ over the
// rotations rots (no-op without any). Inside a degenerate subspace the
// engine's velocities follow one generic direction, so the mode sum breaks
// the crystal's symmetry on grids with many points on symmetry lines (4 %
// on a Γ-centred 6³ grid of the fcc example); the average over the group
// is basis-free and restores it (common practice for tensors of a
// crystal).
func (p *KappaPoint) symmetrize(rots [][3][3]float64) {
	if len(rots) == 0 {
		return
	}
	var out [9]float64
	for _, r := range rots {
		for a := 0; a < 3; a++ {
			for b := 0; b < 3; b++ {
				var s float64
				for c := 0; c < 3; c++ {
					for d := 0; d < 3; d++ {
						s += r[a][c] * p.KappaWmK[c*3+d] * r[b][d]
					}
				}
				out[a*3+b] += s / float64(len(rots))
			}
		}
	}
	p.KappaWmK = out
	p.MeanWmK = (out[0] + out[4] + out[8]) / 3
}

// modeHeat is a mode's heat capacity in units of k_B, x² eˣ/(eˣ−1)² =
// (x/2)²/sinh²(x/2); 0 for x ≤ 0 and past x = 1400 (underflow).
func modeHeat(x float64) float64 {
	if !(x > 0) || x > 1400 {
		return 0
	}
	h := x / 2 / math.Sinh(x/2)
	return h * h
}
