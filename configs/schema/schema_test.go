package schema_test

import (
	"strings"
	"testing"

	"github.com/leqnode/leqnode/configs/schema"
)

// TestStrictPayloads: a payload with a key twice or bytes that are not UTF-8 is refused before
// validation (I-JSON, RFC 7493 sections 2.1 and 2.3), and date-time is RFC 3339 section 5.6 to
// the letter: the validator's built-in check took a signed one-digit hour.
func TestStrictPayloads(t *testing.T) {
	set, err := schema.Compile()
	if err != nil {
		t.Fatal(err)
	}
	const good = `{"schema_version":1,"id":"r1","action":"resend","from":"2031-05-04T08:00:00Z","to":"2031-05-04T09:00:00Z"}`
	doc, err := schema.Decode([]byte(good))
	if err != nil {
		t.Fatal(err)
	}
	if err := set.Validate("command", doc); err != nil {
		t.Fatalf("valid command refused: %v", err)
	}
	for _, bad := range []string{
		`{"schema_version":1,"id":"r1","id":"r2","action":"publish_status"}`,
		"{\"schema_version\":1,\"id\":\"r\xff\",\"action\":\"publish_status\"}",
		`{"schema_version":1,"id":"r1","action":"publish_status"} {}`,
	} {
		if _, err := schema.Decode([]byte(bad)); err == nil {
			t.Errorf("Decode accepted %q", bad)
		}
	}
	for _, tm := range []string{"2031-05-04T+1:00:00Z", "2031-05-04T8:00:00Z", "2031-05-04T08:00:00+24:00"} {
		doc, err := schema.Decode([]byte(strings.Replace(good, "2031-05-04T08:00:00Z", tm, 1)))
		if err != nil {
			t.Fatal(err)
		}
		if err := set.Validate("command", doc); err == nil {
			t.Errorf("from %q accepted", tm)
		}
	}
}
