package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"strings"
	"testing"

	"google.golang.org/protobuf/reflect/protoreflect"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// responseOf maps a subcommand to the response message its --format json
// prints.
var responseOf = map[string]protoreflect.MessageDescriptor{
	"check":    (&modegridv1.CheckModelResponse{}).ProtoReflect().Descriptor(),
	"modes":    (&modegridv1.ComputeModesResponse{}).ProtoReflect().Descriptor(),
	"path":     (&modegridv1.ComputeDispersionResponse{}).ProtoReflect().Descriptor(),
	"dos":      (&modegridv1.ComputeDosResponse{}).ProtoReflect().Descriptor(),
	"thermal":  (&modegridv1.ComputeThermalResponse{}).ProtoReflect().Descriptor(),
	"fit":      (&modegridv1.FitResult{}).ProtoReflect().Descriptor(),
	"infrared": (&modegridv1.ComputeInfraredResponse{}).ProtoReflect().Descriptor(),
	"scatter":  (&modegridv1.ComputeScatteringResponse{}).ProtoReflect().Descriptor(),
	"powder":   (&modegridv1.ComputeScatteringResponse{}).ProtoReflect().Descriptor(),
}

// jsonCases are the JSON golden cases and two whose zero values protobuf
// JSON would omit by default: the point at T = 0 and site 0.
func jsonCases() [][]string {
	var cases [][]string
	for _, tc := range goldenCases {
		if strings.HasSuffix(tc.name, "-json") {
			cases = append(cases, tc.args)
		}
	}
	return append(cases,
		[]string{"thermal", "-m", example("chain"), "--grid", "8", "--temps", "0", "--msd", "--format", "json"},
		[]string{"dos", "-m", example("diatomic-chain"), "--grid", "8", "--step", "1", "--per-site", "--format", "json"},
		// A powder map: its rows, sites and Debye–Waller fields.
		[]string{"powder", "-m", example("fcc"), "--b", "M=5", "--qpoints", "2", "--max-directions", "128", "--dw-grid", "4", "--emax", "20", "--estep", "10", "--format", "json"},
	)
}

// TestJSONStable: --format json is byte-stable: its layout is the
// canonical two-space indentation of encoding/json (none of protojson's
// deliberately varied whitespace), so the bytes equal their own
// re-indentation, and the same command prints the same bytes twice.
func TestJSONStable(t *testing.T) {
	for i, args := range jsonCases() {
		t.Run(fmt.Sprintf("%s-%d", args[0], i), func(t *testing.T) {
			out := jsonRun(t, args)
			var canon bytes.Buffer
			if err := json.Indent(&canon, []byte(strings.TrimSuffix(out, "\n")), "", "  "); err != nil {
				t.Fatalf("output is not JSON: %v", err)
			}
			canon.WriteByte('\n')
			if canon.String() != out {
				t.Errorf("%v: layout is not the canonical indentation:\n%s", args, out)
			}
			if again := jsonRun(t, args); again != out {
				t.Errorf("%v: two runs print different bytes", args)
			}
		})
	}
}

// TestJSONEveryField: every field of the response message, at every level,
// is present in --format json, zero values included, so a reader never
// meets a missing key (only oneof members not chosen are absent).
func TestJSONEveryField(t *testing.T) {
	for i, args := range jsonCases() {
		t.Run(fmt.Sprintf("%s-%d", args[0], i), func(t *testing.T) {
			out := jsonRun(t, args)
			var v any
			if err := json.Unmarshal([]byte(out), &v); err != nil {
				t.Fatalf("output is not JSON: %v", err)
			}
			desc, ok := responseOf[args[0]]
			if !ok {
				t.Fatalf("no response type known for %q", args[0])
			}
			for _, miss := range missingFields("$", desc, v) {
				t.Errorf("%v: %s", args, miss)
			}
		})
	}
}

func jsonRun(t *testing.T, args []string) string {
	t.Helper()
	code, out, stderr := runCLI(t, args...)
	if code != exitOK {
		t.Fatalf("%v: exit %d: %s", args, code, stderr)
	}
	return out
}

// missingFields returns the fields of desc absent from the JSON object v,
// recursively through nested messages and lists of messages.
func missingFields(path string, desc protoreflect.MessageDescriptor, v any) []string {
	obj, ok := v.(map[string]any)
	if !ok {
		return []string{fmt.Sprintf("%s: %T; want an object of %s", path, v, desc.FullName())}
	}
	var miss []string
	fields := desc.Fields()
	for i := range fields.Len() {
		fd := fields.Get(i)
		if od := fd.ContainingOneof(); od != nil && !od.IsSynthetic() {
			continue // one member of a oneof is set, the others absent
		}
		val, ok := obj[fd.JSONName()]
		if !ok {
			miss = append(miss, fmt.Sprintf("%s.%s missing", path, fd.JSONName()))
			continue
		}
		if fd.Message() == nil || fd.IsMap() || val == nil {
			continue
		}
		if fd.IsList() {
			list, _ := val.([]any)
			for k, el := range list {
				miss = append(miss, missingFields(fmt.Sprintf("%s.%s[%d]", path, fd.JSONName(), k), fd.Message(), el)...)
			}
			continue
		}
		if fd.Message().FullName().Parent() == "google.protobuf" {
			continue // well-known types have their own JSON forms
		}
		miss = append(miss, missingFields(path+"."+fd.JSONName(), fd.Message(), val)...)
	}
	return miss
}
