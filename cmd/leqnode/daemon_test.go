package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/leqnode/leqnode/node/control"
)

// TestDaemonControlSocket runs `leqnode run` as a child process with the synthetic source in
// real time and checks the control socket: status, reading commands that find the store held by
// the daemon and go through the socket by themselves, the reload on SIGHUP, and that an export
// through the socket equals a direct read once the daemon has stopped.
func TestDaemonControlSocket(t *testing.T) {
	dir := t.TempDir()
	sock := filepath.Join(dir, "control.sock")
	cfgText := func(sens float64) string {
		return fmt.Sprintf(`version = 1
[node]
id = "wendle-cross-07"
[microphone]
sensitivity_dbfs = %g
[capture]
kind = "synthetic"
realtime = true
[measure]
settling_s = 0
[store]
path = %q
commit_interval = "1s"
[control]
socket = %q
`, sens, filepath.Join(dir, "node.db"), sock)
	}
	cfg := filepath.Join(dir, "node.toml")
	if err := os.WriteFile(cfg, []byte(cfgText(-26)), 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := childCmd(t, "run", "--config", cfg)
	var stderr strings.Builder
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer cmd.Process.Kill()
	c := waitForSocket(t, sock, &stderr)
	ctx := context.Background()
	var st map[string]any
	if err := c.Get(ctx, "status", &st); err != nil || st["node"] != "wendle-cross-07" {
		t.Fatalf("status: %v %v", st, err)
	}
	time.Sleep(3500 * time.Millisecond)

	// The daemon holds the store: export and db check go through the socket by themselves.
	code, viaSocket, errs := runCmd(t, nil, "export", "--config", cfg, "--kind", "second", "--format", "jsonl")
	if code != 0 || strings.Count(viaSocket, "\n") < 2 {
		t.Fatalf("export through the socket: exit %d, %d lines, %s", code, strings.Count(viaSocket, "\n"), errs)
	}
	code, check, errs := runCmd(t, nil, "db", "check", "--config", cfg)
	if code != 0 || !strings.Contains(check, "second") {
		t.Errorf("db check through the socket: exit %d: %s %s", code, check, errs)
	}
	// Bad input through the socket keeps its exit status and one-line message.
	code, out, errs := runCmd(t, nil, "export", "--config", cfg, "--kind", "weather")
	if code != 2 || out != "" || strings.Count(strings.TrimSpace(errs), "\n") != 0 || !strings.Contains(errs, "weather") {
		t.Errorf("bad kind through the socket: exit %d, stdout %q, stderr %q", code, out, errs)
	}

	// SIGHUP: a new sensitivity applies without a restart and writes a session record.
	if err := os.WriteFile(cfg, []byte(cfgText(-30)), 0o644); err != nil {
		t.Fatal(err)
	}
	cmd.Process.Signal(syscall.SIGHUP)
	time.Sleep(1500 * time.Millisecond)
	stopChild(t, cmd, &stderr)
	if _, err := os.Stat(sock); !os.IsNotExist(err) {
		t.Error("the control socket was left behind")
	}

	// After the daemon stopped: the direct read holds every line the socket gave, unchanged.
	code, direct, errs := runCmd(t, nil, "export", "--config", cfg, "--kind", "second", "--format", "jsonl")
	if code != 0 {
		t.Fatal(errs)
	}
	if !strings.HasPrefix(direct, viaSocket) {
		t.Errorf("export through the socket is not a prefix of the direct export:\nsocket:\n%s\ndirect:\n%s", viaSocket, direct)
	}
	code, sess, _ := runCmd(t, nil, "export", "--config", cfg, "--kind", "session", "--format", "jsonl")
	if code != 0 || strings.Count(sess, "\n") != 2 || !strings.Contains(sess, "-30") {
		t.Errorf("sessions after the reload:\n%s", sess)
	}
}

func TestDaemonCalibrate(t *testing.T) {
	// `leqnode calibrate --config FILE` without a recording asks the running node to take the
	// next stable calibrator tone: the synthetic scene starts with 20 s of a 94 dB tone at the
	// configured sensitivity (-26 dBFS), so the node finds -26 dBFS, applies it, keeps it in the
	// state directory, and answers with the contract's JSON keys.
	dir := t.TempDir()
	sock := filepath.Join(dir, "control.sock")
	cfg := filepath.Join(dir, "node.toml")
	err := os.WriteFile(cfg, []byte(fmt.Sprintf(`version = 1
[node]
id = "wendle-cross-08"
[capture]
kind = "synthetic"
realtime = true
calibrator_s = 20
[store]
path = %q
[control]
socket = %q
[calibration]
state_dir = %q
`, filepath.Join(dir, "node.db"), sock, dir)), 0o644)
	if err != nil {
		t.Fatal(err)
	}
	cmd := childCmd(t, "run", "--config", cfg)
	var stderr strings.Builder
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer cmd.Process.Kill()
	waitForSocket(t, sock, &stderr)
	code, out, errs := runCmd(t, nil, "calibrate", "--config", cfg, "--reference", "94", "--format", "json")
	if code != 0 {
		t.Fatalf("exit %d: %s\n%s", code, errs, stderr.String())
	}
	for _, k := range []string{`"frequency_hz"`, `"measured_dBFS"`, `"sensitivity_dBFS"`, `"stable_s"`, `"ok": true`} {
		if !strings.Contains(strings.ReplaceAll(out, `":true`, `": true`), k) {
			t.Errorf("answer lacks %s: %s", k, out)
		}
	}
	if !strings.Contains(out, "-26") {
		t.Errorf("sensitivity should be -26 dBFS: %s", out)
	}
	if _, err := os.Stat(filepath.Join(dir, "sensitivity.json")); err != nil {
		t.Errorf("the applied sensitivity was not kept: %v", err)
	}
	stopChild(t, cmd, &stderr)
}

// waitForSocket waits up to 15 s for a child daemon's control socket to answer.
func waitForSocket(t *testing.T, sock string, stderr *strings.Builder) *control.Client {
	t.Helper()
	c := control.NewClient(sock)
	for deadline := time.Now().Add(15 * time.Second); !c.Available(); time.Sleep(50 * time.Millisecond) {
		if time.Now().After(deadline) {
			t.Fatalf("no control socket after 15 s\n%s", stderr.String())
		}
	}
	return c
}
