// Tests of the canonical model hash.

package physics

import (
	"encoding/json"
	"math/rand/v2"
	"regexp"
	"testing"
)

// decodeModel decodes a model file text the way loadExample does.
func decodeModel(t *testing.T, text string) *Crystal { return decodeCrystal(t, "inline", []byte(text)) }

// TestHashFormat: 64 lower-case hex digits, stable across compiles.
func TestHashFormat(t *testing.T) {
	for _, name := range exampleNames(t) {
		a := mustCompile(t, loadExample(t, name)).Hash()
		b := mustCompile(t, loadExample(t, name)).Hash()
		if !regexp.MustCompile(`^[0-9a-f]{64}$`).MatchString(a) || a != b {
			t.Errorf("%s: hash %q, again %q", name, a, b)
		}
	}
}

// TestHashInvariances: descriptions of the same physics hash alike.
func TestHashInvariances(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 4))
	fcc := loadExample(t, "fcc")
	chain := twoSiteChain()
	cases := []struct {
		name string
		a, b *Crystal
	}{
		{"name", fcc, func() *Crystal { c := cloneCrystal(fcc); c.Name = "other"; return c }()},
		{"N/m vs eV/Å² (fcc)", fcc, inNPerM(fcc)},
		{"N/m vs eV/Å² (blocks and springs)", chain, inNPerM(chain)},
		{"spring order", chain, func() *Crystal {
			c := cloneCrystal(chain)
			c.Springs[0], c.Springs[1] = c.Springs[1], c.Springs[0]
			return c
		}()},
		{"bond given as its reverse", chain, func() *Crystal {
			c := cloneCrystal(chain)
			c.Springs[1] = Spring{From: 0, To: 1, Cell: []int{-1}, KLong: 1}
			return c
		}()},
		{"block given as its transpose", chain, func() *Crystal {
			c := cloneCrystal(chain)
			c.Blocks[0].Cell[0] = -1 // Φ(0; −1) = Φ(0; 1)ᵀ, symmetric here
			return c
		}()},
		{"zero spring added", chain, func() *Crystal {
			c := cloneCrystal(chain)
			c.Springs = append(c.Springs, Spring{From: 0, To: 0, Cell: []int{3}})
			return c
		}()},
		{"transverse spring with p = 1", chain, func() *Crystal {
			c := cloneCrystal(chain)
			c.Springs[0].KTrans = 5 // moves y, z only: not in a p = 1 model
			return c
		}()},
		{"shell order", loadExample(t, "rocksalt-like"), func() *Crystal {
			c := loadExample(t, "rocksalt-like")
			rng.Shuffle(len(c.Shells), func(i, j int) { c.Shells[i], c.Shells[j] = c.Shells[j], c.Shells[i] })
			return c
		}()},
		{"shell vs explicit springs", fcc, func() *Crystal {
			c := cloneCrystal(fcc)
			c.Shells = nil
			m := mustCompile(t, fcc)
			bonds, _, _ := m.findShell(fcc.Shells[0], Limits{}.withDefaults())
			for _, b := range bonds {
				c.Springs = append(c.Springs, Spring{From: b.i, To: b.j, Cell: b.n[:], KLong: fcc.Shells[0].KLong})
			}
			rng.Shuffle(len(c.Springs), func(i, j int) { c.Springs[i], c.Springs[j] = c.Springs[j], c.Springs[i] })
			return c
		}()},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			ha, hb := mustCompile(t, tc.a).Hash(), mustCompile(t, tc.b).Hash()
			if ha != hb {
				t.Errorf("hashes differ: %s vs %s", ha, hb)
			}
		})
	}
	t.Run("enforcing a sum rule with nothing to enforce", func(t *testing.T) {
		m, err := Compile(fcc, Options{EnforceSumRule: true})
		if err != nil {
			t.Fatal(err)
		}
		if m.Hash() != mustCompile(t, fcc).Hash() {
			t.Error("hash changed")
		}
	})
}

// TestHashJSONSpelling: key order, spacing and number spelling of the
// model file do not matter (the hash is of the decoded model).
func TestHashJSONSpelling(t *testing.T) {
	a := `{"name":"x","lattice":[{"x":2.5,"y":0,"z":0}],"polarizations":1,
	"sites":[{"label":"A","massAmu":40,"frac":[0]}],
	"springs":[{"from":0,"to":0,"cell":[1],"kLong":1.5}]}`
	b := `{ "springs" : [ { "kLong" : 15e-1, "cell" : [ 1 ], "to" : 0, "from" : 0 } ],
	  "sites" : [ { "frac" : [ 0.0 ], "massAmu" : 40.000, "label" : "A" } ],
	  "polarizations" : 1, "lattice" : [ { "z" : 0, "y" : 0, "x" : 2.50 } ], "name" : "y" }`
	if !json.Valid([]byte(a)) || !json.Valid([]byte(b)) {
		t.Fatal("test JSON invalid")
	}
	ha := mustCompile(t, decodeModel(t, a)).Hash()
	hb := mustCompile(t, decodeModel(t, b)).Hash()
	if ha != hb {
		t.Errorf("hashes differ: %s vs %s", ha, hb)
	}
}

// TestHashChanges: any change that changes a result changes the hash,
// including a rigid rotation and a site permutation, which leave the
// spectrum alone but rotate eigenvectors and velocities or reorder the
// per-site results (see Model.Hash).
func TestHashChanges(t *testing.T) {
	rs := loadExample(t, "rocksalt-like")
	base := mustCompile(t, rs).Hash()
	rng := rand.New(rand.NewPCG(2, 9))
	cases := []struct {
		name   string
		mutate func(c *Crystal) *Crystal
	}{
		{"mass", func(c *Crystal) *Crystal { c.Sites[1].MassAmu *= 1.001; return c }},
		{"spring constant by 1e-8", func(c *Crystal) *Crystal { c.Shells[0].KLong *= 1 + 1e-8; return c }},
		{"lattice scale", func(c *Crystal) *Crystal {
			for k := range c.Lattice {
				c.Lattice[k] = scale3(c.Lattice[k], 1.01)
			}
			return c
		}},
		{"label", func(c *Crystal) *Crystal {
			c.Sites[0].Label = "R"
			for k := range c.Shells {
				for _, p := range []*string{&c.Shells[k].FromLabel, &c.Shells[k].ToLabel} {
					if *p == "P" {
						*p = "R"
					}
				}
			}
			return c
		}},
		{"polarizations", func(c *Crystal) *Crystal { c.Polarizations = 2; return c }},
		{"extra shell", func(c *Crystal) *Crystal {
			c.Shells = append(c.Shells, Shell{FromLabel: "P", ToLabel: "Q", Shell: 2, KLong: 0.1})
			return c
		}},
		{"rigid rotation", func(c *Crystal) *Crystal { return rotated(c, randomRotation(rng)) }},
		{"site permutation", func(c *Crystal) *Crystal { return permutedSites(c, []int{1, 0}) }},
		{"site moved by a lattice vector", func(c *Crystal) *Crystal { c.Sites[1].Frac[0] -= 1; return c }},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			if h := mustCompile(t, tc.mutate(cloneCrystal(rs))).Hash(); h == base {
				t.Error("hash unchanged")
			}
		})
	}
}
