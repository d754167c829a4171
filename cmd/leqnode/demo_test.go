package main

import (
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
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

// TestDemoFast: --fast plays --duration of audio as fast as it can, stamped so that it ends
// now: ten minutes of scene make 600 second records, none dated ahead of the clock.
func TestDemoFast(t *testing.T) {
	dir := t.TempDir()
	code, out, errs := runCmd(t, nil, "demo", "--fast", "--duration", "10m", "--dir", dir, "--no-broker")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	now := time.Now()
	secs := storedSeconds(t, filepath.Join(dir, "leqnode.db"))
	if len(secs) < 599 || len(secs) > 601 {
		t.Errorf("%d second records for 10 minutes of audio", len(secs))
	}
	for _, s := range secs {
		if !s.Flags.Has(record.Synthetic) {
			t.Fatalf("a second of the synthetic scene without the synthetic flag: %v", s.Flags)
		}
	}
	if last := secs[len(secs)-1]; last.Start.After(now) {
		t.Errorf("the last second starts at %v, after now (%v)", last.Start, now)
	}
	if !strings.Contains(out, "export --config "+filepath.Join(dir, "leqnode.toml")) {
		t.Errorf("the suggested export does not name the demo's configuration:\n%s", out)
	}
	if code, _, errs := runCmd(t, nil, "demo", "--fast", "--duration", "0"); code != 2 || !strings.Contains(errs, "--duration") {
		t.Errorf("--fast without a duration: exit %d, %q", code, errs)
	}
}

// TestDemoExportWhileRunning: the export the demo suggests works while the demo runs (through
// the demo's control socket).
func TestDemoExportWhileRunning(t *testing.T) {
	dir := t.TempDir()
	done := make(chan int, 1)
	go func() {
		code, _, _ := runCmd(t, nil, "demo", "--duration", "8s", "--dir", dir, "--no-broker")
		done <- code
	}()
	sock := filepath.Join(dir, "control.sock")
	deadline := time.Now().Add(6 * time.Second)
	for {
		if _, err := os.Stat(sock); err == nil {
			break
		}
		if time.Now().After(deadline) {
			t.Fatal("the demo opened no control socket")
		}
		time.Sleep(50 * time.Millisecond)
	}
	time.Sleep(2 * time.Second) // a few seconds committed (the demo commits every 5 s; reads see held ones through the socket)
	code, out, errs := runCmd(t, nil, "export", "--config", filepath.Join(dir, "leqnode.toml"), "--kind", "second")
	if code != 0 || !strings.Contains(out, `"LAeq"`) {
		t.Errorf("export while the demo runs: exit %d, %q, %s", code, errs, out)
	}
	if c := <-done; c != 0 {
		t.Errorf("demo exit %d", c)
	}
}
