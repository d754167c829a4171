package main

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/dsp/selftest"
	"github.com/leqnode/leqnode/node/testrig"
)

// TestVerifyPasses: the real chain passes the IEC 61672-1:2013 / IEC 61260-1:2014 class 1
// electrical tests, in every output format.
func TestVerifyPasses(t *testing.T) {
	code, out, errs := runCmd(t, nil, "verify", "--format", "json")
	if code != 0 {
		t.Fatalf("exit %d, stderr %q", code, errs)
	}
	var rep struct {
		Pass   bool `json:"pass"`
		Checks []struct {
			Test string `json:"test"`
			Pass bool   `json:"pass"`
		} `json:"checks"`
	}
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	if !rep.Pass || len(rep.Checks) < 50 {
		t.Errorf("pass %v with %d checks", rep.Pass, len(rep.Checks))
	}
	code, out, _ = runCmd(t, nil, "verify", "--rate", "16000")
	if code != 0 || !strings.Contains(out, "A weighting at 63 Hz") || !strings.Contains(out, "tests passed at 16000 Hz") ||
		!strings.Contains(out, "not the microphone") {
		t.Errorf("table: exit %d\n%s", code, out)
	}
}

// TestVerifyFailsOnDamagedChain: a weighting coefficient changed by 0.1 % makes verify exit
// with status 1 and name the failing test, in the table and on standard error.
func TestVerifyFailsOnDamagedChain(t *testing.T) {
	_, a, err := dsp.WeightingSections(48000)
	if err != nil {
		t.Fatal(err)
	}
	a[0].B1 *= 1.001
	var out, errb bytes.Buffer
	err = verifyCommand(context.Background(), stdio{out: &out, err: &errb}, nil, selftest.Options{ASections: a})
	if err == nil {
		t.Fatal("a damaged chain passes")
	}
	if !strings.Contains(err.Error(), `"A weighting at 63 Hz"`) {
		t.Errorf("error %q does not name the failed test", err)
	}
	if !strings.Contains(out.String(), "FAIL") || !strings.Contains(out.String(), "FAILED") {
		t.Errorf("table does not show the failure:\n%s", out.String())
	}
	var u usageError
	if asUsage(err, &u) {
		t.Error("a failed test is reported as bad usage (exit 2), want run-time failure (exit 1)")
	}
}

func asUsage(err error, u *usageError) bool {
	v, ok := err.(usageError)
	if ok {
		*u = v
	}
	return ok
}

func TestVerifyUsage(t *testing.T) {
	for _, args := range [][]string{
		{"--format", "csv"}, {"--rate", "1000"}, {"extra"},
	} {
		if code, _, errs := runCmd(t, nil, append([]string{"verify"}, args...)...); code != 2 || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
			t.Errorf("verify %v: exit %d, stderr %q", args, code, errs)
		}
	}
}

// TestVerifyHTML renders the page in headless chromium (Debian package) and checks that the
// browser shows the summary and the tests; without chromium the test is skipped.
func TestVerifyHTML(t *testing.T) {
	code, out, _ := runCmd(t, nil, "verify", "--format", "html", "--rate", "16000")
	if code != 0 || !strings.HasPrefix(out, "<!DOCTYPE html>") || strings.Contains(out, "http") {
		t.Fatalf("exit %d; page must be self-contained:\n%.300s", code, out)
	}
	browser := testrig.Need(t, "chromium", "chromium")
	dir := t.TempDir()
	page := filepath.Join(dir, "verify.html")
	if err := os.WriteFile(page, []byte(out), 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(browser, "--headless", "--no-sandbox", "--disable-gpu", "--user-data-dir="+filepath.Join(dir, "profile"), "--dump-dom", "file://"+page)
	dom, err := cmd.Output()
	if err != nil {
		t.Fatalf("chromium could not render the page: %v", err)
	}
	for _, want := range []string{"tests passed at 16000 Hz", "A weighting at 63 Hz", "LCpeak - LC", "not the microphone"} {
		if !strings.Contains(string(dom), want) {
			t.Errorf("rendered page lacks %q", want)
		}
	}
}
