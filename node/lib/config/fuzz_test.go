package config

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// FuzzParse: no file panics the parser; every error line names the file; a file that is
// accepted is printed (Encode, what `config check` shows) as a file that is accepted again
// with the same settings.
func FuzzParse(f *testing.F) {
	shared, _ := filepath.Glob("../../../testdata/config/*.toml")
	for _, p := range append([]string{"../../../configs/leqnode.toml", "../../../deploy/leqnode.toml"}, shared...) {
		if b, err := os.ReadFile(p); err == nil {
			f.Add(b)
		}
	}
	for _, s := range []string{
		"version = 1\n", "version = 1\n[Node]\nid = \"x\"\n", "version = 1\n[capture]\nSAMPLE_RATE = 5\n",
		"version = 1\n[capture]\nstart = \"2026-06-01T7:00:00Z\"\n", "version = 1\n[microphone]\ncorrection = [[1000, 0], [2000]]\n",
		"version = 1\n[publish]\nbrokers = [\"tcp://127.0.0.1:1883\"]\nkeep_alive = 5\n", "version = \"1\"\n", "",
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		c, err := Parse(data, "f.toml")
		if err != nil {
			for _, line := range strings.Split(err.Error(), "\n") {
				if !strings.HasPrefix(line, "f.toml") {
					t.Fatalf("error line %q does not name the file", line)
				}
			}
			return
		}
		b, err := c.Encode()
		if err != nil {
			t.Fatalf("encode: %v", err)
		}
		again, err := Parse(b, "printed.toml")
		if err != nil {
			t.Fatalf("the printed configuration is refused: %v\n%s", err, b)
		}
		if again.Hash() != c.Hash() {
			t.Fatalf("settings change when printed and read again:\n%s", b)
		}
	})
}
