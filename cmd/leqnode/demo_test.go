package main

import (
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"
)

func TestDemo(t *testing.T) {
	// `leqnode demo` for a few seconds in real time: one live line per second and the records
	// stored. The synthetic scene opens with a 94 dB calibrator tone (sensitivity -26 dBFS,
	// 1 kHz), so the live lines read 94 dB once the Fast detector has risen.
	dir := t.TempDir()
	start := time.Now()
	code, out, errs := runCmd(t, nil, "demo", "--duration", "4s", "--dir", dir)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if d := time.Since(start); d < 3*time.Second {
		t.Errorf("the demo ran %v, want about 4 s in real time", d)
	}
	live := regexp.MustCompile(`(?m)^\d\d:\d\d:\d\d  LAeq +(\d+\.\d)  LAFmax +(\d+\.\d)  \|#*\s*\|`)
	lines := live.FindAllStringSubmatch(out, -1)
	if len(lines) < 3 {
		t.Fatalf("%d live lines:\n%s", len(lines), out)
	}
	if last := lines[len(lines)-2]; last[1] != "94.0" {
		t.Errorf("calibrator second reads LAeq %s, want 94.0:\n%s", last[1], out)
	}
	if !strings.Contains(out, "stored in "+filepath.Join(dir, "leqnode.db")) || !regexp.MustCompile(`\d+ second`).MatchString(out) {
		t.Errorf("no summary of the stored records:\n%s", out)
	}
}
