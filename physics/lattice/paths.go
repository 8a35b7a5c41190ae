// Default paths through the built-in points.

package lattice

// defaultPaths are the default paths through the built-in points, by
// dimensionality and lattice type ('-' joins, '|' breaks): for sc, fcc, bcc
// and hexagonal in 3D those of Setyawan & Curtarolo, Comput. Mater. Sci. 49,
// 299 (2010), Table 2 and Figs. 1–4 (from memory); for the 2D nets and 1D
// the closed loops through Γ and every built-in point (common practice).
var defaultPaths = map[int]map[string]string{
	3: {
		SC:        "G-X-M-G-R-X|M-R",
		FCC:       "G-X-W-K-G-L-U-W-L-K|U-X",
		BCC:       "G-H-N-G-P-H|P-N",
		Hexagonal: "G-M-K-G-A-L-H-A|L-M|K-H",
	},
	2: {
		Square:      "G-X-M-G",
		Rectangular: "G-X-S-Y-G",
		CentredRect: "G-X-S-G",
		Hexagonal:   "G-M-K-G",
		Oblique:     "G-X-S-Y-G",
	},
	1: {Linear: "G-X"},
}

// DefaultPath returns the default path of a lattice of dimension dim and
// type typ through its built-in points, as labels joined by '-' within a
// piece and pieces joined by '|' ("G-X-M-G|…"), or "" when the type has
// none (an unrecognised 3D lattice).
func DefaultPath(dim int, typ string) string { return defaultPaths[dim][typ] }
