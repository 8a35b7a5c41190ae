package physics

// FrequenciesTHz returns the mode frequencies at q (fractional reciprocal
// coordinates) in THz, ascending; imaginary modes are negative.
func (m *Model) FrequenciesTHz(q [3]float64) []float64 {
	n := m.Modes()
	d := m.DynamicalMatrix(q, nil)
	vals := hermitianEigenvalues(d, n)
	for k, v := range vals {
		vals[k] = eigToTHz(v)
	}
	return vals
}
