package client

import (
	"bytes"
	"encoding/json"
	"fmt"
	"sort"
	"strings"

	"google.golang.org/protobuf/reflect/protoreflect"
)

// Model files written before the rename of Spring.from/to and Block.from/to
// (proto fields 1 and 2) to from_site/to_site use the keys "from" and "to".
// legacyKeys maps them to the current JSON names; ParseModel rewrites them
// in every element of "springs" and "blocks" before decoding.
var legacyKeys = map[string]string{"from": "fromSite", "to": "toSite"}

// legacyLists are the lists of messages whose elements may use legacyKeys.
var legacyLists = []string{"springs", "blocks"}

// rewriteLegacy returns the model file with the old "from"/"to" keys of
// springs and blocks renamed; b itself when there are none or when b is
// not a JSON object (protojson then reports the syntax error). A spring or
// block with both spellings of one field is an error.
func rewriteLegacy(b []byte) ([]byte, error) {
	var top map[string]json.RawMessage
	if json.Unmarshal(b, &top) != nil {
		return b, nil
	}
	changed := false
	var errs []string
	for _, list := range legacyLists {
		raw, ok := top[list]
		if !ok {
			continue
		}
		var elems []map[string]json.RawMessage
		if json.Unmarshal(raw, &elems) != nil {
			continue // not a list of objects: protojson says why
		}
		hit := false
		for i, e := range elems {
			for old, cur := range legacyKeys {
				v, ok := e[old]
				if !ok {
					continue
				}
				if _, both := e[cur]; both {
					errs = append(errs, fmt.Sprintf("%s[%d]: both %q (the old name) and %q are given", list, i, old, cur))
					continue
				}
				delete(e, old)
				e[cur] = v
				hit = true
			}
		}
		if hit {
			nb, err := json.Marshal(elems)
			if err != nil {
				return nil, err
			}
			top[list] = nb
			changed = true
		}
	}
	if len(errs) > 0 {
		return nil, fmt.Errorf("%s", strings.Join(errs, "; "))
	}
	if !changed {
		return b, nil
	}
	return json.Marshal(top)
}

// unknownKeys lists every key of the JSON value v (decoded with UseNumber)
// that is no field of md, with the nearest field name as a suggestion,
// walking into nested messages and lists of messages. path is v's place in
// the file ("" at the top, "springs[0]" below).
func unknownKeys(v any, md protoreflect.MessageDescriptor, path string, out *[]string) {
	obj, ok := v.(map[string]any)
	if !ok {
		return // a type error: protojson reports it
	}
	keys := make([]string, 0, len(obj))
	for k := range obj {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	fields := md.Fields()
	for _, k := range keys {
		fd := fields.ByJSONName(k)
		if fd == nil {
			fd = fields.ByName(protoreflect.Name(k))
		}
		if fd == nil {
			at := "at the top level"
			if path != "" {
				at = "in " + path
			}
			msg := fmt.Sprintf("unknown key %q %s", k, at)
			if s := suggestField(k, fields); s != "" {
				msg += fmt.Sprintf(" (did you mean %q?)", s)
			}
			*out = append(*out, msg)
			continue
		}
		if fd.Kind() != protoreflect.MessageKind {
			continue
		}
		sub := fd.Message()
		name := string(fd.JSONName())
		if path != "" {
			name = path + "." + name
		}
		if fd.IsList() {
			if list, ok := obj[k].([]any); ok {
				for i, e := range list {
					unknownKeys(e, sub, fmt.Sprintf("%s[%d]", name, i), out)
				}
			}
			continue
		}
		unknownKeys(obj[k], sub, name, out)
	}
}

// suggestField returns the JSON name of the field of fields nearest to key
// (edit distance over the JSON and the proto names, ignoring case and
// underscores), or "" when none is within a third of the key's length
// (at least 1, at most 3 edits).
func suggestField(key string, fields protoreflect.FieldDescriptors) string {
	norm := func(s string) string { return strings.ToLower(strings.ReplaceAll(s, "_", "")) }
	k := norm(key)
	limit := min(3, max(1, len([]rune(k))/3))
	best, bestD := "", limit+1
	for i := 0; i < fields.Len(); i++ {
		fd := fields.Get(i)
		for _, cand := range []string{fd.JSONName(), string(fd.Name())} {
			if d := editDistance(k, norm(cand)); d < bestD {
				best, bestD = fd.JSONName(), d
			}
		}
	}
	return best
}

// editDistance is the optimal-string-alignment distance between a and b:
// insertions, deletions, substitutions and transpositions of adjacent runes,
// each costing 1 (Levenshtein's distance with Damerau's transposition, so
// "nmae" is one edit from "name").
func editDistance(a, b string) int {
	ra, rb := []rune(a), []rune(b)
	d := make([][]int, len(ra)+1)
	for i := range d {
		d[i] = make([]int, len(rb)+1)
		d[i][0] = i
	}
	for j := range d[0] {
		d[0][j] = j
	}
	for i := 1; i <= len(ra); i++ {
		for j := 1; j <= len(rb); j++ {
			cost := 1
			if ra[i-1] == rb[j-1] {
				cost = 0
			}
			d[i][j] = min(d[i-1][j]+1, d[i][j-1]+1, d[i-1][j-1]+cost)
			if i > 1 && j > 1 && ra[i-1] == rb[j-2] && ra[i-2] == rb[j-1] {
				d[i][j] = min(d[i][j], d[i-2][j-2]+1)
			}
		}
	}
	return d[len(ra)][len(rb)]
}

// checkKeys returns an error listing every unknown key of the model file,
// each with its nearest field name; nil when all keys are known or b is not
// JSON (protojson then reports the syntax error).
func checkKeys(b []byte, md protoreflect.MessageDescriptor) error {
	d := json.NewDecoder(bytes.NewReader(b))
	d.UseNumber()
	var v any
	if d.Decode(&v) != nil {
		return nil
	}
	var unknown []string
	unknownKeys(v, md, "", &unknown)
	if len(unknown) == 0 {
		return nil
	}
	return fmt.Errorf("%s", strings.Join(unknown, "; "))
}
