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
// changes results changes (phase convention, units, eigenvector layout) or
// when the encoding changes. v2: exact float64 values (v1 rounded every
// number to 33 significant bits relative to the largest of its kind, so
// models differing by less than that shared a hash and a cached answer).
const hashVersion = "modegrid/model/v3"

// Hash returns the model's canonical hash: SHA-256 in lower-case hex of
// exactly the numbers every result the engine computes is made from, and
// nothing else.
//
// It is a function of the compiled model, not of the description:
// dimensionality, p, the lattice vectors, each site's label, mass and
// fractional position as given, the sum-rule violation that CheckModel
// reports, and the non-zero mass-independent force-constant blocks
// Φ(0i; nj) in eV/Å² (only the p×p components that the model uses). Every
// number enters as its exact float64 bits (−0 and +0 as one), so two models
// that differ in any number the engine uses — by however little — have
// different hashes, and a cached result is never served for a model it was
// not computed from.
//
// Compile builds these numbers so that descriptions of the same model
// give the same bits: the JSON spelling or key order, the name, N/m versus
// eV/Å² where the conversion yields the same float64, the order of
// springs, shells and blocks, a bond given as its own reverse, a shell
// versus the equivalent explicit springs, a zero spring, and enforcing the
// sum rule when there is nothing to enforce all give the same hash.
// Descriptions whose compiled numbers differ by rounding (a constant given
// in N/m that does not convert back to the same float64, a site moved by a
// lattice vector, which also changes its bonds' cell offsets) hash apart:
// that costs a cache miss, never a wrong answer.
//
// Deliberately not invariant: a rigid rotation of the crystal or a
// permutation of its sites leaves the spectrum unchanged but rotates the
// eigenvectors and group velocities or reorders per-site results, so a
// cached answer for one would be wrong for the other.
func (m *Model) Hash() string { return m.hash }

// canonicalHash computes the hash from the model and its raw (eV/Å², not
// mass-weighted) force-constant terms: the non-zero ones, sorted by
// (i, j, n), as Compile's rawTerms returns them. The mass-weighted terms
// the engine uses are a function of these and the masses.
func (m *Model) canonicalHash(raw []term) string {
	h := sha256.New()
	enc := hashWriter{h: h}
	enc.str(hashVersion)
	enc.int(int64(m.dim))
	enc.int(int64(m.p))
	for k := 0; k < m.dim; k++ {
		for a := 0; a < 3; a++ {
			enc.float(m.lattice[k][a])
		}
	}
	enc.int(int64(m.nsites))
	for i := 0; i < m.nsites; i++ {
		enc.str(m.labels[i])
		enc.float(m.massAmu[i])
		for k := 0; k < m.dim; k++ {
			enc.float(m.frac[i][k])
		}
	}
	enc.float(m.sumRuleViolation)
	enc.int(int64(len(raw)))
	for _, t := range raw {
		enc.int(int64(t.i))
		enc.int(int64(t.j))
		for k := 0; k < m.dim; k++ {
			enc.int(int64(t.n[k]))
		}
		for a := 0; a < m.p; a++ {
			for b := 0; b < m.p; b++ {
				enc.float(t.phi[3*a+b])
			}
		}
	}
	// A tolerance other than the default may change the operations found
	// and with them every reduced result, so it is part of the identity;
	// the default is not written, so models hashed before the tolerance
	// was settable keep their hashes.
	if m.symTolA != DefaultSymTolA {
		enc.str("symmetry_tolerance_a")
		enc.float(m.symTolA)
	}
	m.hashPolar(&enc)
	return hex.EncodeToString(h.Sum(nil))
}

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

// float writes the exact bits of x, −0 as +0.
func (w *hashWriter) float(x float64) {
	w.buf[0] = 'f'
	binary.BigEndian.PutUint64(w.buf[1:9], math.Float64bits(posZero(x)))
	w.h.Write(w.buf[:9])
}

func (w *hashWriter) str(s string) {
	w.buf[0] = 's'
	n := binary.PutUvarint(w.buf[1:], uint64(len(s)))
	w.h.Write(w.buf[:1+n])
	w.h.Write([]byte(s))
}
