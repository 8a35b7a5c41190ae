package client

import (
	"container/list"
	"crypto/sha256"
	"sync"

	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// maxRefs bounds the models remembered by one Client; past it the least
// recently used entry is forgotten (it costs one inline send later,
// nothing else).
const maxRefs = 256

// modelKey identifies an inline model on the client side: a SHA-256 of its
// deterministic protobuf encoding (with the symmetry and charge-neutrality
// options when set) and the sum-rule flag. It is not the
// server's model hash (that one is canonical in meaning, not in bytes).
type modelKey [sha256.Size + 1]byte

func keyOf(src *modegridv1.ModelSource) (modelKey, bool) {
	var k modelKey
	c := src.GetCrystal()
	if c == nil {
		return k, false
	}
	// The symmetry options change the compiled model, so they are part of
	// the key (serialised with the crystal; absent when unset, so keys of
	// sources without them are unchanged).
	var opts []byte
	if src.GetSymmetryToleranceA() != 0 || src.GetSymmetrize() || src.GetEnforceChargeNeutrality() {
		var err error
		opts, err = proto.MarshalOptions{Deterministic: true}.Marshal(&modegridv1.ModelSource{
			SymmetryToleranceA: src.GetSymmetryToleranceA(), Symmetrize: src.GetSymmetrize(),
			EnforceChargeNeutrality: src.GetEnforceChargeNeutrality()})
		if err != nil {
			return k, false
		}
	}
	b, err := proto.MarshalOptions{Deterministic: true}.Marshal(c)
	if err != nil {
		return k, false
	}
	sum := sha256.Sum256(b)
	if opts != nil {
		sum = sha256.Sum256(append(sum[:], opts...))
		k[sha256.Size] = 2 // marks the options, so no crystal alone collides
	}
	copy(k[:], sum[:])
	if src.GetEnforceSumRule() {
		k[sha256.Size] |= 1
	}
	return k, true
}

// refEntry is what the client knows of one model.
type refEntry struct {
	key    modelKey                // the client-side key, the LRU's index
	hash   string                  // the server's model hash
	inline *modegridv1.ModelSource // the caller's inline source, for resends
	// sent is true once a compute call carried the model (inline) to where
	// the affinity header routes it; until then a reference would only
	// earn a NOT_FOUND. Without affinity any successful call sets it.
	sent bool
}

// modelRefs maps inline models to server hashes and back, keeping the
// maxRefs most recently used models. The zero value is ready to use.
//
// Several keys may share one hash (the same model spelled differently:
// sites listed in another order, say; the server's hash is canonical in
// meaning, the key is not). byHash then points at the most recently used
// of them, and dropping one entry never drops another's hash.
//
// The LRU is a list and a map, like the server's result cache
// (server/cache/lru.go), but bounded by count instead of bytes; the client
// library imports no more than proto/, grpc and protobuf, so it keeps this
// small one of its own rather than a library.
type modelRefs struct {
	mu     sync.Mutex                 // protects the fields below
	ll     *list.List                 // of *refEntry, most recently used first; lazily initialised
	byKey  map[modelKey]*list.Element // lazily initialised
	byHash map[string]*refEntry       // lazily initialised
}

// entry returns the entry under k and marks it most recently used.
// r.mu must be held.
func (r *modelRefs) entry(k modelKey) (*refEntry, bool) {
	el, ok := r.byKey[k]
	if !ok {
		return nil, false
	}
	r.ll.MoveToFront(el)
	e := el.Value.(*refEntry)
	r.byHash[e.hash] = e
	return e, true
}

func (r *modelRefs) lookupKey(k modelKey) (refEntry, bool) {
	r.mu.Lock()
	defer r.mu.Unlock()
	e, ok := r.entry(k)
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
	r.entry(e.key)
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
	if r.ll == nil {
		r.ll = list.New()
		r.byKey = make(map[modelKey]*list.Element)
		r.byHash = make(map[string]*refEntry)
	}
	if e, ok := r.entry(k); ok {
		if e.hash != h {
			r.unlinkHash(e)
			e.hash = h
		}
		e.sent = e.sent || sent
		r.byHash[h] = e
		return
	}
	for r.ll.Len() >= maxRefs {
		r.evict(r.ll.Back())
	}
	e := &refEntry{key: k, hash: h, inline: inline, sent: sent}
	r.byKey[k] = r.ll.PushFront(e)
	r.byHash[h] = e
}

// evict forgets the entry of el. r.mu must be held.
func (r *modelRefs) evict(el *list.Element) {
	e := r.ll.Remove(el).(*refEntry)
	delete(r.byKey, e.key)
	r.unlinkHash(e)
}

// unlinkHash removes e from byHash if byHash points at it there, pointing
// the hash at the most recently used other entry that has it, if any.
// r.mu must be held.
func (r *modelRefs) unlinkHash(e *refEntry) {
	if r.byHash[e.hash] != e {
		return // another key owns the hash now; leave it
	}
	delete(r.byHash, e.hash)
	for el := r.ll.Front(); el != nil; el = el.Next() {
		if o := el.Value.(*refEntry); o != e && o.hash == e.hash {
			r.byHash[e.hash] = o
			return
		}
	}
}

// unsent marks every model with hash h as no longer held where it is
// routed (after a NOT_FOUND), so the next call sends it inline. The server
// holds models by hash, so this applies to each key that has h.
func (r *modelRefs) unsent(h string) {
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.ll == nil {
		return
	}
	for el := r.ll.Front(); el != nil; el = el.Next() {
		if e := el.Value.(*refEntry); e.hash == h {
			e.sent = false
		}
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
