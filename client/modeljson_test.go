package client

import (
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"
)

// TestParseModelLegacyKeys: the old keys "from" and "to" of springs and
// blocks decode to the same model as from_site/to_site (both JSON and proto
// spellings), and giving both spellings of one field is refused.
func TestParseModelLegacyKeys(t *testing.T) {
	const cur = `{"lattice":[{"x":2.5}],"polarizations":1,"sites":[{"label":"A","massAmu":40,"frac":[0]},{"label":"B","massAmu":20,"frac":[0.5]}],
	"springs":[{"fromSite":0,"toSite":1,"cell":[0],"kLong":1.5},{"from_site":1,"to_site":0,"cell":[1],"kLong":1.5}],
	"blocks":[{"fromSite":1,"toSite":1,"cell":[2],"phi":[0.1,0,0,0,0,0,0,0,0]}]}`
	const old = `{"lattice":[{"x":2.5}],"polarizations":1,"sites":[{"label":"A","massAmu":40,"frac":[0]},{"label":"B","massAmu":20,"frac":[0.5]}],
	"springs":[{"from":0,"to":1,"cell":[0],"kLong":1.5},{"from":1,"to":0,"cell":[1],"kLong":1.5}],
	"blocks":[{"from":1,"to":1,"cell":[2],"phi":[0.1,0,0,0,0,0,0,0,0]}]}`
	a, err := ParseModel([]byte(cur))
	if err != nil {
		t.Fatal(err)
	}
	b, err := ParseModel([]byte(old))
	if err != nil {
		t.Fatalf("old spelling: %v", err)
	}
	if !proto.Equal(a, b) {
		t.Errorf("old spelling decodes to %v; want %v", b, a)
	}
	if a.GetSprings()[0].GetToSite() != 1 || a.GetBlocks()[0].GetFromSite() != 1 {
		t.Errorf("decoded %v", a)
	}
	_, err = ParseModel([]byte(`{"lattice":[{"x":1}],"springs":[{"from":0,"fromSite":1}]}`))
	if err == nil || !strings.Contains(err.Error(), `springs[0]: both "from"`) {
		t.Errorf("both spellings: err = %v", err)
	}
}

// TestParseModelDidYouMean: every unknown key is named with its place and
// the nearest field name of its message; keys far from every name get no
// suggestion.
func TestParseModelDidYouMean(t *testing.T) {
	cases := []struct {
		name, json string
		want       []string
	}{
		{"top level", `{"lattic":[{"x":1}]}`, []string{`unknown key "lattic" at the top level (did you mean "lattice"?)`}},
		{"british spelling", `{"polarisations":1}`, []string{`"polarisations" at the top level (did you mean "polarizations"?)`}},
		{"snake case typo", `{"sites":[{"mass_amuu":1}]}`, []string{`"mass_amuu" in sites[0] (did you mean "massAmu"?)`}},
		{"nested spring", `{"springs":[{"kLong":1},{"klongg":2}]}`, []string{`"klongg" in springs[1] (did you mean "kLong"?)`}},
		{"vector", `{"lattice":[{"x":1,"w":2}]}`, []string{`"w" in lattice[0] (did you mean "x"?)`}},
		{"two at once", `{"nmae":"a","shells":[{"fromlabel":"A","shel":1}]}`,
			[]string{`"nmae" at the top level (did you mean "name"?)`, `"fromlabel" in shells[0] (did you mean "fromLabel"?)`, `"shel" in shells[0] (did you mean "shell"?)`}},
		{"nothing near", `{"temperature":300}`, []string{`unknown key "temperature" at the top level`}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ParseModel([]byte(tc.json))
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q lacks %q", err, w)
				}
			}
			if tc.name == "nothing near" && strings.Contains(err.Error(), "did you mean") {
				t.Errorf("error %q suggests a field", err)
			}
		})
	}
}

// TestEditDistance: distances worked out by hand (a transposition is one
// edit).
func TestEditDistance(t *testing.T) {
	for _, tc := range []struct {
		a, b string
		want int
	}{
		{"", "", 0}, {"abc", "", 3}, {"kitten", "sitting", 3}, {"lattic", "lattice", 1}, {"polarisations", "polarizations", 1}, {"Γ", "G", 1}, {"nmae", "name", 1}, {"ca", "abc", 3},
	} {
		if got := editDistance(tc.a, tc.b); got != tc.want {
			t.Errorf("editDistance(%q, %q) = %d; want %d", tc.a, tc.b, got, tc.want)
		}
	}
}
