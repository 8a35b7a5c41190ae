// Package fcimport folds the force constants of a supercell (for example
// from first-principles finite displacements) into the explicit
// force-constant blocks of the primitive cell that physics.Compile takes.
//
// The primitive cell is the physics.Crystal's lattice and sites; the set
// gives the supercell matrix, the supercell's atoms and their 3×3 blocks.
// Fold maps every atom onto a site and a cell within a position tolerance,
// folds each pair's block onto the lattice vector of the pair's nearest
// periodic image in the supercell (images at equal distance share it
// equally, the Wigner–Seitz multiplicities) — the direct method of
// K. Parlinski, Z. Q. Li and Y. Kawazoe, Phys. Rev. Lett. 78, 4063 (1997) —
// then imposes index-permutation symmetry and the acoustic sum rule and
// reports the size of each violation before and after.
//
// Limits: the nearest image of a pair is sought among the supercell
// translations within ±2 supercell vectors of the pair's offset reduced
// into the supercell, enough for any reasonably reduced supercell matrix
// (not for extremely skewed ones). The sum-rule correction solves a dense
// 9n×9n system (n primitive sites).
//
// Arrows: fcimport imports the core (for its Crystal, Block and
// ValidationError) and the core never imports fcimport; the server calls
// Fold, puts the blocks on the crystal, then Compile.
package fcimport
