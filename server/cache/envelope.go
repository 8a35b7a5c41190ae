package cache

import (
	"crypto/sha256"
	"crypto/subtle"
	"encoding/binary"
	"errors"
	"fmt"
)

// The envelope is how every value is stored in the Backend: the value's
// full key and a checksum travel with it, so a reader can tell whether the
// bytes it got are the answer to its own question. Layout:
//
//	"MGCE"                 4 bytes, magic
//	envelopeVersion        1 byte
//	codec version          uvarint (Codec.Version)
//	kind, model, params    each a uvarint length and the bytes (Params in
//	                       full, never the shortened form of Key.String)
//	payload                uvarint length and the bytes (Codec.Encode)
//	SHA-256                32 bytes, over everything before it
//
// A shared store is outside the process: anyone who can write to it can
// put any bytes under any key. The key check refuses a value filed under
// the wrong key (copied, or a key collision); the checksum refuses bytes
// changed after they were written (a tampered or truncated payload). Both
// are integrity checks, not authentication: a writer who builds a
// consistent envelope for the right key is kept out by the store's
// password and network policy (deploy/OPERATIONS.md).
const (
	envelopeMagic   = "MGCE"
	envelopeVersion = 1
	checksumBytes   = sha256.Size
)

// Reasons an entry is refused (the "reason" label of the integrity metric).
const (
	ReasonKeyMismatch = "key_mismatch" // the entry belongs to another key
	ReasonChecksum    = "checksum"     // the bytes changed after they were written
	ReasonDecode      = "decode"       // not an envelope, or its payload does not decode
	ReasonVersion     = "version"      // written by another envelope or codec version
)

// Tiers of the cache (the "tier" label of the integrity metric).
const (
	TierMemory = "memory" // the in-process LRU
	TierShared = "shared" // the Backend shared between replicas
)

// IntegrityError is an entry refused on read: it is treated as a miss and
// the value is computed again.
type IntegrityError struct {
	Tier   string // TierMemory or TierShared
	Reason string // one of the Reason* constants
	Err    error  // what was wrong, for the log
}

func (e *IntegrityError) Error() string {
	return fmt.Sprintf("cache: %s entry refused (%s): %v", e.Tier, e.Reason, e.Err)
}

func (e *IntegrityError) Unwrap() error { return e.Err }

func sharedFailure(reason string, format string, args ...any) *IntegrityError {
	return &IntegrityError{Tier: TierShared, Reason: reason, Err: fmt.Errorf(format, args...)}
}

// sealEnvelope wraps payload, the encoded value under k, in an envelope.
func sealEnvelope(k Key, codecVersion uint32, payload []byte) []byte {
	n := len(envelopeMagic) + 1 + 5*binary.MaxVarintLen64 + len(k.Kind) + len(k.Model) + len(k.Params) + len(payload) + checksumBytes
	b := make([]byte, 0, n)
	b = append(b, envelopeMagic...)
	b = append(b, envelopeVersion)
	b = binary.AppendUvarint(b, uint64(codecVersion))
	for _, s := range []string{k.Kind, k.Model, k.Params} {
		b = binary.AppendUvarint(b, uint64(len(s)))
		b = append(b, s...)
	}
	b = binary.AppendUvarint(b, uint64(len(payload)))
	b = append(b, payload...)
	sum := sha256.Sum256(b)
	return append(b, sum[:]...)
}

// openEnvelope checks b against the key the reader asked for and the
// codec version it reads, and returns the payload. Every refusal is an
// *IntegrityError of the shared tier.
func openEnvelope(want Key, codecVersion uint32, b []byte) ([]byte, error) {
	head := len(envelopeMagic) + 1
	if len(b) < head+checksumBytes || string(b[:len(envelopeMagic)]) != envelopeMagic {
		return nil, sharedFailure(ReasonDecode, "not a modegrid cache envelope (%d bytes)", len(b))
	}
	if v := b[len(envelopeMagic)]; v != envelopeVersion {
		return nil, sharedFailure(ReasonVersion, "envelope version %d, this server reads %d", v, envelopeVersion)
	}
	body, sum := b[:len(b)-checksumBytes], b[len(b)-checksumBytes:]
	if got := sha256.Sum256(body); subtle.ConstantTimeCompare(got[:], sum) != 1 {
		return nil, sharedFailure(ReasonChecksum, "SHA-256 of the entry does not match the one stored with it")
	}
	r := envelopeReader{b: body[head:]}
	cv := r.uvarint()
	kind, model, params := r.bytes(), r.bytes(), r.bytes()
	payload := r.bytes()
	if r.err != nil || len(r.b) != 0 {
		return nil, sharedFailure(ReasonDecode, "malformed envelope: %v", errors.Join(r.err, trailing(len(r.b))))
	}
	if got := (Key{Kind: string(kind), Model: string(model), Params: string(params)}); got != want {
		return nil, sharedFailure(ReasonKeyMismatch, "entry is for %s, asked for %s", shortKey(got), shortKey(want))
	}
	if cv != uint64(codecVersion) {
		return nil, sharedFailure(ReasonVersion, "value format version %d, this server reads %d", cv, codecVersion)
	}
	return payload, nil
}

func trailing(n int) error {
	if n == 0 {
		return nil
	}
	return fmt.Errorf("%d bytes after the payload", n)
}

// shortKey names a key for a log line: kind, model hash prefix and the
// (possibly shortened) parameters.
func shortKey(k Key) string {
	m := k.Model
	if len(m) > 12 {
		m = m[:12]
	}
	return Key{Kind: k.Kind, Model: m, Params: k.Params}.String()
}

// envelopeReader reads the length-prefixed fields of an envelope; the first
// problem sticks in err.
type envelopeReader struct {
	b   []byte
	err error
}

func (r *envelopeReader) uvarint() uint64 {
	if r.err != nil {
		return 0
	}
	v, n := binary.Uvarint(r.b)
	if n <= 0 {
		r.err = errors.New("bad length field")
		return 0
	}
	r.b = r.b[n:]
	return v
}

func (r *envelopeReader) bytes() []byte {
	n := r.uvarint()
	if r.err != nil {
		return nil
	}
	if n > uint64(len(r.b)) {
		r.err = fmt.Errorf("field of %d bytes with %d left", n, len(r.b))
		return nil
	}
	v := r.b[:n]
	r.b = r.b[n:]
	return v
}
