package collect

import (
	"os"
	"strings"
	"testing"
)

// TestParseConfigStrict: keys are exact (go-toml matched them without regard to case), and one
// unknown key does not hide the other problems of form and value (issue 20).
func TestParseConfigStrict(t *testing.T) {
	example, err := os.ReadFile("../../configs/collector.toml")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := ParseConfig(example, "collector.toml"); err != nil {
		t.Fatalf("the example configuration: %v", err)
	}
	text := "version = 1\n[BROKER]\nurls = [\"tcp://127.0.0.1:1883\"]\n[broker]\nclient_id = \"a b\"\nkeep_alive = 30\n[batch]\nMax_Messages = 10\n"
	_, err = ParseConfig([]byte(text), "c.toml")
	if err == nil {
		t.Fatal("accepted")
	}
	for _, want := range []string{
		`c.toml:2: unknown key "BROKER" (keys are case-sensitive: write "broker")`,
		`c.toml:8: unknown key "batch.Max_Messages" (keys are case-sensitive: write "max_messages")`,
		`c.toml:6: broker.keep_alive: want a string, got the number 30`,
		`broker.client_id "a b"`,
	} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error lacks %q:\n%s", want, err)
		}
	}
}

// TestParseConfig: the example file parses; each mistake gives one line naming the key and
// the fix.
func TestParseConfig(t *testing.T) {
	example, err := os.ReadFile("../../configs/collector.toml")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := ParseConfig(example, "collector.toml"); err != nil {
		t.Fatalf("configs/collector.toml: %v", err)
	}
	base := "version = 1\n[broker]\nurls = [\"tcp://broker.wendle-cross.invalid:1883\"]\n[database]\nurl = \"postgres://leqnode@db.wendle-cross.invalid/leqnode\"\n"
	for _, tt := range []struct {
		name, text, want string
	}{
		{"minimal", base, ""},
		{"no version", strings.Replace(base, "version = 1\n", "", 1), "version = 0"},
		{"unknown key", base + "[batch]\nmax_rows = 5\n", `unknown key "batch.max_rows"`},
		{"password in url", strings.Replace(base, "leqnode@", "leqnode:kestrel@", 1), "database.url holds a password"},
		{"password in key=value", strings.Replace(base, `"postgres://leqnode@db.wendle-cross.invalid/leqnode"`, `"host=db user=leqnode password=kestrel"`, 1), "database.url holds a password"},
		{"no broker", strings.Replace(base, `["tcp://broker.wendle-cross.invalid:1883"]`, `[]`, 1), "broker.urls is empty"},
		{"bad broker", strings.Replace(base, `tcp://`, `http://`, 1), "not a broker URL"},
		{"wildcard prefix", strings.Replace(base, "[database]", "topic_prefix = \"leqnode/#\"\n[database]", 1), "broker.topic_prefix"},
		{"bad duration", base + "[resend]\ngrace = \"soon\"\n", `duration "soon"`},
		{"wait too long", base + "[batch]\nmax_wait = \"1m\"\n", "batch.max_wait 1m0s"},
		{"short retention", base + "[retention]\nsecond = \"1h\"\n", "retention.second 1h0m0s"},
		{"share group", strings.Replace(base, "[database]", "share_group = \"$share\"\n[database]", 1), "broker.share_group"},
	} {
		t.Run(tt.name, func(t *testing.T) {
			_, err := ParseConfig([]byte(tt.text), "collector.toml")
			if tt.want == "" {
				if err != nil {
					t.Fatal(err)
				}
				return
			}
			if err == nil || !strings.Contains(err.Error(), tt.want) || !strings.HasPrefix(err.Error(), "collector.toml") {
				t.Fatalf("error %v, want one naming %q", err, tt.want)
			}
		})
	}
}
