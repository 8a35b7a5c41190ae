// Internals and in-package test helpers exposed to the core's external
// tests (package physics_test), which cannot reach them otherwise.

package physics

// Internals of the engine.
var (
	CellMeasure        = cellMeasure
	AcousticSpeedsATHz = acousticSpeedsATHz
)

// In-package test helpers (shared_test.go, examples_test.go).
var (
	TestCtx          = testCtx
	TwoSiteChain     = twoSiteChain
	ViolationsOf     = violationsOf
	RelDiff          = relDiff
	MustSpeedsATHz   = mustSpeedsATHz
	ConventionalCell = conventionalCell
	RandomQs         = randomQs
	CrossingChains   = crossingChains
	DiatomicChainK   = diatomicChainK
	RelClose         = relClose
)
