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
// reports the size of each violation before and after. Each class of
// pairs (two sites and an offset modulo the supercell) is averaged in
// (site, cell) order about a reference block, so the order of the atoms,
// Cartesian or fractional positions and the N×N or n×N form of the same
// data give the same bits, hence one model hash.
//
// Optionally (FoldModel with Options.Symmetrize) the set is averaged over
// the crystal's space group: the primitive cell is first made exactly
// symmetric as any model is (physics.Symmetrize of the lattice and sites,
// within the symmetry tolerance), its operations found from the sites
// alone — every (R, t), internal translations of a cell that is not
// primitive included, checked to form a group — and
// Φ(k) ← (1/|G|) Σ_g C_g Φ(g⁻¹·k) C_gᵀ, with g·(s, t, R) =
// (π(s), π(t), rot·R + S_t − S_s) the image of a block under the
// operation (site map π, cell shifts S of its translation) and C_g its
// Cartesian rotation. The average keeps permutation symmetry and the sum
// rule exactly, so they are imposed first and the result has all three
// to rounding (groupaverage.go derives it); the report gives the number
// of operations and the largest |C_g Φ(k) C_gᵀ − Φ(g·k)| before and
// after.
//
// Units: positions Å (Cartesian) or fractional, Φ in the crystal's force
// unit (eV/Å² or N/m) throughout; the tolerances are lengths in Å.
//
// Limits: the nearest image of a pair is sought among the supercell
// translations within ±2 supercell vectors of the pair's offset reduced
// into the supercell, enough for any reasonably reduced supercell matrix
// (not for extremely skewed ones). The sum-rule correction solves a dense
// 9n×9n system (n primitive sites).
//
// The folded model obeys physics.Validate's limits (Options.Limits), and a
// set that would break them is refused naming its own fields, every
// violation at once (limits.go): before the fold, a supercell so long
// that the nearest image of a pair lies past the cell-offset limit
// (supercell_fc.matrix) or one folding into more blocks than the
// interaction limit (supercell_fc.atoms), and each element of Φ out of
// physics.ForceViolation's range (supercell_fc.phi[i], the first few);
// after it, a folded element past the largest accepted (an on-site sum)
// or an offset past the limit that the group closure added. A folded
// element below the smallest accepted magnitude (physics.MinForceEVPerA2,
// a cancellation's residue) is set to 0.
//
// Arrows: fcimport imports the core (for its Crystal, Block and
// ValidationError) and the core never imports fcimport; the server calls
// Fold, puts the blocks on the crystal, then Compile.
package fcimport
