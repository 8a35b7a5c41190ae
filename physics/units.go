// Physical constants (CODATA 2018) and frequency units: the one place
// every factor of the engine comes from.

package physics

import "math"

// Physical constants, CODATA 2018 (NIST, "Fundamental Physical Constants",
// 2018 adjustment). Exact values are marked.
const (
	BoltzmannJPerK      = 1.380649e-23   // k_B, J/K (exact)
	PlanckJS            = 6.62607015e-34 // h, J·s (exact)
	ReducedPlanckJS     = PlanckJS / (2 * math.Pi)
	ElementaryChargeC   = 1.602176634e-19           // e, C (exact)
	AtomicMassKg        = 1.66053906660e-27         // m_u, kg
	AvogadroPerMol      = 6.02214076e23             // N_A, 1/mol (exact)
	SpeedOfLightMPerS   = 299792458.0               // c, m/s (exact)
	EVPerA2InNPerM      = ElementaryChargeC / 1e-20 // 1 eV/Å² in N/m = 16.02176634 (exact)
	BoltzmannEVPerK     = BoltzmannJPerK / ElementaryChargeC
	GasConstantJPerMolK = BoltzmannJPerK * AvogadroPerMol // R
	AngstromM           = 1e-10                           // 1 Å in m (exact)
	// ε₀, the vacuum electric permittivity, F/m (CODATA 2018; no longer
	// exact since the 2019 SI: relative standard uncertainty 1.5e-10).
	VacuumPermittivityFPerM = 8.8541878128e-12
)

// CoulombEVA is the Coulomb constant in the engine's units,
// e²/(4πε₀) = 14.3996454784 eV·Å: the energy in eV of two elementary
// charges 1 Å apart (CODATA 2018 e and ε₀).
const CoulombEVA = ElementaryChargeC / (4 * math.Pi * VacuumPermittivityFPerM * AngstromM)

// OmegaUnitRadPerS is ω in rad/s of an eigenvalue of 1 eV/Å²/amu:
// sqrt(e / (1e-20 m² · m_u)) ≈ 9.82269475e13 rad/s.
var OmegaUnitRadPerS = math.Sqrt(ElementaryChargeC / (AngstromM * AngstromM * AtomicMassKg))

// NuUnitTHz is ν in THz of an eigenvalue of 1 eV/Å²/amu, ≈ 15.6333042 THz.
var NuUnitTHz = OmegaUnitRadPerS / (2 * math.Pi) / 1e12

// Unit is a frequency unit for output.
type Unit int

// Frequency units. THz is the zero value.
const (
	THz     Unit = iota // terahertz, ν
	MeV                 // millielectronvolt, hν
	CM1                 // wavenumber ν/c in cm⁻¹
	RadPerS             // angular frequency ω in rad/s
)

// String returns the unit's short name as used in CSV headers.
func (u Unit) String() string {
	switch u {
	case MeV:
		return "mev"
	case CM1:
		return "cm-1"
	case RadPerS:
		return "rad_per_s"
	default:
		return "thz"
	}
}

// PerTHz is how many of unit u make 1 THz:
// 1 THz = 4.135667697 meV = 33.35640952 cm⁻¹ = 2π·1e12 rad/s.
func (u Unit) PerTHz() float64 {
	switch u {
	case MeV:
		return PlanckJS * 1e12 / ElementaryChargeC * 1e3
	case CM1:
		return 1e12 / (SpeedOfLightMPerS * 100)
	case RadPerS:
		return 2 * math.Pi * 1e12
	default:
		return 1
	}
}

// FromTHz converts a frequency in THz to unit u.
func (u Unit) FromTHz(nuTHz float64) float64 { return nuTHz * u.PerTHz() }

// ToTHz converts a frequency in unit u to THz.
func (u Unit) ToTHz(v float64) float64 { return v / u.PerTHz() }

// THzToEV is the energy hν in eV of 1 THz.
const THzToEV = PlanckJS * 1e12 / ElementaryChargeC

// THzToKelvin is hν/k_B in K of 1 THz (≈ 47.99243073 K).
const THzToKelvin = PlanckJS * 1e12 / BoltzmannJPerK

// eigToTHz converts an eigenvalue λ = ω² in eV/Å²/amu to a signed frequency
// in THz: negative for λ < 0 (imaginary modes).
func eigToTHz(lambda float64) float64 {
	if lambda < 0 {
		return -math.Sqrt(-lambda) * NuUnitTHz
	}
	return math.Sqrt(lambda) * NuUnitTHz
}

// Thermal units per mole.
// Thermal quantities are computed per cell; a mole of cells is N_A cells,
// so 1 eV per cell is e·N_A = 96.48533212 kJ/mol (the Faraday constant,
// CODATA 2018, exact).

// EVToKJPerMol converts an energy per cell in eV to kJ per mole of cells.
func EVToKJPerMol(x float64) float64 { return x * ElementaryChargeC * AvogadroPerMol / 1e3 }

// EVPerKToJPerMolK converts an entropy or heat capacity per cell in eV/K to
// J/(mol·K) per mole of cells.
func EVPerKToJPerMolK(x float64) float64 { return x * ElementaryChargeC * AvogadroPerMol }

// EVToKJPerKg converts an energy per cell in eV to kJ per kilogram of a
// crystal whose cell has mass cellMassAmu (amu → kg with m_u, CODATA 2018).
func EVToKJPerKg(x, cellMassAmu float64) float64 {
	return x * ElementaryChargeC / (cellMassAmu * AtomicMassKg) / 1e3
}

// EVPerKToJPerKgK converts an entropy or heat capacity per cell in eV/K to
// J/(kg·K) of a crystal whose cell has mass cellMassAmu.
func EVPerKToJPerKgK(x, cellMassAmu float64) float64 {
	return x * ElementaryChargeC / (cellMassAmu * AtomicMassKg)
}

// MolarMassConstantKgPerMol is M_u = m_u·N_A, kg/mol (≈ 0.99999999965e-3,
// CODATA 2018): the molar mass of a cell is its mass in amu times M_u.
const MolarMassConstantKgPerMol = AtomicMassKg * AvogadroPerMol
