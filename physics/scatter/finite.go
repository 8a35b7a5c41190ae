package scatter

import (
	"errors"
	"fmt"
	"math"
)

// ErrOverflow is wrapped when a result does not fit in floating-point
// numbers: the one-phonon weights grow as 1/E, and as k_BT/E² at T > 0, so
// a model whose modes lie many orders of magnitude below any real crystal's
// (force constants near 1e-200 eV/Å²) has intensities beyond ±1.8e308, and
// its mean-square displacements can be too. The computation then fails
// rather than return ±Inf or NaN.
var ErrOverflow = errors.New("the result exceeds the range of floating-point numbers")

// allFinite reports whether every number of xs is finite.
func allFinite(xs []float64) bool {
	for _, x := range xs {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}

// overflow is the error of a non-finite result: what (e.g. "S(Q, E) at
// Q = …"), the highest mode energy seen (meV) and the temperature.
func overflow(what string, topMeV, tempK float64) error {
	return fmt.Errorf("%w: %s is not finite; the modes (the highest at %.3g meV) are too soft for one-phonon weights ∝ 1/E (k_BT/E² at %g K) to fit", ErrOverflow, what, topMeV, tempK)
}

// checkDW fails when a mean-square displacement is not finite.
func checkDW(dw *DWResult, tempK float64) error {
	for j, u := range dw.U {
		if !allFinite(u[:]) {
			return fmt.Errorf("%w: the mean-square displacement of site %d at %g K is not finite; the model's modes are too soft", ErrOverflow, j, tempK)
		}
	}
	return nil
}
