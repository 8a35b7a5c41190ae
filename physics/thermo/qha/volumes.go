package qha

import (
	"fmt"
	"math"
	"sort"

	"github.com/materials-lab/modegrid/physics"
	"github.com/materials-lab/modegrid/physics/lattice"
)

// VolumeSet is one crystal's models at several volumes, sorted by volume:
// the same sites in the same order (labels and masses equal), the same
// dimensionality and polarizations; only the lattice and the force
// constants differ.
type VolumeSet struct {
	Models []*physics.Model // ascending volume
	VolA3  []float64        // cell measure of each, Å^d (Å³ in 3D)
	Index  []int            // Index[i] is the caller's position of Models[i]
	Ref    int              // the reference volume, an index into Models
}

// MinVolumes is the fewest models a set may hold (two volumes give one
// finite difference); MinQHAVolumes the fewest the quasi-harmonic fit
// takes (a four-parameter equation of state and one degree of freedom).
const (
	MinVolumes    = 2
	MinQHAVolumes = 5
	// MaxVolumes bounds the models of one set.
	MaxVolumes = 64
)

// NewVolumeSet checks models (field paths "models", "models[i]") and sorts
// them by cell measure. ref is the caller's index of the reference model,
// or −1 for the middle volume after sorting (the lower middle for an even
// count). Violations come back at once in a *physics.ValidationError.
func NewVolumeSet(models []*physics.Model, ref int) (*VolumeSet, error) {
	var vs physics.Violations
	switch {
	case len(models) < MinVolumes:
		vs.Add("models", "at least %d models of one crystal at different volumes are needed, got %d", MinVolumes, len(models))
	case len(models) > MaxVolumes:
		vs.Add("models", "%d models, more than the limit of %d", len(models), MaxVolumes)
	}
	if ref < -1 || ref >= len(models) {
		vs.Add("reference", "must be −1 (the middle volume) or a model index in [0, %d), got %d", len(models), ref)
	}
	if vs.Len() > 0 {
		return nil, vs.Err()
	}
	for i := 1; i < len(models); i++ {
		if why := sameCrystal(models[0], models[i]); why != "" {
			vs.Add(fmt.Sprintf("models[%d]", i), "is not the crystal of models[0] at another volume: %s", why)
		}
	}
	if vs.Len() > 0 {
		return nil, vs.Err()
	}
	set := &VolumeSet{Index: make([]int, len(models))}
	for i := range models {
		set.Index[i] = i
	}
	vol := make([]float64, len(models))
	for i, m := range models {
		lat := m.Lattice()
		vol[i] = lattice.GramMeasure(lat[:m.Dim()])
	}
	sort.SliceStable(set.Index, func(a, b int) bool { return vol[set.Index[a]] < vol[set.Index[b]] })
	for k, i := range set.Index {
		set.Models = append(set.Models, models[i])
		set.VolA3 = append(set.VolA3, vol[i])
		if k > 0 && !(vol[i] > set.VolA3[k-1]*(1+1e-9)) {
			vs.Add(fmt.Sprintf("models[%d]", i), "has the volume of models[%d] (%.9g Å^%d): every model needs its own volume", set.Index[k-1], vol[i], m0Dim(models))
		}
		if i == ref {
			set.Ref = k
		}
	}
	if ref == -1 {
		set.Ref = (len(models) - 1) / 2
	}
	return set, vs.Err()
}

func m0Dim(models []*physics.Model) int { return models[0].Dim() }

// sameCrystal says how b differs from a beyond lattice and force
// constants ("" when it does not).
func sameCrystal(a, b *physics.Model) string {
	switch {
	case a.Dim() != b.Dim():
		return fmt.Sprintf("%d dimensions, not %d", b.Dim(), a.Dim())
	case a.Polarizations() != b.Polarizations():
		return fmt.Sprintf("%d polarizations, not %d", b.Polarizations(), a.Polarizations())
	case a.Sites() != b.Sites():
		return fmt.Sprintf("%d sites, not %d", b.Sites(), a.Sites())
	}
	la, lb := a.Labels(), b.Labels()
	for i := range la {
		if la[i] != lb[i] {
			return fmt.Sprintf("site %d is labelled %q, not %q (the sites must be in the same order)", i, lb[i], la[i])
		}
		if ma, mb := a.MassAmu(i), b.MassAmu(i); math.Abs(ma-mb) > 1e-9*ma {
			return fmt.Sprintf("site %d has mass %g amu, not %g", i, mb, ma)
		}
	}
	return ""
}

// lnStencil returns the indices and weights of the derivative d/d ln V at
// the reference volume from ln V of the set: central (three points around
// the reference, Lagrange weights on the uneven spacing) where three or
// more volumes are given, one-sided three-point at an end, and the
// two-point difference for two volumes.
func (s *VolumeSet) lnStencil() ([]int, []float64) {
	n := len(s.VolA3)
	if n == 2 {
		h := math.Log(s.VolA3[1]) - math.Log(s.VolA3[0])
		return []int{0, 1}, []float64{-1 / h, 1 / h}
	}
	lo := min(max(s.Ref-1, 0), n-3)
	idx := []int{lo, lo + 1, lo + 2}
	x := make([]float64, 3)
	for k, i := range idx {
		x[k] = math.Log(s.VolA3[i])
	}
	x0 := math.Log(s.VolA3[s.Ref])
	w := make([]float64, 3)
	for a := 0; a < 3; a++ {
		b, c := (a+1)%3, (a+2)%3
		w[a] = ((x0 - x[b]) + (x0 - x[c])) / ((x[a] - x[b]) * (x[a] - x[c]))
	}
	return idx, w
}
