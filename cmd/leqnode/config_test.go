package main

import (
	"strings"
	"testing"
)

// TestConfigCheck: `config check` prints the defaults the daemon uses (not zero values),
// lists every problem at once, and warns about a page served to the network without a token;
// `config --help` is help (exit 0), not a usage error.
func TestConfigCheck(t *testing.T) {
	// The shared files of testdata/config, which node/lib/config's tests read too.
	good := sharedTestdata("config", "node-open-page.toml")
	code, out, errOut := runCmd(t, nil, "config", "check", good)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	for _, want := range []string{"topic_prefix = 'leqnode'", "keep_alive = '30s'", "max_in_flight = 32"} {
		if !strings.Contains(out, want) {
			t.Errorf("resolved configuration lacks %q", want)
		}
	}
	if !strings.Contains(errOut, "warning: ") || !strings.Contains(errOut, "without a token") {
		t.Errorf("no warning for web.addr 0.0.0.0 without a token: %q", errOut)
	}

	bad := sharedTestdata("config", "node-problems.toml")
	code, _, errOut = runCmd(t, nil, "config", "check", bad)
	if code != 2 {
		t.Fatalf("exit %d, want 2", code)
	}
	for _, want := range []string{`node-problems.toml:4: unknown key "Node"`, "capture.sample_rate: want a whole number", "microphone.sensitivity_dbfs = 12", "events.threshold_db: want a number"} {
		if !strings.Contains(errOut, want) {
			t.Errorf("stderr lacks %q:\n%s", want, errOut)
		}
	}
	if strings.Contains(errOut, "of type") {
		t.Errorf("stderr names Go types:\n%s", errOut)
	}

	for _, h := range []string{"--help", "-h", "help"} {
		code, _, errOut := runCmd(t, nil, "config", h)
		if code != 0 || !strings.Contains(errOut, "config check FILE") {
			t.Errorf("config %s: exit %d, output %q", h, code, errOut)
		}
	}
}
