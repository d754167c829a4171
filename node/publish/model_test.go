package publish

import (
	"encoding/json"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/buffer/record"
)

// TestSchemasFollowTheRecordModel: every payload field of a record kind (but second, sent in
// columns) is named in its JSON Schema exactly as the record model's field table names it, and
// the schema names no field the table lacks; the schema's flag names are the model's.
func TestSchemasFollowTheRecordModel(t *testing.T) {
	dir := filepath.Join("..", "..", "configs", "schema")
	read := func(name string) map[string]any {
		b, err := os.ReadFile(filepath.Join(dir, name+".schema.json"))
		if err != nil {
			t.Fatal(err)
		}
		var d map[string]any
		if err := json.Unmarshal(b, &d); err != nil {
			t.Fatal(err)
		}
		return d
	}
	common := read("common")
	envelope := common["$defs"].(map[string]any)["envelope"].(map[string]any)["properties"].(map[string]any)
	for _, k := range record.Kinds() {
		if k == record.KindSecond {
			continue
		}
		var want []string
		for _, f := range record.Fields(k) {
			want = append(want, f.Name)
			if f.Type == record.TimeField {
				want = append(want, f.Name+"_ms")
			}
		}
		var got []string
		for name := range read(k.String())["properties"].(map[string]any) {
			if _, ok := envelope[name]; ok || name == "kind" || name == "third_octave_LZeq" {
				continue
			}
			got = append(got, name)
		}
		sort.Strings(want)
		sort.Strings(got)
		if !slices.Equal(got, want) {
			t.Errorf("%s.schema.json names %v, the record model %v", k, got, want)
		}
	}
	desc := common["$defs"].(map[string]any)["flags"].(map[string]any)["description"].(string)
	for _, n := range record.FlagNames() {
		if !strings.Contains(desc, n) {
			t.Errorf("common.schema.json's flags do not name %q", n)
		}
	}
}
