package collect

import (
	"encoding/json"
	"fmt"
	"strings"
	"time"
	"unicode/utf8"

	"github.com/leqnode/leqnode/configs/schema"
	"github.com/leqnode/leqnode/node/fleetdb"
)

// Quarantine reasons: the first word of every quarantined payload's reason, and the label of
// the quarantine counter.
const (
	ReasonTooLarge      = "too-large"      // over broker.max_payload_bytes
	ReasonNotJSON       = "not-json"       // not one JSON object
	ReasonSchemaVersion = "schema-version" // a schema_version this release does not know
	ReasonSchema        = "schema"         // does not match configs/schema
	ReasonTopic         = "topic"          // node, delivery or kind differ from the topic's
	ReasonContent       = "content"        // valid JSON Schema but inconsistent (counts, times)
	ReasonDatabase      = "database"       // refused by the database itself (a value out of range)
)

// message classes of what arrives.
type class int

const (
	classData class = iota
	classStatus
	classReply
	classBad
)

// item is one classified message.
type item struct {
	class class
	rows  []fleetdb.Row
	doc   map[string]any // status and reply
	bad   *fleetdb.Quarantined
	code  string // quarantine reason code
}

// intake validates payloads and turns them into rows. It is safe for concurrent use.
type intake struct {
	schemas  *schema.Set
	dec      *fleetdb.Decoder
	prefix   string
	maxBytes int
}

func newIntake(prefix string, maxBytes int) (*intake, error) {
	s, err := schema.Compile()
	if err != nil {
		return nil, err
	}
	return &intake{schemas: s, dec: fleetdb.NewDecoder(), prefix: prefix, maxBytes: maxBytes}, nil
}

// classify reads one message. Anything wrong yields an item of classBad whose Quarantined
// keeps the topic, the payload and a one-line reason.
func (in *intake) classify(topic string, payload []byte, now time.Time) item {
	rest, _ := strings.CutPrefix(topic, in.prefix+"/")
	parts := strings.Split(rest, "/")
	bad := func(code, format string, a ...any) item {
		node := ""
		if len(parts) > 0 && utf8.ValidString(parts[0]) && len(parts[0]) <= 64 {
			node = parts[0]
		}
		why := code + ": " + fmt.Sprintf(format, a...)
		if len(why) > 500 {
			why = why[:500]
		}
		return item{class: classBad, code: code, bad: &fleetdb.Quarantined{Topic: topic, TopicNode: node, Reason: strings.ToValidUTF8(why, "?"), Payload: payload}}
	}
	if len(payload) > in.maxBytes {
		return bad(ReasonTooLarge, "%d bytes, over the cap of %d", len(payload), in.maxBytes)
	}
	var want string // kind the topic asks for
	switch {
	case len(parts) == 2 && parts[1] == "status":
		want = "status"
	case len(parts) == 2 && parts[1] == "reply":
		want = "reply"
	case len(parts) == 3:
		want = parts[2]
	default:
		return bad(ReasonTopic, "topic is not PREFIX/NODE/DELIVERY/KIND, PREFIX/NODE/status or PREFIX/NODE/reply")
	}
	v, err := schema.Decode(payload)
	if err != nil {
		return bad(ReasonNotJSON, "%v", err)
	}
	doc, ok := v.(map[string]any)
	if !ok {
		return bad(ReasonNotJSON, "not a JSON object")
	}
	if sv, ok := doc["schema_version"].(json.Number); !ok || sv.String() != "1" {
		return bad(ReasonSchemaVersion, "schema_version %v: this collector reads 1; update the collector", doc["schema_version"])
	}
	kind, _ := doc["kind"].(string)
	if kind != want {
		return bad(ReasonTopic, "kind %.20q on a topic for %.20q", kind, want)
	}
	if err := in.schemas.Validate(kind, doc); err != nil {
		return bad(ReasonSchema, "does not match %s.schema.json: %s", kind, oneLine(err.Error()))
	}
	if node, _ := doc["node"].(string); node != parts[0] {
		return bad(ReasonTopic, "node %q in the payload, %.64q in the topic", node, parts[0])
	}
	switch want {
	case "status":
		return item{class: classStatus, doc: doc}
	case "reply":
		return item{class: classReply, doc: doc}
	}
	if d, _ := doc["delivery"].(string); kind != "period" && d != parts[1] {
		return bad(ReasonTopic, "delivery %q in the payload, %.20q in the topic", d, parts[1])
	}
	rows, err := in.dec.Rows(doc, now)
	if err != nil {
		return bad(ReasonContent, "%v", err)
	}
	return item{class: classData, rows: rows}
}

// oneLine folds a multi-line validation error into one line.
func oneLine(s string) string {
	return strings.Join(strings.Fields(s), " ")
}
