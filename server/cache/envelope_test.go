package cache

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"strings"
	"sync"
	"testing"
)

// refusals records the integrity failures a Cache reports.
type refusals struct {
	mu  sync.Mutex // protects got
	got []*IntegrityError
}

func (r *refusals) add(_ Key, err *IntegrityError) {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.got = append(r.got, err)
}

func (r *refusals) list() []*IntegrityError {
	r.mu.Lock()
	defer r.mu.Unlock()
	return append([]*IntegrityError(nil), r.got...)
}

// TestEnvelopeRoundTrip: a sealed value opens under its own key, for
// empty, binary and long-parameter keys alike.
func TestEnvelopeRoundTrip(t *testing.T) {
	long := strings.Repeat("p", 500)
	tests := []struct {
		name    string
		k       Key
		payload []byte
	}{
		{name: "plain", k: key(1), payload: []byte("value")},
		{name: "empty payload", k: key(2), payload: []byte{}},
		{name: "binary", k: Key{Kind: "dos", Model: strings.Repeat("ab", 32), Params: "x=1"}, payload: []byte{0, 255, 0, 1}},
		{name: "long params kept whole", k: Key{Kind: "dos", Model: "m", Params: long}, payload: []byte("v")},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := openEnvelope(tc.k, 3, sealEnvelope(tc.k, 3, tc.payload))
			if err != nil || string(got) != string(tc.payload) {
				t.Fatalf("open = %q, %v; want %q, nil", got, err, tc.payload)
			}
		})
	}
}

// TestPoisonedBackendRefused: whatever the shared tier holds under a key —
// another key's value, changed bytes, a foreign format — is refused with
// the right reason, counted once, never served, and the value is computed
// and stored again (a fresh cache then reads the good value).
func TestPoisonedBackendRefused(t *testing.T) {
	want, other := key(1), key(2)
	seal := func(k Key, v string) []byte { return sealEnvelope(k, stringCodec.Version, []byte(v)) }
	flip := func(b []byte, i int) []byte { b = append([]byte(nil), b...); b[i] ^= 1; return b }
	good := seal(want, "right")
	payloadAt := strings.Index(string(good), "right")
	tests := []struct {
		name   string
		stored []byte
		codec  *Codec
		reason string
	}{
		{name: "another key's value", stored: seal(other, "wrong"), reason: ReasonKeyMismatch},
		{name: "another kind's value", stored: seal(Key{Kind: "u", Model: want.Model, Params: want.Params}, "wrong"), reason: ReasonKeyMismatch},
		{name: "payload byte changed", stored: flip(good, payloadAt), reason: ReasonChecksum},
		{name: "checksum byte changed", stored: flip(good, len(good)-1), reason: ReasonChecksum},
		{name: "truncated", stored: good[:len(good)-5], reason: ReasonChecksum},
		{name: "raw value without envelope", stored: []byte("wrong but plausible"), reason: ReasonDecode},
		{name: "empty", stored: []byte{}, reason: ReasonDecode},
		{name: "newer envelope version", stored: flip(good, len(envelopeMagic)), reason: ReasonVersion},
		{name: "other codec version", stored: sealEnvelope(want, 7, []byte("wrong")), reason: ReasonVersion},
		{name: "consistent envelope, payload does not decode", stored: seal(want, ""), reason: ReasonDecode},
		{name: "value fails the codec's own check", stored: seal(want, "wrong"), reason: ReasonKeyMismatch,
			codec: &Codec{Encode: stringCodec.Encode, Decode: stringCodec.Decode, Verify: func(k Key, v any) error {
				if v != "right" {
					return errors.New("not the right value")
				}
				return nil
			}}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			codec := tc.codec
			if codec == nil {
				codec = stringCodec
			}
			be := &mapBackend{m: map[string][]byte{backendKey(want): tc.stored}}
			var r refusals
			c := New(Options{MaxBytes: 1 << 20, Backend: be, OnIntegrityFailure: r.add})
			computed := 0
			v, src, err := c.Do(testContext(t), want, codec, func(context.Context) (any, int64, error) {
				computed++
				return "right", 5, nil
			})
			if err != nil || v != "right" || src != Computed || computed != 1 {
				t.Fatalf("got %v from %v (%v), computed %d times; want right, computed once", v, src, err, computed)
			}
			got := r.list()
			if len(got) != 1 || got[0].Tier != TierShared || got[0].Reason != tc.reason {
				t.Fatalf("refusals %v; want one, shared tier, reason %s", got, tc.reason)
			}
			if st := c.Stats()["t"]; st.IntegrityFailures != 1 || st.BackendHits != 0 || st.BackendErrors != 0 {
				t.Errorf("stats %+v; want 1 integrity failure, no backend hit, no backend error", st)
			}
			// The recomputed value replaced the poison: a fresh cache reads it.
			fresh := New(Options{MaxBytes: 1 << 20, Backend: be, OnIntegrityFailure: r.add})
			v, src, ok := fresh.Lookup(testContext(t), want, codec)
			if !ok || v != "right" || src != Stored {
				t.Errorf("fresh cache after recompute: %v from %v (%v); want right from the backend", v, src, ok)
			}
		})
	}
}

// TestMemoryKeyCollisionRefused: two keys with the same stored form (a
// literal "sha256:…" parameter and a long parameter hashed to it) never
// answer for each other in memory.
func TestMemoryKeyCollisionRefused(t *testing.T) {
	long := strings.Repeat("q", 2*maxRawParams)
	sum := sha256.Sum256([]byte(long))
	a := Key{Kind: "t", Model: "m", Params: long}
	b := Key{Kind: "t", Model: "m", Params: "sha256:" + hex.EncodeToString(sum[:])}
	if a.String() != b.String() {
		t.Fatalf("keys %q and %q should collide for this test", a.String(), b.String())
	}
	var r refusals
	c := New(Options{MaxBytes: 1 << 20, OnIntegrityFailure: r.add})
	c.Put(testContext(t), a, "for a", 5, nil)
	if v, ok := c.Get(b); ok {
		t.Fatalf("Get(b) = %v; want a miss (the entry is a's)", v)
	}
	got := r.list()
	if len(got) != 1 || got[0].Tier != TierMemory || got[0].Reason != ReasonKeyMismatch {
		t.Fatalf("refusals %v; want one, memory tier, key_mismatch", got)
	}
	v, src, err := c.Do(testContext(t), b, nil, func(context.Context) (any, int64, error) { return "for b", 5, nil })
	if err != nil || v != "for b" || src != Computed {
		t.Fatalf("Do(b) = %v from %v (%v); want for b, computed", v, src, err)
	}
	if c.Contains(a) {
		t.Error("Contains(a) after b replaced the colliding entry")
	}
	if st := c.Stats()["t"]; st.Entries != 1 || st.IntegrityFailures != 1 {
		t.Errorf("stats %+v; want 1 entry, 1 integrity failure", st)
	}
}
