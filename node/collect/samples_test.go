package collect

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// TestIntakeSamples: the shared sample payloads (testdata/payloads, one of every kind a node
// sends, valid against configs/schema by the schema package's test) are taken by the
// collector's intake on their own topics, each data record as rows of its node and kind, and
// each is refused on a topic of another kind.
func TestIntakeSamples(t *testing.T) {
	files, err := filepath.Glob(filepath.Join("..", "..", "testdata", "payloads", "*.json"))
	if err != nil {
		t.Fatal(err)
	}
	in, err := newIntake("wendlecross", 1<<20)
	if err != nil {
		t.Fatal(err)
	}
	// The samples are dated 2031-05-04 around 08:00 UTC; the collector quarantines records
	// more than a day ahead of its clock.
	now := time.Date(2031, 5, 4, 10, 0, 0, 0, time.UTC)
	seen := map[string]bool{}
	for _, f := range files {
		name := filepath.Base(f)
		kind := strings.FieldsFunc(name, func(r rune) bool { return r == '-' || r == '.' })[0]
		if kind == "command" {
			continue // the collector sends commands; it never takes one in
		}
		payload, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		topic, want := "wendlecross/wendle-cross-03/live/"+kind, classData
		switch kind {
		case "status":
			topic, want = "wendlecross/wendle-cross-03/status", classStatus
		case "reply":
			topic, want = "wendlecross/wendle-cross-03/reply", classReply
		}
		it := in.classify(topic, payload, now)
		if it.class != want {
			reason := ""
			if it.bad != nil {
				reason = it.bad.Reason
			}
			t.Errorf("%s on %s: class %d, want %d (%s)", name, topic, it.class, want, reason)
			continue
		}
		seen[kind] = true
		if want == classData {
			if len(it.rows) == 0 {
				t.Errorf("%s: no rows", name)
			}
			for _, r := range it.rows {
				if r.Node != "wendle-cross-03" || r.Kind != kind {
					t.Errorf("%s: a row of node %q kind %q", name, r.Node, r.Kind)
				}
			}
		}
		other := "wendlecross/wendle-cross-03/live/gap"
		if kind == "gap" {
			other = "wendlecross/wendle-cross-03/live/event"
		}
		if it := in.classify(other, payload, now); it.class != classBad || it.code != ReasonTopic {
			t.Errorf("%s on %s: class %d code %q, want quarantined for its topic", name, other, it.class, it.code)
		}
	}
	for _, k := range []string{"second", "minute", "event", "calibration", "health", "gap", "annotation", "session", "period", "status", "reply"} {
		if !seen[k] {
			t.Errorf("no sample payload of kind %s was taken", k)
		}
	}
}
