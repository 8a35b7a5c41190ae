// Package examples holds the built-in example crystals: small invented
// force-constant models (a monatomic chain, a two-site chain, a square net,
// an fcc crystal and a two-site rock-salt-like crystal) used by the tests and
// by `modegrid demo`. Their numbers are made up for demonstration; they model
// no real material.
package examples

import (
	"embed"
	"fmt"
	"io/fs"
	"sort"
	"strings"

	"google.golang.org/protobuf/encoding/protojson"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

//go:embed *.json
var files embed.FS

// Names lists the example crystals, sorted, without the .json suffix.
func Names() []string {
	entries, _ := fs.ReadDir(files, ".")
	var names []string
	for _, e := range entries {
		names = append(names, strings.TrimSuffix(e.Name(), ".json"))
	}
	sort.Strings(names)
	return names
}

// JSON returns the model file of the named example.
func JSON(name string) ([]byte, error) {
	b, err := files.ReadFile(name + ".json")
	if err != nil {
		return nil, fmt.Errorf("examples: no example crystal %q (have %s)", name, strings.Join(Names(), ", "))
	}
	return b, nil
}

// Load parses the named example into a Crystal message.
func Load(name string) (*modegridv1.Crystal, error) {
	b, err := JSON(name)
	if err != nil {
		return nil, err
	}
	var c modegridv1.Crystal
	if err := protojson.Unmarshal(b, &c); err != nil {
		return nil, fmt.Errorf("examples: %s: %w", name, err)
	}
	return &c, nil
}
