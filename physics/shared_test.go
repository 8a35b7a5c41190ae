// Small helpers shared by several test files of the core.

package physics_test

import (
	"context"
	"errors"
	"testing"
	"time"

	"github.com/materials-lab/modegrid/physics"
)

func testCtx(t *testing.T) context.Context {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	t.Cleanup(cancel)
	return ctx
}

// twoSiteChain is a valid base for mutation: a 1D crystal of two sites with
// two springs and a block.
func twoSiteChain() *physics.Crystal {
	return &physics.Crystal{
		Lattice:       [][3]float64{{4, 0, 0}},
		Polarizations: 1,
		Sites: []physics.Site{
			{Label: "A", MassAmu: 10, Frac: []float64{0}},
			{Label: "B", MassAmu: 20, Frac: []float64{0.5}},
		},
		Springs: []physics.Spring{
			{From: 0, To: 1, Cell: []int{0}, KLong: 1},
			{From: 1, To: 0, Cell: []int{1}, KLong: 1},
		},
		Blocks: []physics.Block{{From: 0, To: 0, Cell: []int{1}, Phi: []float64{-0.1, 0, 0, 0, 0, 0, 0, 0, 0}}},
	}
}

// violationsOf returns the violations of err (nil if err is nil) and fails
// on any other kind of error.
func violationsOf(t *testing.T, err error) []physics.Violation {
	t.Helper()
	if err == nil {
		return nil
	}
	var ve *physics.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("error %v is not a *ValidationError", err)
	}
	return ve.Violations
}
