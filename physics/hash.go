// The canonical model hash: the cache key of results.

package physics

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"hash"
	"math"
)

// hashVersion starts every hashed encoding; bump it when a convention that
// changes results changes (phase convention, units, eigenvector layout).
const hashVersion = "modegrid/model/v1"

// hashBits is the number of significant bits kept of every number: about
// 1e-10 relative to the largest number of its kind, the accuracy the engine
// promises for eigenvalues. Descriptions that agree to that level describe
// the same physics as far as any result can tell.
const hashBits = 33

// Hash returns the model's canonical hash: SHA-256 in lower-case hex of
// what determines every result the engine computes, and nothing else.
//
// It is a function of the compiled model, not of the description:
// dimensionality, p, the lattice vectors, each site's label, mass and
// position (modulo the lattice), and the mass-independent force constants
// Φ(0i; nj) in eV/Å² (only the p×p components that the model uses, only
// the non-zero blocks). So the JSON spelling or key order, the name, N/m
// versus eV/Å² for the same values, the order of springs, shells and
// blocks, a bond given as its own reverse, a shell versus the equivalent
// explicit springs, a zero spring, or enforcing the sum rule when there is
// nothing to enforce all give the same hash; any change that moves a
// result (frequencies, eigenvectors, velocities, per-site shares) changes
// it.
//
// Deliberately not invariant: a rigid rotation of the crystal or a
// permutation of its sites leaves the spectrum unchanged but rotates the
// eigenvectors and group velocities or reorders per-site results, so a
// cached answer for one would be wrong for the other.
//
// Numbers are rounded to hashBits significant bits relative to the largest
// of their kind before hashing, so values that differ only by rounding
// (such as a constant converted from N/m) hash alike; a value that happens
// to lie within rounding of a rounding boundary can still split, with a
// probability of order 1e-6 per number, which costs a cache miss and
// nothing else.
func (m *Model) Hash() string { return m.hash }

// canonicalHash computes the hash from the model and its raw (eV/Å², not
// mass-weighted) force-constant terms, sorted by (i, j, n).
func (m *Model) canonicalHash(raw []term) string {
	h := sha256.New()
	enc := hashWriter{h: h}
	enc.str(hashVersion)
	enc.int(int64(m.dim))
	enc.int(int64(m.p))

	var lmax float64
	for k := 0; k < m.dim; k++ {
		lmax = math.Max(lmax, norm3(m.lattice[k]))
	}
	lq := quantum(lmax)
	for k := 0; k < m.dim; k++ {
		for a := 0; a < 3; a++ {
			enc.int(quantize(m.lattice[k][a], lq))
		}
	}

	enc.int(int64(m.nsites))
	var mmax float64
	for _, x := range m.massAmu {
		mmax = math.Max(mmax, x)
	}
	mq := quantum(mmax)
	fq := math.Ldexp(1, -hashBits) // fractional coordinates are O(1)
	period := int64(1) << hashBits
	for i := 0; i < m.nsites; i++ {
		enc.str(m.labels[i])
		enc.int(quantize(m.massAmu[i], mq))
		for k := 0; k < m.dim; k++ {
			// Position modulo the lattice: wrap after rounding so that
			// 0.9999999999999999 and 0 agree.
			x := quantize(m.frac[i][k], fq) % period
			if x < 0 {
				x += period
			}
			enc.int(x)
		}
	}

	var fmax float64
	for _, t := range raw {
		for a := 0; a < m.p; a++ {
			for b := 0; b < m.p; b++ {
				fmax = math.Max(fmax, math.Abs(t.phi[3*a+b]))
			}
		}
	}
	phq := quantum(fmax)
	var vals [9]int64
	for _, t := range raw {
		nonzero := false
		for a := 0; a < m.p; a++ {
			for b := 0; b < m.p; b++ {
				v := quantize(t.phi[3*a+b], phq)
				vals[a*m.p+b] = v
				nonzero = nonzero || v != 0
			}
		}
		if !nonzero {
			continue
		}
		enc.int(int64(t.i))
		enc.int(int64(t.j))
		for k := 0; k < m.dim; k++ {
			enc.int(int64(t.n[k]))
		}
		for _, v := range vals[:m.p*m.p] {
			enc.int(v)
		}
	}
	return hex.EncodeToString(h.Sum(nil))
}

// quantum is the rounding step for numbers whose largest magnitude is
// xmax: 2^(round(log₂ xmax) − hashBits). Rounding log₂ (rather than
// taking the exponent) keeps xmax values that differ by rounding on the
// same step unless log₂ xmax is within rounding of a half-integer.
func quantum(xmax float64) float64 {
	if xmax == 0 || math.IsInf(xmax, 0) || math.IsNaN(xmax) {
		return 1
	}
	return math.Ldexp(1, int(math.Round(math.Log2(xmax)))-hashBits)
}

// quantize rounds x to a whole number of steps.
func quantize(x, step float64) int64 { return int64(math.Round(x / step)) }

// hashWriter writes a length-prefixed, typed binary encoding, so that no
// two different sequences of values share a byte string.
type hashWriter struct {
	h   hash.Hash
	buf [binary.MaxVarintLen64 + 1]byte
}

func (w *hashWriter) int(v int64) {
	w.buf[0] = 'i'
	n := binary.PutVarint(w.buf[1:], v)
	w.h.Write(w.buf[:1+n])
}

func (w *hashWriter) str(s string) {
	w.buf[0] = 's'
	n := binary.PutUvarint(w.buf[1:], uint64(len(s)))
	w.h.Write(w.buf[:1+n])
	w.h.Write([]byte(s))
}
