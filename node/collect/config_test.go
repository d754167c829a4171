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
