package main

import (
	"os/exec"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

// TestVersion: `leqnode version` and `leqnode --version` print one line naming the release,
// exit 0; a binary built with -X main.version (as make build and the packages are) prints
// that version.
func TestVersion(t *testing.T) {
	for _, args := range [][]string{{"version"}, {"--version"}} {
		code, out, errOut := runCmd(t, nil, args...)
		if code != 0 || !strings.HasPrefix(out, "leqnode ") || strings.Count(out, "\n") != 1 || !strings.Contains(out, runtime.Version()) {
			t.Errorf("%v: exit %d, out %q, err %q", args, code, out, errOut)
		}
	}
	if code, _, _ := runCmd(t, nil, "version", "extra"); code != 2 {
		t.Errorf("version extra: exit %d, want 2", code)
	}
	if _, out, _ := runCmd(t, nil, "help"); !strings.Contains(out, "version") {
		t.Errorf("help does not list version:\n%s", out)
	}

	bin := filepath.Join(t.TempDir(), "leqnode")
	build := exec.Command("go", "build", "-tags", "noportaudio", "-ldflags", "-X main.version=1.2.3~test", "-o", bin, ".")
	build.Env = append(build.Environ(), "CGO_ENABLED=0")
	if out, err := build.CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	out, err := exec.Command(bin, "--version").Output()
	if err != nil || !strings.HasPrefix(string(out), "leqnode 1.2.3~test ") || !strings.Contains(string(out), "without PortAudio") {
		t.Errorf("built with -X main.version=1.2.3~test: %q, %v", out, err)
	}
}
