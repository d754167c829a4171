package schema_test

import (
	"bytes"
	"encoding/json"
	"errors"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/configs/schema"
)

// samplesDir holds one sample payload of every kind (testdata/README.md says how they were
// made): shared with the collector's intake test and held to the examples in docs/mqtt.md.
var samplesDir = filepath.Join("..", "..", "testdata", "payloads")

// samples returns the sample payloads by file name; the kind is the name up to the first '-'
// or '.' (command-publish-status.json is a command).
func samples(t *testing.T) map[string][]byte {
	t.Helper()
	files, err := filepath.Glob(filepath.Join(samplesDir, "*.json"))
	if err != nil {
		t.Fatal(err)
	}
	out := map[string][]byte{}
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		out[filepath.Base(f)] = b
	}
	if len(out) == 0 {
		t.Fatalf("no sample payloads in %s", samplesDir)
	}
	return out
}

func sampleKind(name string) string {
	return strings.FieldsFunc(name, func(r rune) bool { return r == '-' || r == '.' })[0]
}

// TestSamplePayloads: every sample payload is strict I-JSON and valid against the schema of its
// kind, and every kind with a schema has a sample.
func TestSamplePayloads(t *testing.T) {
	set, err := schema.Compile()
	if err != nil {
		t.Fatal(err)
	}
	covered := map[string]bool{}
	for name, b := range samples(t) {
		kind := sampleKind(name)
		doc, err := schema.Decode(b)
		if err != nil {
			t.Errorf("%s: %v", name, err)
			continue
		}
		if err := set.Validate(kind, doc); err != nil {
			t.Errorf("%s: not a valid %s payload: %v", name, kind, err)
		}
		if m, _ := doc.(map[string]any); kind != "command" && m["kind"] != kind {
			t.Errorf("%s: kind %v, want %q (the file name's)", name, m["kind"], kind)
		}
		covered[kind] = true
	}
	for _, k := range set.Kinds() {
		if !covered[k] {
			t.Errorf("no sample payload of kind %q in %s", k, samplesDir)
		}
	}
}

// TestDocumentedPayloads: every complete JSON example in docs/mqtt.md (a ```json block without
// an elision "...") is, object for object, one of the sample payloads, so the documented
// examples are valid payloads. Abridged blocks are skipped, and at least the second, minute,
// status, reply and command examples must be complete.
func TestDocumentedPayloads(t *testing.T) {
	b, err := os.ReadFile(filepath.Join("..", "..", "docs", "mqtt.md"))
	if err != nil {
		t.Fatal(err)
	}
	var want []any
	for name, s := range samples(t) {
		var v any
		if err := json.Unmarshal(s, &v); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		want = append(want, v)
	}
	kinds := map[string]bool{}
	parts := strings.Split(string(b), "```json\n")
	for _, p := range parts[1:] {
		block, _, ok := strings.Cut(p, "```")
		if !ok {
			t.Fatal("docs/mqtt.md: a ```json block is not closed")
		}
		if strings.Contains(block, "...") {
			continue // abridged
		}
		dec := json.NewDecoder(bytes.NewReader([]byte(block)))
		for {
			var v any
			err := dec.Decode(&v)
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				t.Fatalf("docs/mqtt.md: a complete JSON example does not parse: %v\n%s", err, block)
			}
			found := false
			for _, w := range want {
				if reflect.DeepEqual(v, w) {
					found = true
					break
				}
			}
			m, _ := v.(map[string]any)
			kind, _ := m["kind"].(string)
			if _, isCommand := m["action"]; isCommand && kind == "" {
				kind = "command"
			}
			if !found {
				t.Errorf("docs/mqtt.md: the %s example is not one of the sample payloads in %s (which the schema test validates): %s", kind, samplesDir, strings.TrimSpace(block))
			}
			kinds[kind] = true
		}
	}
	for _, k := range []string{"second", "minute", "status", "reply", "command"} {
		if !kinds[k] {
			t.Errorf("docs/mqtt.md has no complete %s example", k)
		}
	}
}
