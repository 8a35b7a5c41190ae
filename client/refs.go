package client

import (
	"crypto/sha256"
	"sync"

	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// maxRefs bounds the models remembered by one Client; past it the oldest
// entry is forgotten (it costs one inline send later, nothing else).
const maxRefs = 256

// modelKey identifies an inline model on the client side: a SHA-256 of its
// deterministic protobuf encoding and the sum-rule flag. It is not the
// server's model hash (that one is canonical in meaning, not in bytes).
type modelKey [sha256.Size + 1]byte

func keyOf(src *modegridv1.ModelSource) (modelKey, bool) {
	var k modelKey
	c := src.GetCrystal()
	if c == nil {
		return k, false
	}
	b, err := proto.MarshalOptions{Deterministic: true}.Marshal(c)
	if err != nil {
		return k, false
	}
	sum := sha256.Sum256(b)
	copy(k[:], sum[:])
	if src.GetEnforceSumRule() {
		k[sha256.Size] = 1
	}
	return k, true
}

// refEntry is what the client knows of one model.
type refEntry struct {
	hash   string                  // the server's model hash
	inline *modegridv1.ModelSource // the caller's inline source, for resends
	// sent is true once a compute call carried the model (inline) to where
	// the affinity header routes it; until then a reference would only
	// earn a NOT_FOUND. Without affinity any successful call sets it.
	sent bool
}

// modelRefs maps inline models to server hashes and back. The zero value is
// ready to use.
type modelRefs struct {
	mu     sync.Mutex             // protects the fields below
	byKey  map[modelKey]*refEntry // lazily initialised
	byHash map[string]*refEntry   // lazily initialised
	order  []modelKey             // insertion order, for bounded eviction
}

func (r *modelRefs) lookupKey(k modelKey) (refEntry, bool) {
	r.mu.Lock()
	defer r.mu.Unlock()
	e, ok := r.byKey[k]
	if !ok {
		return refEntry{}, false
	}
	return *e, true
}

func (r *modelRefs) lookupHash(h string) (refEntry, bool) {
	r.mu.Lock()
	defer r.mu.Unlock()
	e, ok := r.byHash[h]
	if !ok {
		return refEntry{}, false
	}
	return *e, true
}

// remember records that inline has the server hash h. sent says whether the
// model has reached the replica its hash routes to.
func (r *modelRefs) remember(k modelKey, inline *modegridv1.ModelSource, h string, sent bool) {
	if h == "" {
		return
	}
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.byKey == nil {
		r.byKey = make(map[modelKey]*refEntry)
		r.byHash = make(map[string]*refEntry)
	}
	if e, ok := r.byKey[k]; ok {
		if e.hash != h {
			delete(r.byHash, e.hash)
			e.hash = h
		}
		e.sent = e.sent || sent
		r.byHash[h] = e
		return
	}
	for len(r.order) >= maxRefs {
		old := r.order[0]
		r.order = r.order[1:]
		if e, ok := r.byKey[old]; ok {
			delete(r.byHash, e.hash)
			delete(r.byKey, old)
		}
	}
	e := &refEntry{hash: h, inline: inline, sent: sent}
	r.byKey[k] = e
	r.byHash[h] = e
	r.order = append(r.order, k)
}

// unsent marks a model as no longer held where it is routed (after a
// NOT_FOUND), so the next call sends it inline.
func (r *modelRefs) unsent(h string) {
	r.mu.Lock()
	defer r.mu.Unlock()
	if e, ok := r.byHash[h]; ok {
		e.sent = false
	}
}

// modelField is the "model" field (a ModelSource) of a request message.
func modelField(m protoreflect.Message) protoreflect.FieldDescriptor {
	fd := m.Descriptor().Fields().ByName("model")
	if fd == nil || fd.Message() == nil || fd.Message().FullName() != "modegrid.v1.ModelSource" {
		return nil
	}
	return fd
}

// sourceOf returns the ModelSource of a request (nil if absent).
func sourceOf(req proto.Message) *modegridv1.ModelSource {
	m := req.ProtoReflect()
	fd := modelField(m)
	if fd == nil || !m.Has(fd) {
		return nil
	}
	src, _ := m.Get(fd).Message().Interface().(*modegridv1.ModelSource)
	return src
}

// withSource returns a shallow copy of req whose model is src. Every other
// field is shared with req, which is not modified; the copy is only
// marshalled, never changed.
func withSource[T proto.Message](req T, src *modegridv1.ModelSource) T {
	in := req.ProtoReflect()
	out := in.New()
	fd := modelField(in)
	in.Range(func(f protoreflect.FieldDescriptor, v protoreflect.Value) bool {
		if f != fd {
			out.Set(f, v)
		}
		return true
	})
	if fd != nil {
		out.Set(fd, protoreflect.ValueOfMessage(src.ProtoReflect()))
	}
	return out.Interface().(T)
}

// reference returns the by-hash form of an inline source.
func reference(h string, inline *modegridv1.ModelSource) *modegridv1.ModelSource {
	return &modegridv1.ModelSource{
		Source:         &modegridv1.ModelSource_ModelHash{ModelHash: h},
		EnforceSumRule: inline.GetEnforceSumRule(),
	}
}
