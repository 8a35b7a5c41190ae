package client

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// LoadModel reads a model file, by its extension: .pb or .binpb, the
// protobuf binary of modegrid.v1.Crystal (the bytes proto.Marshal gives);
// anything else, the protobuf JSON of modegrid.v1.Crystal (camelCase or
// snake_case keys). It checks only the encoding; the server validates the
// physics. NumPy .npz supercell sets are read by the modegrid command,
// not by this package (whose only dependencies are gRPC and protobuf).
func LoadModel(path string) (*modegridv1.Crystal, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("read model: %w", err)
	}
	c, err := ParseModelFile(path, b)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return c, nil
}

// ParseModelFile decodes the content b of a model file named name by the
// name's extension, as LoadModel does: .pb and .binpb are protobuf binary
// (ParseModelBinary), .npz is refused (see LoadModel), anything else is
// protobuf JSON (ParseModel).
func ParseModelFile(name string, b []byte) (*modegridv1.Crystal, error) {
	switch strings.ToLower(filepath.Ext(name)) {
	case ".pb", ".binpb":
		return ParseModelBinary(b)
	case ".npz":
		return nil, errors.New("parse model: a NumPy .npz supercell set is read by the modegrid command (--model FILE.npz), not by the Go client library")
	}
	return ParseModel(b)
}

// ParseModelBinary parses the protobuf binary of a modegrid.v1.Crystal.
func ParseModelBinary(b []byte) (*modegridv1.Crystal, error) {
	var c modegridv1.Crystal
	if err := proto.Unmarshal(b, &c); err != nil {
		return nil, fmt.Errorf("parse model: protobuf binary of modegrid.v1.Crystal: %w", err)
	}
	return &c, nil
}

// ParseModel parses the protobuf JSON of a modegrid.v1.Crystal. Unknown keys
// are an error, so a misspelt key is not silently ignored: every one is
// named with its place and the nearest field name ("did you mean"). The
// keys "from" and "to" of springs and blocks, the names of from_site and
// to_site before their rename, are still accepted.
func ParseModel(b []byte) (*modegridv1.Crystal, error) {
	var c modegridv1.Crystal
	b, err := rewriteLegacy(b)
	if err != nil {
		return nil, fmt.Errorf("parse model: %w", err)
	}
	if err := checkKeys(b, c.ProtoReflect().Descriptor()); err != nil {
		return nil, fmt.Errorf("parse model: %w", err)
	}
	if err := protojson.Unmarshal(b, &c); err != nil {
		return nil, fmt.Errorf("parse model: %w", err)
	}
	return &c, nil
}

// Inline returns a ModelSource carrying the model itself. The Client turns
// it into a reference by hash once the server has seen the model.
func Inline(c *modegridv1.Crystal) *modegridv1.ModelSource {
	return &modegridv1.ModelSource{Source: &modegridv1.ModelSource_Crystal{Crystal: c}}
}

// QList returns an explicit q-point set; each point is fractional reciprocal
// coordinates (components past the crystal's dimensionality 0).
func QList(points ...[3]float64) *modegridv1.QPointSet {
	l := &modegridv1.QPointList{}
	for _, q := range points {
		l.Points = append(l.Points, &modegridv1.QPoint{Q1: q[0], Q2: q[1], Q3: q[2]})
	}
	return &modegridv1.QPointSet{Set: &modegridv1.QPointSet_List{List: l}}
}

// Grid returns a Γ-centred Monkhorst–Pack grid with the given divisions
// (one per lattice vector).
func Grid(mesh ...uint32) *modegridv1.QPointSet {
	return &modegridv1.QPointSet{Set: &modegridv1.QPointSet_Grid{Grid: &modegridv1.MonkhorstPackGrid{Mesh: mesh}}}
}

// ShiftedGrid returns a Monkhorst–Pack grid shifted by half a step.
func ShiftedGrid(mesh ...uint32) *modegridv1.QPointSet {
	return &modegridv1.QPointSet{Set: &modegridv1.QPointSet_Grid{Grid: &modegridv1.MonkhorstPackGrid{Mesh: mesh, Shifted: true}}}
}

// Cells returns the q-point set of a finite crystal of N1×N2×N3 cells with
// periodic boundary conditions: exactly its allowed wavevectors.
func Cells(cells ...uint32) *modegridv1.QPointSet {
	return &modegridv1.QPointSet{Set: &modegridv1.QPointSet_Cells{Cells: &modegridv1.FiniteCrystal{Cells: cells}}}
}
