// Package schema holds the JSON Schema files of leqnode's MQTT payloads (one file per message
// kind, plus common.schema.json with the shared definitions) and compiles them for validation.
//
// The files are the documented contract between nodes and consumers: the node's publisher is
// tested against them and the central collector validates every payload it receives with them
// before anything reaches its database. A payload names its schema with "kind" and its format
// with "schema_version".
package schema

import (
	"bytes"
	"embed"
	"fmt"
	"path"
	"sort"
	"strings"

	"github.com/santhosh-tekuri/jsonschema/v6"

	"github.com/leqnode/leqnode/node/lib/strict"
)

//go:embed *.schema.json
var files embed.FS

// Set is the compiled schemas, one per message kind (second, minute, ..., status, reply,
// period, command). A Set is safe for concurrent use.
type Set struct {
	byKind map[string]*jsonschema.Schema
}

// Compile compiles every schema file. Formats (date-time, date) are asserted, not just noted;
// date-time is RFC 3339 section 5.6 exactly (strict.ParseTime): the validator's own check
// reads hours with strconv.Atoi and so takes "2031-05-01T+1:00:00Z".
func Compile() (*Set, error) {
	names, err := files.ReadDir(".")
	if err != nil {
		return nil, err
	}
	c := jsonschema.NewCompiler()
	c.AssertFormat()
	c.RegisterFormat(&jsonschema.Format{Name: "date-time", Validate: strict.DateTime})
	ids := map[string]string{}
	for _, f := range names {
		b, err := files.ReadFile(f.Name())
		if err != nil {
			return nil, err
		}
		doc, err := jsonschema.UnmarshalJSON(bytes.NewReader(b))
		if err != nil {
			return nil, fmt.Errorf("schema %s: %w", f.Name(), err)
		}
		m, _ := doc.(map[string]any)
		id, _ := m["$id"].(string)
		if id == "" {
			return nil, fmt.Errorf("schema %s: no $id", f.Name())
		}
		if err := c.AddResource(id, doc); err != nil {
			return nil, fmt.Errorf("schema %s: %w", f.Name(), err)
		}
		ids[strings.TrimSuffix(path.Base(f.Name()), ".schema.json")] = id
	}
	s := &Set{byKind: map[string]*jsonschema.Schema{}}
	for kind, id := range ids {
		if kind == "common" {
			continue
		}
		sch, err := c.Compile(id)
		if err != nil {
			return nil, fmt.Errorf("schema %s: %w", kind, err)
		}
		s.byKind[kind] = sch
	}
	return s, nil
}

// Kinds returns the message kinds the set has a schema for, sorted.
func (s *Set) Kinds() []string {
	out := make([]string, 0, len(s.byKind))
	for k := range s.byKind {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

// Schema returns the compiled schema of kind, or nil.
func (s *Set) Schema(kind string) *jsonschema.Schema { return s.byKind[kind] }

// Decode parses a payload as JSON the way the validator needs it (numbers kept as json.Number,
// so no integer loses precision). The payload must be one I-JSON value (strict.CheckJSON):
// valid UTF-8 and no key twice, which the validator's decoder would let through silently
// (keeping the last value, replacing bad bytes).
func Decode(payload []byte) (any, error) {
	if err := strict.CheckJSON(payload); err != nil {
		return nil, err
	}
	return jsonschema.UnmarshalJSON(bytes.NewReader(payload))
}

// Validate checks a decoded payload (from Decode) against the schema of kind.
func (s *Set) Validate(kind string, doc any) error {
	sch := s.byKind[kind]
	if sch == nil {
		return fmt.Errorf("no schema for kind %q", kind)
	}
	return sch.Validate(doc)
}
