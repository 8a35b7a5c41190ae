package transport

import (
	"fmt"
	"math"
	"sort"
	"strings"
)

// Isotope is one stable isotope of an element with its natural abundance.
type Isotope struct {
	MassNumber   int
	MassAmu      float64 // atomic mass, u
	AbundancePct float64 // natural abundance, atom per cent
}

// naturalIsotopes are the stable isotopes and natural abundances of the
// elements modegrid knows, transcribed from the NIST compilation "Atomic
// Weights and Isotopic Compositions" (Coursey, Schwab & Dragoset), whose
// abundances are the IUPAC isotopic compositions of the elements (Rosman
// & Taylor, Pure Appl. Chem. 70, 217 (1998), the Commission on Isotopic
// Abundances and Atomic Weights' 1997 table) and whose isotope masses are
// the Atomic Mass Evaluation (Audi & Wapstra, Nucl. Phys. A 595, 409
// (1995)). Only elements whose figures were transcribed from that table
// are listed; later CIAAW and AME editions differ in the last digits of
// some abundances, far below what a scattering rate depends on. Mono-
// isotopic elements have mass variance 0. An element not listed needs the
// mass variance given explicitly.
var naturalIsotopes = map[string][]Isotope{
	"H":  {{1, 1.0078250321, 99.9885}, {2, 2.014101778, 0.0115}},
	"Li": {{6, 6.0151223, 7.59}, {7, 7.016004, 92.41}},
	"B":  {{10, 10.012937, 19.9}, {11, 11.0093055, 80.1}},
	"C":  {{12, 12.0, 98.93}, {13, 13.0033548378, 1.07}},
	"N":  {{14, 14.0030740052, 99.632}, {15, 15.0001088984, 0.368}},
	"O":  {{16, 15.9949146221, 99.757}, {17, 16.9991315, 0.038}, {18, 17.9991604, 0.205}},
	"F":  {{19, 18.9984032, 100.0}},
	"Na": {{23, 22.98976967, 100.0}},
	"Mg": {{24, 23.9850419, 78.99}, {25, 24.98583702, 10.0}, {26, 25.98259304, 11.01}},
	"Al": {{27, 26.98153844, 100.0}},
	"Si": {{28, 27.9769265327, 92.2297}, {29, 28.97649472, 4.6832}, {30, 29.97377022, 3.0872}},
	"P":  {{31, 30.97376151, 100.0}},
	"S":  {{32, 31.97207069, 94.93}, {33, 32.9714585, 0.76}, {34, 33.96786683, 4.29}, {36, 35.96708088, 0.02}},
	"Cl": {{35, 34.96885271, 75.78}, {37, 36.9659026, 24.22}},
	"K":  {{39, 38.9637069, 93.2581}, {40, 39.96399867, 0.0117}, {41, 40.96182597, 6.7302}},
	"Ca": {{40, 39.9625912, 96.941}, {42, 41.9586183, 0.647}, {43, 42.9587668, 0.135}, {44, 43.9554811, 2.086}, {46, 45.9536928, 0.004}, {48, 47.952534, 0.187}},
	"Ti": {{46, 45.9526295, 8.25}, {47, 46.9517638, 7.44}, {48, 47.9479471, 73.72}, {49, 48.9478708, 5.41}, {50, 49.9447921, 5.18}},
	"Fe": {{54, 53.9396148, 5.845}, {56, 55.9349421, 91.754}, {57, 56.9353987, 2.119}, {58, 57.9332805, 0.282}},
	"Ni": {{58, 57.9353479, 68.0769}, {60, 59.9307906, 26.2231}, {61, 60.9310604, 1.1399}, {62, 61.9283488, 3.6345}, {64, 63.9279696, 0.9256}},
	"Cu": {{63, 62.9296011, 69.17}, {65, 64.9277937, 30.83}},
	"Zn": {{64, 63.9291466, 48.63}, {66, 65.9260368, 27.9}, {67, 66.9271309, 4.1}, {68, 67.9248476, 18.75}, {70, 69.925325, 0.62}},
	"Ga": {{69, 68.925581, 60.108}, {71, 70.924705, 39.892}},
	"Ge": {{70, 69.9242504, 20.84}, {72, 71.9220762, 27.54}, {73, 72.9234594, 7.73}, {74, 73.9211782, 36.28}, {76, 75.9214027, 7.61}},
	"As": {{75, 74.9215964, 100.0}},
	"Se": {{74, 73.9224766, 0.89}, {76, 75.9192141, 9.37}, {77, 76.9199146, 7.63}, {78, 77.9173095, 23.77}, {80, 79.9165218, 49.61}, {82, 81.9167, 8.73}},
	"Sr": {{84, 83.913425, 0.56}, {86, 85.9092624, 9.86}, {87, 86.9088793, 7.0}, {88, 87.9056143, 82.58}},
	"Zr": {{90, 89.9047037, 51.45}, {91, 90.905645, 11.22}, {92, 91.9050401, 17.15}, {94, 93.9063158, 17.38}, {96, 95.908276, 2.8}},
	"Mo": {{92, 91.90681, 14.84}, {94, 93.9050876, 9.25}, {95, 94.9058415, 15.92}, {96, 95.9046789, 16.68}, {97, 96.906021, 9.55}, {98, 97.9054078, 24.13}, {100, 99.907477, 9.63}},
	"Ag": {{107, 106.905093, 51.839}, {109, 108.904756, 48.161}},
	"Cd": {{106, 105.906458, 1.25}, {108, 107.904183, 0.89}, {110, 109.903006, 12.49}, {111, 110.904182, 12.8}, {112, 111.9027572, 24.13}, {113, 112.9044009, 12.22}, {114, 113.9033581, 28.73}, {116, 115.904755, 7.49}},
	"In": {{113, 112.904061, 4.29}, {115, 114.903878, 95.71}},
	"Sn": {{112, 111.904821, 0.97}, {114, 113.902782, 0.66}, {115, 114.903346, 0.34}, {116, 115.901744, 14.54}, {117, 116.902954, 7.68}, {118, 117.901606, 24.22}, {119, 118.903309, 8.59}, {120, 119.9021966, 32.58}, {122, 121.9034401, 4.63}, {124, 123.9052746, 5.79}},
	"Sb": {{121, 120.903818, 57.21}, {123, 122.9042157, 42.79}},
	"Te": {{120, 119.90402, 0.09}, {122, 121.9030471, 2.55}, {123, 122.904273, 0.89}, {124, 123.9028195, 4.74}, {125, 124.9044247, 7.07}, {126, 125.9033055, 18.84}, {128, 127.9044614, 31.74}, {130, 129.9062228, 34.08}},
	"Ba": {{130, 129.90631, 0.106}, {132, 131.905056, 0.101}, {134, 133.904503, 2.417}, {135, 134.905683, 6.592}, {136, 135.90457, 7.854}, {137, 136.905821, 11.232}, {138, 137.905241, 71.698}},
	"W":  {{180, 179.946706, 0.12}, {182, 181.948206, 26.5}, {183, 182.9502245, 14.31}, {184, 183.9509326, 30.64}, {186, 185.954362, 28.43}},
	"Pt": {{190, 189.95993, 0.014}, {192, 191.961035, 0.782}, {194, 193.962664, 32.967}, {195, 194.964774, 33.832}, {196, 195.964935, 25.242}, {198, 197.967876, 7.163}},
	"Au": {{197, 196.966552, 100.0}},
	"Pb": {{204, 203.973029, 1.4}, {206, 205.974449, 24.1}, {207, 206.975881, 22.1}, {208, 207.976636, 52.4}},
	"Bi": {{209, 208.980383, 100.0}},
}

// NaturalIsotopes returns the table's isotopes of the element with the
// given symbol (case as in the periodic table: "Si", "Ge"), false when
// the element is not in the table.
func NaturalIsotopes(symbol string) ([]Isotope, bool) {
	iso, ok := naturalIsotopes[symbol]
	return append([]Isotope(nil), iso...), ok
}

// KnownElements lists the symbols of the table, sorted.
func KnownElements() []string {
	out := make([]string, 0, len(naturalIsotopes))
	for s := range naturalIsotopes {
		out = append(out, s)
	}
	sort.Strings(out)
	return out
}

// MassVariance is the mass-variance parameter of an isotope mixture,
// g₂ = Σ_i f_i (1 − m_i/m̄)² with f_i the fractions (abundances normalised
// to sum 1) and m̄ = Σ f_i m_i (Tamura, Phys. Rev. B 27, 858 (1983),
// eq. (2)); it also returns m̄ in u.
func MassVariance(iso []Isotope) (g2, meanAmu float64) {
	var tot float64
	for _, x := range iso {
		tot += x.AbundancePct
		meanAmu += x.AbundancePct * x.MassAmu
	}
	if !(tot > 0) {
		return 0, 0
	}
	meanAmu /= tot
	for _, x := range iso {
		d := 1 - x.MassAmu/meanAmu
		g2 += x.AbundancePct / tot * d * d
	}
	return g2, meanAmu
}

// ElementOf returns the element symbol a site label names: the label
// itself, or its leading letters up to the first character that is not a
// letter ("Si1" → "Si", "Ga_a" → "Ga"), when that is in the table.
func ElementOf(label string) (string, bool) {
	if _, ok := naturalIsotopes[label]; ok {
		return label, true
	}
	end := strings.IndexFunc(label, func(r rune) bool { return !(r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z') })
	if end > 0 {
		if _, ok := naturalIsotopes[label[:end]]; ok {
			return label[:end], true
		}
	}
	return "", false
}

// SiteMassVariance is g₂ of the natural isotopes of the element a site's
// label names; an unknown element is an error saying to give g₂.
func SiteMassVariance(label string) (float64, error) {
	el, ok := ElementOf(label)
	if !ok {
		return 0, fmt.Errorf("the label %q names no element of the built-in isotope table (%d elements: %s): give its mass variance g₂ explicitly", label, len(naturalIsotopes), strings.Join(KnownElements(), " "))
	}
	g2, _ := MassVariance(naturalIsotopes[el])
	if g2 < 1e-20 {
		g2 = 0 // mono-isotopic: rounding of the formula
	}
	return g2, nil
}

// finite reports whether x is a finite number.
func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }
