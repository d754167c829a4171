package main

import (
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/node/testrig"
)

// TestDocumentedCalibration: the calibrate example of docs/calibration.md is true. The recording
// is made with the sox command the page gives (Debian package sox: `synth sine 1000 vol 0.5248`
// is a sine of peak 0.5248, 20 lg 0.5248 = -5.60 dBFS by AES17's definition of full scale), and
// each documented `leqnode calibrate ... --format json check.wav` line prints the JSON object
// shown under it, with the exit status the page states (0 when it states none).
func TestDocumentedCalibration(t *testing.T) {
	t.Setenv("LEQNODE_CONFIG", "none")
	sox := testrig.Need(t, "sox", "sox")
	b, err := os.ReadFile(filepath.Join("..", "..", "docs", "calibration.md"))
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(string(b), "\n")
	dir := t.TempDir()
	made, checked := false, 0
	for i, l := range lines {
		l = strings.TrimSpace(l)
		if _, cmd, ok := strings.Cut(l, "here made with: sox "); ok {
			args := strings.Fields(strings.TrimSuffix(cmd, ")"))
			c := exec.Command(sox, args...)
			c.Dir = dir // the command names check.wav: it lands in dir
			if out, err := c.CombinedOutput(); err != nil {
				t.Fatalf("the page's sox command %q: %v\n%s", cmd, err, out)
			}
			made = true
			continue
		}
		if !strings.HasPrefix(l, "leqnode calibrate ") || !strings.Contains(l, "--format json") {
			continue
		}
		if !made {
			t.Fatalf("docs/calibration.md: %q comes before the sox command that makes its recording", l)
		}
		cmd, comment, _ := strings.Cut(l, "#")
		cmd = strings.TrimSpace(cmd)
		wantCode := 0
		if _, n, ok := strings.Cut(comment, "exit status "); ok {
			wantCode, err = strconv.Atoi(strings.TrimSpace(n))
			if err != nil {
				t.Fatalf("docs/calibration.md: exit status in %q: %v", l, err)
			}
		}
		if i+1 >= len(lines) {
			t.Fatalf("docs/calibration.md: no output after %q", l)
		}
		var want map[string]any
		if err := json.Unmarshal([]byte(strings.TrimSpace(lines[i+1])), &want); err != nil {
			t.Fatalf("docs/calibration.md: the output shown after %q is not JSON: %v", l, err)
		}
		args := strings.Fields(cmd)[1:]
		for j, a := range args {
			if a == "check.wav" {
				args[j] = filepath.Join(dir, "check.wav")
			}
		}
		code, out, errs := runCmd(t, nil, args...)
		var got map[string]any
		if err := json.Unmarshal([]byte(out), &got); err != nil {
			t.Fatalf("%s: output %q: %v (stderr %q)", cmd, out, err, errs)
		}
		if code != wantCode || !reflect.DeepEqual(got, want) {
			t.Errorf("%s: exit %d, %s; docs/calibration.md shows exit %d, %s", cmd, code, strings.TrimSpace(out), wantCode, strings.TrimSpace(lines[i+1]))
		}
		checked++
	}
	if checked < 2 {
		t.Errorf("docs/calibration.md: %d calibrate examples with JSON output checked, want the two the page has", checked)
	}
}
