package fleetdb

import (
	"encoding/json"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// TestEveryFieldHasAColumn: every field a payload schema (configs/schema) defines for a record
// kind is stored in a column, so that a field added to the payloads is not dropped unseen.
func TestEveryFieldHasAColumn(t *testing.T) {
	envelope := []string{"schema_version", "kind", "node", "store", "delivery", "request", "seq", "start", "start_ms",
		"end", "last_seq", "count", "bands_hz", "columns"}
	for _, tb := range append(slices.Clone(tables), periodTable) {
		b, err := os.ReadFile(filepath.Join("..", "..", "configs", "schema", tb.kind+".schema.json"))
		if err != nil {
			t.Fatal(err)
		}
		var s struct {
			Properties map[string]json.RawMessage `json:"properties"`
		}
		if err := json.Unmarshal(b, &s); err != nil {
			t.Fatal(err)
		}
		props := s.Properties
		if tb.kind == "second" {
			var c struct {
				Properties map[string]json.RawMessage `json:"properties"`
			}
			if err := json.Unmarshal(props["columns"], &c); err != nil {
				t.Fatal(err)
			}
			props = c.Properties
		}
		for p := range props {
			if slices.Contains(envelope, p) || (tb.kind == "session" && strings.HasPrefix(p, "first_seq_")) {
				continue
			}
			if !slices.ContainsFunc(tb.cols, func(c column) bool { return c.key == p }) {
				t.Errorf("%s: field %q of %s.schema.json has no column in table %s", tb.kind, p, tb.kind, tb.name)
			}
		}
	}
}
