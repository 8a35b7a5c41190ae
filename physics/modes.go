package physics

// FrequenciesTHz returns the mode frequencies at q (fractional reciprocal
// coordinates) in THz, ascending; imaginary modes are negative.
func (m *Model) FrequenciesTHz(q [3]float64) []float64 {
	n := m.Modes()
	d := m.DynamicalMatrix(q, nil)
	vals, _ := hermitianEigen(d, n, false)
	for k, v := range vals {
		vals[k] = eigToTHz(v)
	}
	return vals
}

// ModesAt returns the frequencies at q (THz, ascending) and the normalised
// eigenvectors of D(q), mode-major (vecs[k*n+c], c = site·p + axis).
func (m *Model) ModesAt(q [3]float64) ([]float64, []complex128) {
	n := m.Modes()
	d := m.DynamicalMatrix(q, nil)
	vals, vecs := hermitianEigen(d, n, true)
	for k, v := range vals {
		vals[k] = eigToTHz(v)
	}
	return vals, vecs
}
