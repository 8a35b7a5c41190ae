// The model as a caller describes it: Crystal and its parts, the physics
// twin of the modegrid.v1.Crystal message.

package physics

// ForceUnit is the unit of spring constants and force-constant blocks in a
// Crystal.
type ForceUnit int

// Force units. EVPerA2 is the zero value.
const (
	EVPerA2 ForceUnit = iota // eV/Å²
	NPerM                    // N/m
)

// Crystal is a force-constant model as a caller describes it: the physics
// twin of the modegrid.v1.Crystal message. The zero value is an empty (and
// invalid) model; Validate says what is missing.
type Crystal struct {
	Name          string       // free-form; not part of the hash
	Lattice       [][3]float64 // 1–3 primitive vectors, Cartesian, Å
	Polarizations int          // p in 1..3; 0 means 3
	ForceUnit     ForceUnit    // unit of every k and Φ below
	Sites         []Site
	Springs       []Spring
	Shells        []Shell
	Blocks        []Block
	// EpsilonInf is the high-frequency dielectric tensor ε∞ (9 numbers,
	// row-major, dimensionless), given with every site's BornCharge or not
	// at all (longrange.go).
	EpsilonInf []float64
}

// Site is one atom of the primitive cell.
type Site struct {
	Label   string
	MassAmu float64
	Frac    []float64 // fractional position, d numbers
	// BornCharge is the Born effective-charge tensor Z* (9 numbers,
	// row-major, e: row α the dipole, column β the displacement), or none.
	BornCharge []float64
}

// Spring is a pair spring between site From in cell 0 and site To in cell
// Cell (d integers). Each bond is listed once; its reverse is implied.
type Spring struct {
	From, To int
	Cell     []int
	KLong    float64 // along the bond
	KTrans   float64 // across the bond
}

// Shell puts a spring on every (FromLabel, ToLabel) pair at the Shell-th
// smallest distance between sites of those labels (1 = nearest).
type Shell struct {
	FromLabel, ToLabel string
	Shell              int
	KLong, KTrans      float64
}

// Block is an explicit force-constant block Φ(From, 0; To, Cell), 9 numbers
// row-major.
type Block struct {
	From, To int
	Cell     []int
	Phi      []float64
}

// P returns the number of polarizations, resolving 0 to 3.
func (c *Crystal) P() int {
	if c.Polarizations == 0 {
		return 3
	}
	return c.Polarizations
}

// Dim returns the dimensionality d (number of lattice vectors).
func (c *Crystal) Dim() int { return len(c.Lattice) }
