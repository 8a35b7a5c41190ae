package scatter

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"sync"
)

// Element is one row of the built-in neutron table: bound scattering
// lengths and cross-sections of the element in natural isotopic abundance.
type Element struct {
	Symbol         string
	Z              int
	CoherentFm     float64 // bound coherent scattering length b_c, fm
	CoherentBarn   float64 // bound coherent cross-section σ_coh, barn
	IncoherentBarn float64 // bound incoherent cross-section σ_inc, barn
	WeightAmu      float64 // standard atomic weight, amu (for the mass check only)
	// text is the row as transcribed (the tests read the printed digits).
	text string
}

// neutronTable is the built-in table, one element per line:
//
//	symbol  Z  b_c (fm)  σ_coh (barn)  σ_inc (barn)  atomic weight (amu)
//
// Scattering lengths and cross-sections: V. F. Sears, "Neutron scattering
// lengths and cross sections", Neutron News 3(3), 26–37 (1992), bound
// values of the elements in natural abundance. Every row was checked
// against the later compilation of H. Rauch & W. Waschkowski, "Neutron
// scattering lengths", ILL Neutron Data Booklet, 2nd ed. (2003), §1.1,
// which repeats these σ_coh and σ_inc and, for most elements, b_c; it
// revises b_c of H, C, O, Si, Cl, Sc, Ti, V, Mn, Br, Rb, Te, Xe, W, Au and
// Pb from newer measurements, and there the 1992 value is kept (each one
// consistent with its σ_coh = 4π b_c², which the tests check for every
// row). Left out on purpose: strong absorbers whose b is complex and
// energy dependent (B, Cd, Sm, Eu, Gd, …), elements whose σ_inc is an
// estimate, and every element not listed: give their lengths in the
// request. Atomic weights: IUPAC standard atomic weights (T. B. Coplen,
// Pure Appl. Chem. 73, 667 (2001), and later CIAAW revisions), to 4–6
// figures; they serve only the check that a labelled site has the
// element's natural mass (mass check in Lookup).
const neutronTable = `
H   1  -3.7390  1.7568  80.26   1.008
Li  3  -1.90    0.454   0.92    6.94
Be  4   7.79    7.63    0.0018  9.012
C   6   6.6460  5.551   0.001   12.011
N   7   9.36    11.01   0.50    14.007
O   8   5.803   4.232   0.0008  15.999
F   9   5.654   4.017   0.0008  18.998
Ne  10  4.566   2.620   0.008   20.180
Na  11  3.63    1.66    1.62    22.990
Mg  12  5.375   3.631   0.08    24.305
Al  13  3.449   1.495   0.0082  26.982
Si  14  4.1491  2.1633  0.004   28.085
P   15  5.13    3.307   0.005   30.974
S   16  2.847   1.0186  0.007   32.06
Cl  17  9.5770  11.5257 5.3     35.45
Ar  18  1.909   0.458   0.225   39.948
K   19  3.67    1.69    0.27    39.098
Ca  20  4.70    2.78    0.05    40.078
Sc  21  12.29   19.0    4.5     44.956
Ti  22  -3.438  1.485   2.87    47.867
V   23  -0.3824 0.01838 5.08    50.942
Cr  24  3.635   1.660   1.83    51.996
Mn  25  -3.73   1.75    0.40    54.938
Fe  26  9.45    11.22   0.40    55.845
Co  27  2.49    0.779   4.8     58.933
Ni  28  10.3    13.3    5.2     58.693
Cu  29  7.718   7.485   0.55    63.546
Zn  30  5.680   4.054   0.077   65.38
Ga  31  7.288   6.675   0.16    69.723
Ge  32  8.185   8.42    0.18    72.630
As  33  6.58    5.44    0.060   74.922
Se  34  7.970   7.98    0.32    78.971
Br  35  6.795   5.80    0.10    79.904
Kr  36  7.81    7.67    0.01    83.798
Rb  37  7.09    6.32    0.5     85.468
Sr  38  7.02    6.19    0.06    87.62
Y   39  7.75    7.55    0.15    88.906
Zr  40  7.16    6.44    0.02    91.224
Nb  41  7.054   6.253   0.0024  92.906
Mo  42  6.715   5.67    0.04    95.95
Ag  47  5.922   4.407   0.58    107.868
In  49  4.065   2.08    0.54    114.818
Sn  50  6.225   4.871   0.022   118.710
Sb  51  5.57    3.90    0.00    121.760
Te  52  5.80    4.23    0.09    127.60
I   53  5.28    3.50    0.31    126.904
Xe  54  4.92    3.04    0       131.293
Cs  55  5.42    3.69    0.21    132.905
Ba  56  5.07    3.23    0.15    137.327
La  57  8.24    8.53    1.13    138.905
Ce  58  4.84    2.94    0.00    140.116
W   74  4.86    2.97    1.63    183.84
Pt  78  9.60    11.58   0.13    195.084
Au  79  7.63    7.32    0.43    196.967
Pb  82  9.405   11.115  0.003   207.2
Bi  83  8.532   9.148   0.0084  208.980
`

// MassTolerance is the largest relative difference between a site's mass
// and the element's standard atomic weight for Lookup to take the site as
// that element in natural abundance. 0.5 % passes masses typed to three or
// four figures (Si 28, Pb 207) and refuses isotopic substitutions, whose
// lengths differ (⁷Li is 1.1 % heavier than Li, ⁶³Cu 1 % lighter than Cu,
// D twice H).
const MassTolerance = 0.005

var (
	tableOnce sync.Once
	table     map[string]Element
	tableRows []Element
)

func loadTable() {
	table = map[string]Element{}
	for _, line := range strings.Split(strings.TrimSpace(neutronTable), "\n") {
		f := strings.Fields(line)
		num := func(i int) float64 {
			v, err := strconv.ParseFloat(f[i], 64)
			if err != nil {
				panic("scatter: bad table row " + line)
			}
			return v
		}
		z, err := strconv.Atoi(f[1])
		if err != nil || len(f) != 6 {
			panic("scatter: bad table row " + line)
		}
		e := Element{Symbol: f[0], Z: z, CoherentFm: num(2), CoherentBarn: num(3), IncoherentBarn: num(4), WeightAmu: num(5), text: line}
		table[e.Symbol] = e
		tableRows = append(tableRows, e)
	}
}

// Elements returns the built-in table in order of Z.
func Elements() []Element {
	tableOnce.Do(loadTable)
	return append([]Element(nil), tableRows...)
}

// ElementOf returns the table row of an element symbol (exact spelling:
// "Si", not "SI"), and whether there is one.
func ElementOf(symbol string) (Element, bool) {
	tableOnce.Do(loadTable)
	e, ok := table[symbol]
	return e, ok
}

// Lookup returns the neutron lengths of a site from its label and mass: the
// label must be an element symbol of the table, optionally followed by a
// non-letter suffix ("Si", "O2", "Fe_a", "Na+"), and the mass within
// MassTolerance of the element's atomic weight. Otherwise the error says
// why, and that the length must be given.
func Lookup(label string, massAmu float64) (Element, error) {
	sym := elementPrefix(label)
	e, ok := ElementOf(sym)
	if !ok {
		return Element{}, fmt.Errorf("no built-in scattering length for label %q: give it (coherent length in fm, incoherent cross-section in barn) in the request", label)
	}
	if math.Abs(massAmu-e.WeightAmu) > MassTolerance*e.WeightAmu {
		return Element{}, fmt.Errorf("label %q names %s, but the site's mass %g amu is not its natural atomic weight %g amu (an isotope or another species has other lengths): give the lengths in the request", label, e.Symbol, massAmu, e.WeightAmu)
	}
	return e, nil
}

// elementPrefix returns the element symbol a label starts with: one upper
// case letter and at most one lower case letter, up to the first
// character that is not a letter.
func elementPrefix(label string) string {
	n := 0
	for n < len(label) && (label[n] >= 'A' && label[n] <= 'Z' || label[n] >= 'a' && label[n] <= 'z') {
		n++
	}
	if n == 0 || n > 2 || label[0] < 'A' || label[0] > 'Z' || (n == 2 && (label[1] < 'a' || label[1] > 'z')) {
		return label
	}
	return label[:n]
}
