package qha

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// leastSquares returns c minimising Σ_i (Σ_k rows[i][k] c_k − y_i)², by
// gonum's QR (rows must be at least as many as columns, full rank).
func leastSquares(rows [][]float64, y []float64) ([]float64, error) {
	m, n := len(rows), len(rows[0])
	a := mat.NewDense(m, n, nil)
	for i, r := range rows {
		a.SetRow(i, r)
	}
	var qr mat.QR
	qr.Factorize(a)
	var c mat.VecDense
	if err := qr.SolveVecTo(&c, false, mat.NewVecDense(m, append([]float64(nil), y...))); err != nil {
		return nil, fmt.Errorf("%w: least squares: %v", ErrFit, err)
	}
	out := make([]float64, n)
	for k := range out {
		out[k] = c.AtVec(k)
		if math.IsNaN(out[k]) || math.IsInf(out[k], 0) {
			return nil, fmt.Errorf("%w: least squares gave a non-finite coefficient", ErrFit)
		}
	}
	return out, nil
}

// solveSquare solves the square system rows·x = b.
func solveSquare(rows [][]float64, b []float64) ([]float64, error) {
	return leastSquares(rows, b)
}

// polyFit is a least-squares polynomial in u = V/Vs − 1 of a quantity
// sampled at volumes: c[k] the coefficient of u^k.
type polyFit struct {
	c      []float64
	vs     float64
	rms    float64 // root-mean-square residual
	maxAbs float64 // largest absolute residual
}

// fitPoly fits a polynomial of degree deg in V (centred and scaled at the
// mean volume) to y at volumes v.
func fitPoly(v, y []float64, deg int) (*polyFit, error) {
	var vs float64
	for _, x := range v {
		vs += x
	}
	vs /= float64(len(v))
	rows := make([][]float64, len(v))
	for i, x := range v {
		u := x/vs - 1
		rows[i] = make([]float64, deg+1)
		p := 1.0
		for k := 0; k <= deg; k++ {
			rows[i][k] = p
			p *= u
		}
	}
	c, err := leastSquares(rows, y)
	if err != nil {
		return nil, err
	}
	f := &polyFit{c: c, vs: vs}
	var ss float64
	for i, x := range v {
		r := y[i] - f.at(x)
		ss += r * r
		f.maxAbs = math.Max(f.maxAbs, math.Abs(r))
	}
	f.rms = math.Sqrt(ss / float64(len(v)))
	return f, nil
}

// at evaluates the polynomial at volume v.
func (f *polyFit) at(v float64) float64 {
	u := v/f.vs - 1
	var s float64
	for k := len(f.c) - 1; k >= 0; k-- {
		s = s*u + f.c[k]
	}
	return s
}

// slope is d/dV of the polynomial at volume v.
func (f *polyFit) slope(v float64) float64 {
	u := v/f.vs - 1
	var s float64
	for k := len(f.c) - 1; k >= 1; k-- {
		s = s*u + float64(k)*f.c[k]
	}
	return s / f.vs
}
