package client

import (
	"fmt"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

func chain(massAmu float64) *modegridv1.Crystal {
	return &modegridv1.Crystal{
		Name:          "chain",
		Lattice:       []*modegridv1.Vec3{{X: 2.5}},
		Polarizations: 1,
		Sites:         []*modegridv1.Site{{Label: "A", MassAmu: massAmu, Frac: []float64{0}}},
		Springs:       []*modegridv1.Spring{{FromSite: 0, ToSite: 0, Cell: []int32{1}, KLong: 1.5}},
	}
}

// TestWithSource: the copy carries the new model source and shares every
// other field; the caller's request is unchanged.
func TestWithSource(t *testing.T) {
	src := Inline(chain(40))
	qs := Grid(8)
	tests := []struct {
		name string
		req  proto.Message
	}{
		{name: "check", req: &modegridv1.CheckModelRequest{Model: src}},
		{name: "modes", req: &modegridv1.ComputeModesRequest{Model: src, Qpoints: qs, Unit: modegridv1.FrequencyUnit_FREQUENCY_UNIT_MEV, ChunkSize: 7}},
		{name: "dispersion", req: &modegridv1.ComputeDispersionRequest{Model: src, Path: []*modegridv1.PathPoint{{Label: "G"}, {Label: "X"}}, Points: 11}},
		{name: "dos", req: &modegridv1.ComputeDosRequest{Model: src, Qpoints: qs, PerSite: true, Step: 0.1}},
		{name: "thermal", req: &modegridv1.ComputeThermalRequest{Model: src, Qpoints: qs, TemperaturesK: []float64{300}, Msd: true}},
		{name: "infrared", req: &modegridv1.ComputeInfraredRequest{Model: src, Direction: &modegridv1.Vec3{X: 1}, Points: 11, ModeDamping: []float64{1, 2}}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			before := proto.Clone(tc.req)
			ref := reference("abc", src)
			out := withSource(tc.req, ref)
			if got := sourceOf(out); got.GetModelHash() != "abc" || got.GetCrystal() != nil {
				t.Errorf("copy has model %v; want the reference", got)
			}
			if !proto.Equal(tc.req, before) {
				t.Error("the caller's request changed")
			}
			// Everything but the model is equal.
			a, b := proto.Clone(out), proto.Clone(tc.req)
			clearModel(a)
			clearModel(b)
			if !proto.Equal(a, b) {
				t.Errorf("fields other than the model differ:\n%v\n%v", a, b)
			}
		})
	}
}

func clearModel(m proto.Message) {
	r := m.ProtoReflect()
	r.Clear(modelField(r))
}

// TestKeyOf: the client-side key ignores JSON spelling but not content or
// the sum-rule flag.
func TestKeyOf(t *testing.T) {
	const camel = `{"name":"chain","lattice":[{"x":2.5}],"polarizations":1,"sites":[{"label":"A","massAmu":40,"frac":[0]}],"springs":[{"fromSite":0,"toSite":0,"cell":[1],"kLong":1.5}]}`
	const snake = `{"springs":[{"k_long":1.5,"cell":[1],"to_site":0,"from_site":0}],"sites":[{"frac":[0],"mass_amu":40,"label":"A"}],"polarizations":1,"lattice":[{"x":2.5,"y":0}],"name":"chain"}`
	a, err := ParseModel([]byte(camel))
	if err != nil {
		t.Fatal(err)
	}
	b, err := ParseModel([]byte(snake))
	if err != nil {
		t.Fatal(err)
	}
	ka, _ := keyOf(Inline(a))
	kb, _ := keyOf(Inline(b))
	if ka != kb {
		t.Error("the same model spelled two ways has two keys")
	}
	withRule := Inline(a)
	withRule.EnforceSumRule = true
	if k, _ := keyOf(withRule); k == ka {
		t.Error("enforce_sum_rule does not change the key")
	}
	withCharge := Inline(a)
	withCharge.EnforceChargeNeutrality = true
	if k, _ := keyOf(withCharge); k == ka || k == func() modelKey { k, _ := keyOf(withRule); return k }() {
		t.Error("enforce_charge_neutrality does not change the key")
	}
	if k, _ := keyOf(Inline(chain(41))); k == ka {
		t.Error("a different mass has the same key")
	}
	if _, ok := keyOf(&modegridv1.ModelSource{Source: &modegridv1.ModelSource_ModelHash{ModelHash: "x"}}); ok {
		t.Error("a reference has a key")
	}
}

// TestRefsBounded: the reference table holds at most maxRefs models and
// forgets the oldest first.
func TestRefsBounded(t *testing.T) {
	var r modelRefs
	keys := make([]modelKey, maxRefs+10)
	for i := range keys {
		src := Inline(chain(10 + float64(i)))
		keys[i], _ = keyOf(src)
		r.remember(keys[i], src, fmt.Sprintf("h%d", i), true)
	}
	if n := len(r.byKey); n != maxRefs {
		t.Errorf("%d entries; want %d", n, maxRefs)
	}
	if n := len(r.byHash); n != maxRefs {
		t.Errorf("%d hashes; want %d", n, maxRefs)
	}
	if _, ok := r.lookupKey(keys[0]); ok {
		t.Error("the oldest entry is still there")
	}
	if _, ok := r.lookupHash("h0"); ok {
		t.Error("the oldest hash is still there")
	}
	if e, ok := r.lookupKey(keys[len(keys)-1]); !ok || e.hash != fmt.Sprintf("h%d", len(keys)-1) || !e.sent {
		t.Errorf("newest entry %+v, %v", e, ok)
	}
	r.unsent(fmt.Sprintf("h%d", len(keys)-1))
	if e, _ := r.lookupKey(keys[len(keys)-1]); e.sent {
		t.Error("unsent did not clear sent")
	}
}

// fillRefs remembers n models of distinct keys and hashes ("fill0", ...).
func fillRefs(r *modelRefs, n int) {
	for i := range n {
		src := Inline(chain(1000 + float64(i)))
		k, _ := keyOf(src)
		r.remember(k, src, fmt.Sprintf("fill%d", i), true)
	}
}

// TestRefsSharedHash is a regression test: two keys (one model spelled two
// ways) share a server hash; forgetting the older key, by eviction or by a
// new hash for it, must not forget the hash the newer key still has.
func TestRefsSharedHash(t *testing.T) {
	srcA, srcB := Inline(chain(40)), Inline(chain(40))
	srcB.GetCrystal().Name = "the same chain, named otherwise"
	kA, _ := keyOf(srcA)
	kB, _ := keyOf(srcB)
	if kA == kB {
		t.Fatal("the two spellings have one key; the test needs two")
	}
	t.Run("older key evicted", func(t *testing.T) {
		var r modelRefs
		r.remember(kA, srcA, "h", true)
		r.remember(kB, srcB, "h", true)
		fillRefs(&r, maxRefs-1) // one past the bound: evicts kA only
		if _, ok := r.lookupKey(kA); ok {
			t.Fatal("the least recently used key was not evicted")
		}
		e, ok := r.lookupHash("h")
		if !ok {
			t.Fatal(`hash "h" forgotten with the older key; the newer key still has it`)
		}
		if keyOfEntry, _ := keyOf(e.inline); keyOfEntry != kB {
			t.Error(`hash "h" points at another model than the newer key's`)
		}
	})
	t.Run("older key rehashed", func(t *testing.T) {
		var r modelRefs
		r.remember(kA, srcA, "h", true)
		r.remember(kB, srcB, "h", true)
		r.remember(kA, srcA, "h2", true)
		if _, ok := r.lookupHash("h"); !ok {
			t.Error(`hash "h" forgotten when the older key moved to "h2"`)
		}
		if e, ok := r.lookupHash("h2"); !ok || e.key != kA {
			t.Errorf(`hash "h2": %+v, %v; want the older key`, e, ok)
		}
	})
	t.Run("newer key evicted", func(t *testing.T) {
		var r modelRefs
		r.remember(kB, srcB, "h", true)
		r.remember(kA, srcA, "h", true)
		r.lookupKey(kB) // kB most recently used: "h" points at it
		fillRefs(&r, maxRefs-1)
		// kA was least recently used and is gone; "h" still reaches kB.
		if e, ok := r.lookupHash("h"); !ok || e.key != kB {
			t.Errorf(`hash "h": %+v, %v; want the remaining key`, e, ok)
		}
	})
	t.Run("unsent reaches every key of the hash", func(t *testing.T) {
		var r modelRefs
		r.remember(kA, srcA, "h", true)
		r.remember(kB, srcB, "h", true)
		r.unsent("h")
		for _, k := range []modelKey{kA, kB} {
			if e, _ := r.lookupKey(k); e.sent {
				t.Error("a key of the hash is still marked sent after NOT_FOUND")
			}
		}
	})
}

// TestRefsLeastRecentlyUsed: a lookup keeps a model; the one used least
// recently is evicted first, not the one remembered first.
func TestRefsLeastRecentlyUsed(t *testing.T) {
	var r modelRefs
	old, other := Inline(chain(40)), Inline(chain(41))
	kOld, _ := keyOf(old)
	kOther, _ := keyOf(other)
	r.remember(kOld, old, "old", true)
	r.remember(kOther, other, "other", true)
	fillRefs(&r, maxRefs-2) // full
	if _, ok := r.lookupKey(kOld); !ok {
		t.Fatal("the first model was evicted before the bound")
	}
	src := Inline(chain(39))
	k, _ := keyOf(src)
	r.remember(k, src, "new", true) // one past the bound
	if _, ok := r.lookupKey(kOld); !ok {
		t.Error("a model just looked up was evicted")
	}
	if _, ok := r.lookupKey(kOther); ok {
		t.Error("the least recently used model is still there")
	}
	if n := len(r.byKey); n != maxRefs {
		t.Errorf("%d entries; want %d", n, maxRefs)
	}
}

func TestIsLocalTarget(t *testing.T) {
	tests := []struct {
		name   string
		target string
		want   bool
	}{
		{"ipv4 loopback", "127.0.0.1:7420", true},
		{"ipv6 loopback", "[::1]:7420", true},
		{"localhost", "localhost:7420", true},
		{"dns localhost", "dns:///localhost:7420", true},
		{"unix socket", "unix:///run/modegrid.sock", true},
		{"passthrough loopback", "passthrough:///127.0.0.1:1", true},
		{"remote name", "modegrid.lab:7420", false},
		{"dns remote", "dns:///modegrid-headless.lab.svc:7420", false},
		{"remote ip", "10.0.0.5:7420", false},
		{"all interfaces", "0.0.0.0:7420", false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := isLocalTarget(tc.target); got != tc.want {
				t.Errorf("isLocalTarget(%q) = %v; want %v", tc.target, got, tc.want)
			}
		})
	}
}

// TestServiceConfig: the service config names the balancer, waiting for a
// ready server, the retry policy on UNAVAILABLE only, and health checking.
func TestServiceConfig(t *testing.T) {
	tests := []struct {
		name        string
		affinity    bool
		pinned      bool
		attempts    int
		health      bool
		failFast    bool
		contains    []string
		notContains []string
	}{
		{name: "defaults", attempts: 4, health: true,
			contains: []string{`"round_robin"`, `"maxAttempts":4`, `"retryableStatusCodes":["UNAVAILABLE"]`, `"healthCheckConfig"`,
				`"service":"modegrid.v1.ModegridService"`, `"waitForReady":true`}},
		{name: "fail fast", attempts: 4, failFast: true, contains: []string{`"waitForReady":false`}},
		{name: "affinity", affinity: true, attempts: 4, health: true,
			contains: []string{`"ring_hash_experimental":{"requestHashHeader":"x-modegrid-model"}`}, notContains: []string{"round_robin"}},
		{name: "no retries", attempts: 1, contains: []string{`"round_robin"`}, notContains: []string{"retryPolicy", "healthCheckConfig"}},
		{name: "pinned", pinned: true, attempts: 4, health: true,
			contains: []string{`"pick_first":{"shuffleAddressList":true}`, `"retryPolicy"`, `"healthCheckConfig"`}, notContains: []string{"round_robin"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			sc, err := serviceConfig(tc.affinity, tc.attempts, tc.health, !tc.failFast, tc.pinned)
			if err != nil {
				t.Fatal(err)
			}
			for _, s := range tc.contains {
				if !strings.Contains(sc, s) {
					t.Errorf("%s lacks %s", sc, s)
				}
			}
			for _, s := range tc.notContains {
				if strings.Contains(sc, s) {
					t.Errorf("%s has %s", sc, s)
				}
			}
		})
	}
}

// sink keeps benchmark results alive.
var sink modelKey

// BenchmarkKeyOf: the client-side cost of recognising a model it has sent
// before (deterministic marshal + SHA-256), paid on every call with an
// inline model, for models of increasing size.
func BenchmarkKeyOf(b *testing.B) {
	for _, sites := range []int{1, 64, 512} {
		c := &modegridv1.Crystal{Lattice: []*modegridv1.Vec3{{X: 10}, {Y: 10}, {Z: 10}}}
		for i := range sites {
			c.Sites = append(c.Sites, &modegridv1.Site{Label: "A", MassAmu: 40, Frac: []float64{float64(i) / float64(sites), 0, 0}})
			c.Springs = append(c.Springs, &modegridv1.Spring{FromSite: uint32(i), ToSite: uint32((i + 1) % sites), Cell: []int32{0, 0, 0}, KLong: 1})
		}
		src := Inline(c)
		b.Run(fmt.Sprintf("sites=%d", sites), func(b *testing.B) {
			for b.Loop() {
				sink, _ = keyOf(src)
			}
		})
	}
}
