package fit

import (
	"math"
	"math/rand/v2"
	"testing"
)

// coverageReps is the number of seeded noisy fits of TestCoverage: enough
// that the binomial spread of a 95.4 % coverage (0.66 % at 1000) keeps
// the 93–97 % window at ±2.3 spreads and more.
const coverageReps = 1000

// TestCoverage: the coverage property of least-squares estimates (W. H.
// Press et al., Numerical Recipes, 3rd ed., §15.6): with Gaussian noise of
// the stated σ on the 40 frequencies of the typical fit, over 1000 seeded
// repetitions, the true value of each of the four parameters lies within
// ±2 reported standard errors in 93–97 % of the fits (95.4 % for a
// Gaussian, slightly less with the errors scaled by χ²/dof: Student's t
// with 36 degrees of freedom, 94.7 %), and the mean reported error
// matches the spread (standard deviation) of the estimates within 15 %.
func TestCoverage(t *testing.T) {
	p, truth := typicalProblem(t)
	p.Crystal = truth // the start does not matter to the estimate; at the truth fewer steps reach it
	want := make([]float64, len(rocksaltPaths))
	for j, path := range rocksaltPaths {
		want[j] = getPath(t, truth, path)
	}
	clean := append([]Frequency(nil), p.Frequencies...)
	rng := rand.New(rand.NewPCG(2024, 7))
	type tally struct{ inScaled, inUnscaled, n int }
	tallies := make([]tally, len(want))
	values := make([][]float64, len(want))
	errScaled := make([]float64, len(want))
	errUnscaled := make([]float64, len(want))
	for range coverageReps {
		for i, f := range clean {
			p.Frequencies[i].FreqTHz = f.FreqTHz + f.SigmaTHz*rng.NormFloat64()
		}
		res := fitOK(t, p)
		if !res.Converged {
			t.Fatalf("a noisy fit did not converge: %s", res.Stop)
		}
		for j, pr := range res.Params {
			d := math.Abs(pr.Value - want[j])
			tl := &tallies[j]
			tl.n++
			if d <= 2*pr.StdErr {
				tl.inScaled++
			}
			if d <= 2*pr.StdErrUnscaled {
				tl.inUnscaled++
			}
			values[j] = append(values[j], pr.Value)
			errScaled[j] += pr.StdErr / coverageReps
			errUnscaled[j] += pr.StdErrUnscaled / coverageReps
		}
	}
	for j, tl := range tallies {
		spread := stddev(values[j])
		cs, cu := float64(tl.inScaled)/float64(tl.n), float64(tl.inUnscaled)/float64(tl.n)
		t.Logf("%s: within ±2σ %.1f %% (scaled), %.1f %% (unscaled); mean error %.4g (scaled), %.4g (unscaled), spread %.4g",
			rocksaltPaths[j], 100*cs, 100*cu, errScaled[j], errUnscaled[j], spread)
		for _, c := range []float64{cs, cu} {
			if c < 0.93 || c > 0.97 {
				t.Errorf("%s: the truth is within ±2σ in %.1f %% of the fits; want 93–97 %%", rocksaltPaths[j], 100*c)
			}
		}
		for _, e := range []float64{errScaled[j], errUnscaled[j]} {
			if r := e / spread; r < 0.85 || r > 1.15 {
				t.Errorf("%s: mean reported error %.4g is %.3f of the spread %.4g; want within 15 %%", rocksaltPaths[j], e, r, spread)
			}
		}
	}
}

// stddev is the sample standard deviation (n − 1).
func stddev(x []float64) float64 {
	var m float64
	for _, v := range x {
		m += v
	}
	m /= float64(len(x))
	var s float64
	for _, v := range x {
		s += (v - m) * (v - m)
	}
	return math.Sqrt(s / float64(len(x)-1))
}
