package main

import (
	"bytes"
	"strings"
	"testing"
)

// TestHelp: every command's help exits 0 and shows its usage line and flags (issue 19 item 5).
func TestHelp(t *testing.T) {
	for _, tc := range []struct {
		args []string
		want []string // in the help, on standard error
	}{
		{[]string{"config", "--help"}, []string{"usage: leqnode config check FILE"}},
		{[]string{"db", "--help"}, []string{"usage: leqnode db check", "-db", "-config", "-format"}},
		{[]string{"db", "check", "-h"}, []string{"-db", "-format"}},
		{[]string{"demo", "-h"}, []string{"usage: leqnode demo [--duration D] [--fast] [--dir DIR] [--no-broker]"}},
		{[]string{"devices", "-h"}, []string{"-format"}},
		{[]string{"version", "-h"}, []string{"usage: leqnode version"}},
	} {
		code, _, errOut := runCmd(t, nil, tc.args...)
		if code != 0 {
			t.Errorf("%v: exit %d, want 0", tc.args, code)
		}
		for _, w := range tc.want {
			if !strings.Contains(errOut, w) {
				t.Errorf("%v: help lacks %q:\n%s", tc.args, w, errOut)
			}
		}
	}
}

// TestDevicesOutput: with no capture device, the table says what to check and JSON is an
// empty array, not null.
func TestDevicesOutput(t *testing.T) {
	var b bytes.Buffer
	if err := writeDevices(&b, nil, "json"); err != nil || strings.TrimSpace(b.String()) != "[]" {
		t.Errorf("json with no devices: %q, %v; want []", b.String(), err)
	}
	b.Reset()
	if err := writeDevices(&b, nil, "table"); err != nil {
		t.Fatal(err)
	}
	for _, w := range []string{"no capture devices found", "arecord -l", "group audio", "kind = \"arecord\""} {
		if !strings.Contains(b.String(), w) {
			t.Errorf("table with no devices lacks %q:\n%s", w, b.String())
		}
	}
}
