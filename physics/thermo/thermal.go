package thermo

import (
	"context"
	"errors"
	"fmt"
	"math"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/internal/parallel"
	"github.com/materials-lab/modegrid/physics/spectra"
)

// ErrUnstable is wrapped by ComputeThermal when the grid has imaginary
// modes and the caller did not allow them.
var ErrUnstable = errors.New("the model is dynamically unstable")

// ThermalRoute selects how ComputeThermal takes its sums.
type ThermalRoute int

// Thermal routes. ModeSum is the zero value.
const (
	// ModeSum is the exact sum over the grid's modes with their weights.
	ModeSum ThermalRoute = iota
	// DOSIntegral integrates the tetrahedron DOS of the grid (2000 bins up
	// to the highest mode, midpoint rule). Mean-square displacements are
	// always mode sums.
	DOSIntegral
)

func (r ThermalRoute) String() string {
	switch r {
	case ModeSum:
		return "mode-sum"
	case DOSIntegral:
		return "dos-integral"
	}
	return fmt.Sprintf("ThermalRoute(%d)", int(r))
}

// ThermalOptions configures ComputeThermal.
type ThermalOptions struct {
	TempsK        []float64 // temperatures, K, each in [0, MaxTempK]
	Route         ThermalRoute
	AllowUnstable bool // exclude (and count) imaginary modes instead of failing
	MSD           bool // mean-square displacements (the grid needs Eigvecs)
}

// SiteMSD is the mean-square displacement of one site.
type SiteMSD struct {
	U    [9]float64 // ⟨u uᵀ⟩, Å², row-major; rows and columns past p are 0
	UIso float64    // ⟨u²⟩/3 = trace(U)/3, Å²
	B    float64    // Debye–Waller B = 8π²⟨u²⟩/3, Å²
	// Divergent is set when ⟨u²⟩ of the infinite crystal is infinite (one
	// dimension at any T, zero-point included; two dimensions at T > 0;
	// only for models whose acoustic modes go to zero at Γ). U, UIso and B
	// are then the sums on this grid only, growing without bound with it
	// (like N in 1D at T > 0, like ln N in 1D at T = 0 and in 2D), not a
	// property of the crystal; DivergentReason says so. A finite crystal
	// (GridSpec.Finite) is never flagged: its sums are its own, finite
	// ⟨u²⟩ (relative to its centre of mass), which grow with its size.
	Divergent       bool
	DivergentReason string
}

// ThermalPoint holds the harmonic thermodynamics of one cell at one
// temperature. Per mole of cells: EVToKJPerMol, EVPerKToJPerMolK.
type ThermalPoint struct {
	TempK    float64
	UeV      float64 // internal energy, zero-point included
	FeV      float64 // Helmholtz free energy, zero-point included
	SeVPerK  float64 // entropy
	CveVPerK float64 // heat capacity at constant volume
	// ThetaDK is the Debye temperature equivalent θ_D(T), K: the θ for
	// which the Debye model of the crystal's dimensionality has the model's
	// heat capacity per mode at T. It is meaningful only as ThetaDStatus
	// says: ThetaDetermined (θ_D(T)), ThetaElasticLimit (T = 0: the elastic
	// θ_D, its T → 0 limit); otherwise it is 0 and ThetaDReason says why
	// (see debyeThetaChecked for the criteria).
	ThetaDK      float64
	ThetaDStatus ThetaStatus
	ThetaDReason string
	MSD          []SiteMSD // per site (MSD only)
}

// ThermalResult is ComputeThermal's answer.
type ThermalResult struct {
	Points []ThermalPoint // in the order of TempsK
	ZPEeV  float64        // zero-point energy per cell, Σ hν/2
	// ThetaElasticK is θ_D from the sound velocities in the elastic limit,
	// 0 when undefined (p < d, or a zero or imaginary sound velocity).
	ThetaElasticK float64
	// ImaginaryExcluded counts the imaginary modes (q-point × branch) left
	// out when AllowUnstable.
	ImaginaryExcluded int
	// ZeroExcluded counts the other modes left out (q-point × branch): the
	// p acoustic modes at Γ when the grid holds Γ (exactly 0 — rounding
	// noise is already 0, doc.go, Zero and imaginary modes — or not
	// counted imaginary for a model breaking the sum rule), and modes the
	// solver returns as exactly zero (a flat zero branch). Every positive
	// frequency is summed, however low: the DOS holds the same modes.
	ZeroExcluded int
	// ModesPerCell is the weight of the modes summed: p·sites less the
	// excluded modes' weights (for DOSIntegral, the integral of the DOS).
	ModesPerCell float64
}

// Thermal limits.
const (
	MaxTempK        = 1e6     // highest temperature accepted
	MinTempK        = 1e-200  // below it (and above 0) a temperature is computed as its T → 0 limit
	MaxTemperatures = 100_000 // most temperatures in one call
	// dosRouteBins is the number of DOS bins the DOSIntegral route uses.
	dosRouteBins = 2000
)

// ComputeThermal returns the harmonic thermal properties of model m from
// its modes g at every temperature of opt.TempsK: U, F, S and Cv per cell
// (U and F include the zero-point energy), θ_D(T), and with opt.MSD the
// mean-square displacement tensor of every site (Maradudin, Montroll &
// Weiss, Theory of Lattice Dynamics in the Harmonic Approximation, 1963;
// Ashcroft & Mermin ch. 23; B. T. M. Willis & A. W. Pryor, Thermal
// Vibrations in Crystallography, 1975, ch. 4):
//
//	U = Σ w hν (½ + n),  F = Σ w [hν/2 + kT ln(1 − e^(−x))],
//	S = k Σ w [x n − ln(1 − e^(−x))],  Cv = k Σ w x² n (1 + n),
//	⟨u uᵀ⟩_s = Σ w ħ/(2 m_s ω) (1 + 2n) Re(e_s e_s†),
//
// x = hν/kT, n = 1/(eˣ − 1), over every mode with weight w of its q-point.
// The p acoustic modes at Γ (uniform translations, zero to rounding) and
// modes of zero or negative frequency are left out: they carry no energy
// and their entropy is not defined; every positive mode is summed (see
// ThermalResult.ZeroExcluded). θ_D(T) comes with a status (ThetaStatus):
// where the grid cannot determine it, it is 0 with the reason. Imaginary
// modes (as counted by DOSResult.Imaginary) make it fail with an error
// wrapping ErrUnstable unless opt.AllowUnstable, which leaves them out and
// counts them. For a
// finite crystal (GridSpec.Finite) every quantity is the exact sum over its
// allowed modes. Bad options give a *ValidationError naming the fields
// ("temperatures_k[3]", "route").
func ComputeThermal(ctx context.Context, m *physics.Model, g *physics.GridModes, opt ThermalOptions) (*ThermalResult, error) {
	return computeThermal(ctx, m, g, opt, evalAuto)
}

// evalMode forces the evaluation strategy (tests compare them).
type evalMode int

const (
	evalAuto   evalMode = iota
	evalDirect          // every mode at every temperature
	evalTree            // frequency tree with Taylor series
)

// computeThermal is ComputeThermal with the evaluation strategy forced by
// mode (evalAuto in production).
func computeThermal(ctx context.Context, m *physics.Model, g *physics.GridModes, opt ThermalOptions, mode evalMode) (*ThermalResult, error) {
	st, err := checkThermalInput(m, g, opt)
	if err != nil {
		return nil, err
	}
	res := &ThermalResult{ImaginaryExcluded: st.Imaginary}
	ms, err := thermalModeSets(ctx, m, g, st, opt, res)
	if err != nil {
		return nil, err
	}
	temps := computedTemps(opt.TempsK)
	sums, err := evalSums(ctx, ms.thermo, temps, mode)
	if err != nil {
		return nil, err
	}
	msdSums := sums
	if opt.MSD && ms.thermo != ms.grid {
		// The DOS carries no eigenvectors: displacements stay mode sums.
		if msdSums, err = evalSums(ctx, ms.grid, temps, mode); err != nil {
			return nil, err
		}
	}
	if res.ThetaElasticK, err = m.ElasticDebyeTemperature(ctx); err != nil {
		return nil, err
	}
	var msdNote msdDivergence
	if opt.MSD {
		msdNote = msdDivergenceOf(m, g, st)
	}
	res.Points = make([]ThermalPoint, len(temps))
	for i, tK := range temps {
		if i%pollEvery == 0 && ctx.Err() != nil {
			return nil, ctx.Err() // θ_D is a root search per temperature
		}
		p := res.point(opt.TempsK[i], tK, sums[i], ms.theta)
		if opt.MSD {
			p.MSD = ms.grid.assembleMSD(msdSums[i][3:])
			msdNote.mark(p.MSD, tK)
		}
		res.Points[i] = p
	}
	return res, nil
}

// checkThermalInput checks the grid against the model, the options, and
// the eigenvectors MSD needs, then refuses imaginary modes unless
// opt.AllowUnstable; it returns the grid's frequency statistics.
func checkThermalInput(m *physics.Model, g *physics.GridModes, opt ThermalOptions) (spectra.Spectrum, error) {
	if err := physics.CheckGridModes(m, g); err != nil {
		return spectra.Spectrum{}, err
	}
	if err := opt.validate(); err != nil {
		return spectra.Spectrum{}, err
	}
	if opt.MSD && len(g.Eigvecs) != len(g.FreqTHz)*g.NModes {
		return spectra.Spectrum{}, errors.New("physics: mean-square displacements need grid modes with eigenvectors (GridOptions.Eigenvectors)")
	}
	st := spectra.Stats(g)
	if st.Imaginary > 0 && !opt.AllowUnstable {
		return spectra.Spectrum{}, fmt.Errorf("%w: %d of %d modes on the grid are imaginary (lowest %.6g THz)",
			ErrUnstable, st.Imaginary, len(g.FreqTHz), st.MinTHz)
	}
	return st, nil
}

// thermalSets are the mode sets of one thermal computation: grid, the
// grid's modes (weights and, for MSD, the tensor channels); thermo, the
// modes the thermal sums run over (grid itself, or the binned DOS for the
// DOSIntegral route); and the θ_D input common to every temperature.
type thermalSets struct {
	grid, thermo *modeSet
	theta        thetaInput
}

// thermalModeSets collects the mode sets of the route opt.Route and fills
// res.ZeroExcluded, res.ZPEeV and res.ModesPerCell from them.
func thermalModeSets(ctx context.Context, m *physics.Model, g *physics.GridModes, st spectra.Spectrum, opt ThermalOptions, res *ThermalResult) (thermalSets, error) {
	grid, zeroWeight, zeros, err := collectModes(ctx, m, g, st, opt.MSD)
	if err != nil {
		return thermalSets{}, err
	}
	res.ZeroExcluded = zeros
	thermo := grid
	binTHz := 0.0
	if opt.Route == DOSIntegral {
		if thermo, binTHz, err = dosModes(ctx, m, g, st); err != nil {
			return thermalSets{}, err
		}
		zeroWeight = 0 // the DOS holds every state
	}
	for i, f := range thermo.nu {
		res.ZPEeV += thermo.ch[i*thermo.nc] * f * physics.THzToEV / 2
		res.ModesPerCell += thermo.ch[i*thermo.nc]
	}
	theta := thetaInput{dim: m.Dim(), modesPerCell: res.ModesPerCell, zeroWeight: zeroWeight,
		nuLowTHz: lowestMode(grid.nu), binTHz: binTHz, finite: g.Spec.Finite}
	return thermalSets{grid: grid, thermo: thermo, theta: theta}, nil
}

// computedTemps returns the temperatures as computed: below MinTempK,
// k_B·T underflows against hν (x = hν/k_BT overflows), so such
// temperatures are computed as their T → 0 limit (0).
func computedTemps(tempsK []float64) []float64 {
	temps := make([]float64, len(tempsK))
	for i, t := range tempsK {
		if t >= MinTempK {
			temps[i] = t
		}
	}
	return temps
}

// point is the thermal point at temperature tempK (as asked) computed at
// tK (0 below MinTempK) from the mode sums s of directSums, without the
// displacements; res carries the zero-point energy, the modes per cell and
// the elastic θ_D.
func (res *ThermalResult) point(tempK, tK float64, s []float64, theta thetaInput) ThermalPoint {
	kB := physics.BoltzmannEVPerK
	p := ThermalPoint{TempK: tempK, UeV: res.ZPEeV, FeV: res.ZPEeV}
	if !(tK > 0) {
		p.ThetaDK, p.ThetaDStatus, p.ThetaDReason = zeroTempTheta(res.ThetaElasticK)
		return p
	}
	kappa := physics.THzToKelvin / tK
	p.UeV += physics.THzToEV * s[0]
	p.FeV += kB * tK * s[1]
	p.SeVPerK = kB * (kappa*s[0] - s[1])
	p.CveVPerK = kB * s[2]
	in := theta
	in.tempK = tK
	if res.ModesPerCell > 0 {
		in.c = s[2] / res.ModesPerCell
	}
	p.ThetaDK, p.ThetaDStatus, p.ThetaDReason = debyeThetaChecked(in)
	return p
}

// zeroTempTheta is θ_D at T = 0 (and below MinTempK): θ_D(T) is a ratio
// of vanishing quantities there, defined only as its T → 0 limit, the
// elastic θ_D of the bulk crystal (Kittel ch. 5).
func zeroTempTheta(elasticK float64) (float64, ThetaStatus, string) {
	if elasticK > 0 {
		return elasticK, ThetaElasticLimit, "T = 0: the elastic Debye temperature, the T → 0 limit of θ_D(T)"
	}
	return 0, ThetaUndefined, "T = 0, where θ_D(T) is only a limit, and the elastic Debye temperature is not defined for this model"
}

// lowestMode returns the lowest of nu (THz, all > 0), +Inf when empty.
func lowestMode(nu []float64) float64 {
	low := math.Inf(1)
	for _, f := range nu {
		if f < low {
			low = f
		}
	}
	return low
}

// evalSums returns, for every temperature, the sums of directSums over the
// modes of set (all zero at T = 0), spread over the cores by temperature.
func evalSums(ctx context.Context, set *modeSet, temps []float64, mode evalMode) ([][]float64, error) {
	var tree *modeTree
	if len(set.nu) > 0 && (mode == evalTree || (mode == evalAuto && set.worthTree(len(temps)))) {
		var err error
		if tree, err = newModeTree(ctx, set); err != nil {
			return nil, err
		}
	}
	sums := make([][]float64, len(temps))
	for i := range sums {
		sums[i] = make([]float64, 2+set.nc)
	}
	const chunk = 4
	err := parallel.Slices(ctx, len(temps), chunk, parallel.SliceCount(len(temps), chunk), func(_, lo, hi int) {
		var sc seriesScratch
		for i := lo; i < hi; i++ {
			if !(temps[i] > 0) {
				continue
			}
			kappa := physics.THzToKelvin / temps[i] // h/kT in 1/THz
			if tree != nil {
				tree.eval(kappa, sums[i], &sc)
			} else {
				directSums(kappa, set.nu, set.ch, set.nc, sums[i])
			}
		}
	})
	return sums, err
}

// Validate checks the options alone and returns a *ValidationError listing
// every violation with field paths relative to ThermalOptions
// ("temperatures_k", "temperatures_k[i]", "route"), or nil. ComputeThermal
// runs it; a caller checks a request with it before any work.
func (o ThermalOptions) Validate() error { return o.validate() }

// validate checks the options alone, listing every violation.
func (o ThermalOptions) validate() error {
	var vs physics.Violations
	switch {
	case len(o.TempsK) == 0:
		vs.Add("temperatures_k", "at least one temperature is needed")
	case len(o.TempsK) > MaxTemperatures:
		vs.Add("temperatures_k", "%d temperatures, more than the limit of %d", len(o.TempsK), MaxTemperatures)
	}
	for i, t := range o.TempsK {
		if math.IsNaN(t) || t < 0 || t > MaxTempK {
			vs.Add(fmt.Sprintf("temperatures_k[%d]", i), "must be in [0, %g] K, got %v", MaxTempK, t)
		}
	}
	if o.Route < ModeSum || o.Route > DOSIntegral {
		vs.Add("route", "unknown route %d", int(o.Route))
	}
	return vs.Err()
}

// modeSet is a list of modes with positive frequency and per-mode weight
// channels: channel 0 is the mode's weight per cell, channels 1… (MSD only)
// the tensor weights A = w ħ/(2 m_s ω) Re(e_sα e_sβ*) in Å², site-major,
// (α, β) over the p(p+1)/2 pairs α ≤ β. zero holds Σ A per channel, the
// zero-point displacement.
type modeSet struct {
	nu   []float64 // THz, > 0
	ch   []float64 // len(nu)*nc
	nc   int
	zero []float64 // nc − 1 channel totals (MSD only)

	p, nsites int
}

// worthTree says whether the frequency tree beats summing every mode at
// every temperature (it costs about one pass over the modes per channel to
// build, then a few hundred series per temperature).
func (s *modeSet) worthTree(ntemps int) bool {
	return len(s.nu) >= 4096 && ntemps >= 4 && len(s.nu)*ntemps > 1<<20
}

// dosModes turns the tetrahedron DOS of g into pseudo-modes for the
// DOSIntegral route: dosRouteBins bins of width h from 0 to just above the
// highest mode, each a mode at its centre (i + ½)h carrying the states of
// the bin (midpoint rule); it also returns h. Imaginary states are cut off
// as in ComputeDOS.
func dosModes(ctx context.Context, m *physics.Model, g *physics.GridModes, st spectra.Spectrum) (*modeSet, float64, error) {
	top := st.MaxTHz
	set := &modeSet{nc: 1, p: g.P, nsites: g.NSites}
	if !(top > 0) {
		return set, 0, nil
	}
	h := top / dosRouteBins * (1 + 1e-9)
	d, err := spectra.ComputeDOS(ctx, m, g, spectra.DOSOptions{Min: h / 2, Max: h / 2 * (2*dosRouteBins - 1), Step: h})
	if err != nil {
		return nil, 0, err
	}
	for i, f := range d.Freq {
		if w := d.DOS[i] * h; w > 0 {
			set.nu = append(set.nu, f)
			set.ch = append(set.ch, w)
		}
	}
	return set, h, nil
}

// directSums adds, for every mode, the temperature-dependent sums at κ =
// h/kT (1/THz): out[0] += w ν n, out[1] += w ln(1 − e^(−x)), out[2] += w x²
// n(1+n), out[2+c] += A_c n for the channels c ≥ 1; x = κν, n = 1/(eˣ−1).
func directSums(kappa float64, nu, ch []float64, nc int, out []float64) {
	for i, f := range nu {
		x := kappa * f
		if x > 745 { // e^(−x) underflows: the mode is frozen out
			continue
		}
		n := 1 / math.Expm1(x)
		var l float64
		if x > math.Ln2 {
			l = math.Log1p(-math.Exp(-x))
		} else {
			l = math.Log(-math.Expm1(-x))
		}
		row := ch[i*nc : i*nc+nc]
		w := row[0]
		out[0] += w * f * n
		out[1] += w * l
		out[2] += w * x * x * n * (1 + n)
		for c := 1; c < nc; c++ {
			out[2+c] += row[c] * n
		}
	}
}

// pollEvery is how many temperatures (or modes) a loop runs between polls
// of its context, as in the core: a few hundred iterations of a cheap loop
// are well under a millisecond.
const pollEvery = 256
