// Package deploy holds the files that install leqnode on a node: the systemd unit, the default
// configuration, the packaging program and fleet examples. Its tests check the unit statically,
// since systemd is not PID 1 on build machines.
package deploy

import (
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/node/testrig"
)

// unitCopy writes a copy of the unit whose ExecStart names an existing binary, as
// systemd-analyze verify wants.
func unitCopy(t *testing.T) string {
	t.Helper()
	b, err := os.ReadFile("leqnode.service")
	if err != nil {
		t.Fatal(err)
	}
	exe, err := os.Executable() // any existing executable will do for verify
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	p := filepath.Join(dir, "leqnode.service")
	if err := os.WriteFile(p, []byte(strings.ReplaceAll(string(b), "/usr/bin/leqnode", exe)), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func needAnalyze(t *testing.T) {
	testrig.Need(t, "systemd", "systemd-analyze")
}

func TestUnitVerifies(t *testing.T) {
	needAnalyze(t)
	out, err := exec.Command("systemd-analyze", "verify", unitCopy(t)).CombinedOutput()
	if err != nil || len(strings.TrimSpace(string(out))) > 0 {
		t.Errorf("systemd-analyze verify: %v\n%s", err, out)
	}
}

func TestUnitExposure(t *testing.T) {
	// Issue goal: an exposure of at most 3.0 by `systemd-analyze security --offline=true`.
	needAnalyze(t)
	out, err := exec.Command("systemd-analyze", "security", "--offline=true", "--no-pager", unitCopy(t)).CombinedOutput()
	if err != nil {
		t.Fatalf("systemd-analyze security: %v\n%s", err, out)
	}
	m := regexp.MustCompile(`Overall exposure level for leqnode.service: ([0-9.]+)`).FindSubmatch(out)
	if m == nil {
		t.Fatalf("no exposure figure in:\n%s", out)
	}
	v, _ := strconv.ParseFloat(string(m[1]), 64)
	t.Logf("exposure %.1f", v)
	if v > 3.0 {
		t.Errorf("exposure %.1f, want at most 3.0", v)
	}
}

func TestUnitKeepsTheFeatures(t *testing.T) {
	// Hardening must not break what the node needs: the microphone, the network for MQTT, the
	// state and runtime directories.
	b, err := os.ReadFile("leqnode.service")
	if err != nil {
		t.Fatal(err)
	}
	unit := string(b)
	for _, want := range []string{"DeviceAllow=char-alsa rw", "SupplementaryGroups=audio", "StateDirectory=leqnode", "RuntimeDirectory=leqnode", "NoNewPrivileges=yes", "ProtectSystem=strict", "ProtectHome=yes", "PrivateTmp=yes", "DevicePolicy=closed", "Restart=on-failure"} {
		if !strings.Contains(unit, want+"\n") {
			t.Errorf("unit lacks %q", want)
		}
	}
	for _, bad := range []string{"\nPrivateDevices=yes", "\nPrivateNetwork=yes", "\nPrivateUsers=yes"} {
		if strings.Contains(unit, bad) {
			t.Errorf("unit sets %q, which cuts the node off from its microphone or broker", strings.TrimSpace(bad))
		}
	}
}

// TestCollectorUnit checks the collector's unit statically: systemd-analyze verify and an
// exposure of at most 3.0 (the node unit's goal), with the network it needs.
func TestCollectorUnit(t *testing.T) {
	needAnalyze(t)
	b, err := os.ReadFile("leqnode-collect.service")
	if err != nil {
		t.Fatal(err)
	}
	unit := string(b)
	if !strings.Contains(unit, "ExecStart=/usr/bin/leqnode collect --config /etc/leqnode/collector.toml\n") {
		t.Error("unit does not run leqnode collect with /etc/leqnode/collector.toml")
	}
	if strings.Contains(unit, "\nPrivateNetwork=yes") || !strings.Contains(unit, "RestrictAddressFamilies=AF_UNIX AF_INET AF_INET6\n") {
		t.Error("unit cuts the collector off from its broker or database")
	}
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(t.TempDir(), "leqnode-collect.service")
	if err := os.WriteFile(p, []byte(strings.ReplaceAll(unit, "/usr/bin/leqnode", exe)), 0o644); err != nil {
		t.Fatal(err)
	}
	if out, err := exec.Command("systemd-analyze", "verify", p).CombinedOutput(); err != nil || len(strings.TrimSpace(string(out))) > 0 {
		t.Errorf("systemd-analyze verify: %v\n%s", err, out)
	}
	out, err := exec.Command("systemd-analyze", "security", "--offline=true", "--no-pager", p).CombinedOutput()
	if err != nil {
		t.Fatalf("systemd-analyze security: %v\n%s", err, out)
	}
	m := regexp.MustCompile(`Overall exposure level for leqnode-collect.service: ([0-9.]+)`).FindSubmatch(out)
	if m == nil {
		t.Fatalf("no exposure figure in:\n%s", out)
	}
	v, _ := strconv.ParseFloat(string(m[1]), 64)
	t.Logf("exposure %.1f", v)
	if v > 3.0 {
		t.Errorf("exposure %.1f, want at most 3.0", v)
	}
}
