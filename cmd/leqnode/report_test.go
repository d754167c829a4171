package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/testrig"
)

// reportStore writes two hours of second records at 56 dB for the invented node
// "harrowby-lane-1", in the zone Asia/Kolkata, from 21:00 local time on 2026-05-03.
func reportStore(t *testing.T) string {
	t.Helper()
	ist, err := time.LoadLocation("Asia/Kolkata")
	if err != nil {
		testrig.Missing(t, "no time zone data ("+err.Error()+"): install the Debian package tzdata (make test-deps does, as root)")
	}
	path := filepath.Join(t.TempDir(), "harrowby-lane-1.db")
	start := time.Date(2026, 5, 3, 21, 0, 0, 0, ist)
	st, err := buffer.Open(path, &buffer.Options{NoSync: true, Now: func() time.Time { return start.Add(3 * time.Hour) }})
	if err != nil {
		t.Fatal(err)
	}
	st.Append(&record.Session{At: start, SoftwareVersion: "0.1.0", SensitivityDBFS: -26, SampleRate: 48000, TimeZone: "Asia/Kolkata"})
	for i := range 7200 {
		st.Append(&record.Second{Start: start.Add(time.Duration(i) * time.Second), Duration: time.Second, LAeq: 56, LCeq: 60})
	}
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}

func TestReportCommand(t *testing.T) {
	path := reportStore(t)
	out := filepath.Join(t.TempDir(), "rep")
	code, stdout, errs := runCmd(t, nil, "report", "--db", path, "--from", "2026-05-03", "--to", "2026-05-04",
		"--profile", "india-2000", "--zone", "residential", "--out", out)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if !strings.Contains(stdout, "report.html") {
		t.Errorf("output %q", stdout)
	}
	daily, err := os.ReadFile(filepath.Join(out, "daily.csv"))
	if err != nil {
		t.Fatal(err)
	}
	// dates are in the zone of the session record (Asia/Kolkata): 21:00-22:00 is day, above the
	// residential day limit of 55 dB(A), and 22:00-23:00 night, above 45 dB(A) (Noise Pollution
	// (Regulation and Control) Rules 2000, Schedule, area C). The range cuts the night at 24:00:
	// it is partial, and its one hour of data covers 12.5 % of the whole 8 h night.
	lines := strings.Split(strings.TrimSpace(string(daily)), "\n")
	// The session record names no node (an older store): the node is named by its file.
	if !strings.HasPrefix(lines[0], "node_id,site,date,") || !strings.HasPrefix(lines[len(lines)-1], "harrowby-lane-1,,") {
		t.Errorf("daily.csv does not name the node in every row:\n%s", daily)
	}
	if len(lines) != 3 || !strings.Contains(lines[2], "2026-05-03,false,2026-05-03T06:00:00+05:30,16,56.0,exact,,,55.0,true,false,") ||
		!strings.Contains(lines[2], "2026-05-03T22:00:00+05:30,8,56.0,exact,,,45.0,true,true,0,12.5,true") {
		t.Errorf("daily.csv:\n%s", daily)
	}
}

func TestReportCommandErrors(t *testing.T) {
	path := reportStore(t)
	out := t.TempDir()
	tests := []struct {
		name string
		args []string
		code int
		want string
	}{
		{"no range", []string{"--db", path, "--profile", "ldn", "--out", out}, 2, "--from DATE --to DATE"},
		{"no profile", []string{"--db", path, "--from", "2026-05-03", "--to", "2026-05-04", "--out", out}, 2, "--profile"},
		{"unknown profile", []string{"--db", path, "--from", "2026-05-03", "--to", "2026-05-04", "--profile", "moon", "--out", out}, 2, "no built-in profile \"moon\""},
		{"unknown zone", []string{"--db", path, "--from", "2026-05-03", "--to", "2026-05-04", "--profile", "india-2000", "--zone", "harbour", "--out", out}, 2, "use one of industrial"},
		{"zone without zones", []string{"--db", path, "--from", "2026-05-03", "--to", "2026-05-04", "--profile", "ldn", "--zone", "x", "--out", out}, 2, "has no zones"},
		{"reversed range", []string{"--db", path, "--from", "2026-05-04", "--to", "2026-05-03", "--profile", "ldn", "--out", out}, 2, "not before"},
		{"bad date", []string{"--db", path, "--from", "May 3", "--to", "2026-05-04", "--profile", "ldn", "--out", out}, 2, "is not a time"},
		{"no store", []string{"--db", filepath.Join(out, "none.db"), "--from", "2026-05-03", "--to", "2026-05-04", "--profile", "ldn", "--out", out}, 2, "no store at"},
		{"no out", []string{"--db", path, "--from", "2026-05-03", "--to", "2026-05-04", "--profile", "ldn"}, 2, "--out DIR"},
	}
	for _, tc := range tests {
		code, _, errs := runCmd(t, nil, append([]string{"report"}, tc.args...)...)
		if code != tc.code || !strings.Contains(errs, tc.want) || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
			t.Errorf("%s: exit %d, stderr %q; want exit %d and %q on one line", tc.name, code, errs, tc.code, tc.want)
		}
	}
}
