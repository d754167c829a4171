package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
)

// fleetStore writes two hours of minute records (with spectra) for an invented node of Wendle
// Cross whose levels sit gain dB above the others', from 2026-05-03 06:00 UTC.
func fleetStore(t *testing.T, dir, id string, gain float64) string {
	t.Helper()
	path := filepath.Join(dir, id+".db")
	start := time.Date(2026, 5, 3, 6, 0, 0, 0, time.UTC)
	st, err := buffer.Open(path, &buffer.Options{NoSync: true, Now: func() time.Time { return start.Add(3 * time.Hour) }})
	if err != nil {
		t.Fatal(err)
	}
	st.Append(&record.Session{At: start, SoftwareVersion: "0.1.0", SensitivityDBFS: -26, SampleRate: 48000, TimeZone: "UTC",
		NodeID: id, Site: "Harrowby Lane", Latitude: 47.0001 + gain/1000, Longitude: -30})
	for i := range 120 {
		l := 56 + gain
		spec := make([]float64, 28)
		for k := range spec {
			spec[k] = l - 10 - 0.05*float64((k-14)*(k-14))
		}
		st.Append(&record.Minute{Start: start.Add(time.Duration(i) * time.Minute), LAeq: l, LCeq: l + 4, LAFmax: l + 6,
			Spectrum: spec, FirstBand: -17, ValidSeconds: 60, ValidDuration: time.Minute})
	}
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}

func TestReportFleetCommand(t *testing.T) {
	dir := t.TempDir()
	var dbs []string
	for i, g := range []float64{0, 0.2, -0.2, 1.5} {
		dbs = append(dbs, fleetStore(t, dir, fmt.Sprintf("wendle-cross-%02d", i+1), g))
	}
	out := filepath.Join(t.TempDir(), "fleet")
	code, stdout, errs := runCmd(t, nil, "report", "--fleet", "--dir", dir, "--from", "2026-05-03", "--to", "2026-05-04",
		"--profile", "eu-lden", "--map-indicator", "day", "--out", out)
	if code != 0 || !strings.Contains(stdout, "4 nodes") {
		t.Fatalf("exit %d: %s %s", code, stdout, errs)
	}
	nodes, err := os.ReadFile(filepath.Join(out, "fleet-nodes.csv"))
	if err != nil {
		t.Fatal(err)
	}
	// Two hours at 56 dB in the day period (07:00-19:00 of Directive 2002/49/EC Annex I): the
	// 06:00-07:00 hour belongs to the night before. Every node's own level, its gain above 56.
	for i, want := range []string{"wendle-cross-01,Harrowby Lane,47.0001,-30,", "wendle-cross-04,Harrowby Lane,47.0016,-30,"} {
		if !strings.Contains(string(nodes), want) {
			t.Errorf("fleet-nodes.csv lacks row %d %q:\n%s", i, want, nodes)
		}
	}
	if !strings.Contains(string(nodes), ",57.5,exact,") {
		t.Errorf("fleet-nodes.csv lacks wendle-cross-04's LAeq 57.5:\n%s", nodes)
	}

	// The co-location check: the +1.5 dB node is named with its offset from the median (the
	// median of 0, 0.2, -0.2, 1.5 is 0.1), exit 1; the three others pass.
	code, stdout, errs = runCmd(t, nil, "report", "--fleet", "--colocation", "--dir", dir, "--from", "2026-05-03T06:00:00Z",
		"--to", "2026-05-03T08:00:00Z", "--out", out)
	if code != 1 || !strings.Contains(errs, "wendle-cross-04 (LAeq +1.4 dB") || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
		t.Errorf("co-location with the +1.5 dB node: exit %d, stderr %q", code, errs)
	}
	if !strings.Contains(stdout, "120 common minutes") || !strings.Contains(stdout, "FAIL") {
		t.Errorf("co-location output:\n%s", stdout)
	}
	code, stdout, errs = runCmd(t, nil, "report", "--fleet", "--colocation", "--db", dbs[0], "--db", dbs[1], "--db", dbs[2],
		"--from", "2026-05-03T06:00:00Z", "--to", "2026-05-03T08:00:00Z", "--out", out)
	if code != 0 || !strings.Contains(stdout, "spread 0.40 dB: pass") {
		t.Errorf("co-location within 0.2 dB: exit %d, %s %s", code, stdout, errs)
	}
	for _, f := range []string{"fleet.html", "fleet-daily.csv", "fleet-hourly.csv", "fleet-coverage.csv", "simultaneous.csv", "colocation.html", "colocation.csv"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Errorf("no %s: %v", f, err)
		}
	}
}

func TestReportFleetCommandErrors(t *testing.T) {
	dir := t.TempDir()
	a := fleetStore(t, dir, "wendle-cross-01", 0)
	b := fleetStore(t, dir, "wendle-cross-02", 0)
	out := t.TempDir()
	rng := []string{"--from", "2026-05-03", "--to", "2026-05-04", "--out", out}
	tests := []struct {
		name string
		args []string
		code int
		want string
	}{
		{"no stores", append([]string{"--profile", "ldn"}, rng...), 2, "--db FILE (repeated) or --dir DIR"},
		{"empty dir", append([]string{"--dir", t.TempDir(), "--profile", "ldn"}, rng...), 2, "holds no *.db store files"},
		{"missing store", append([]string{"--db", filepath.Join(dir, "none.db"), "--profile", "ldn"}, rng...), 2, "no store at"},
		{"bad indicator", append([]string{"--db", a, "--profile", "ldn", "--map-indicator", "Lmoon"}, rng...), 2, "use one of Ldn, LAeq, day, night"},
		{"bad window", append([]string{"--db", a, "--profile", "ldn", "--window", "0s"}, rng...), 2, "--window"},
		{"bad zone name", append([]string{"--db", a, "--profile", "ldn", "--time-zone", "Mars/Olympus"}, rng...), 2, "IANA zone"},
		{"two for co-location", append([]string{"--colocation", "--db", a, "--db", b}, rng...), 2, "at least three nodes"},
		{"bad tolerance", append([]string{"--colocation", "--db", a, "--tolerance", "-1"}, rng...), 2, "--tolerance"},
	}
	for _, tc := range tests {
		code, _, errs := runCmd(t, nil, append([]string{"report", "--fleet"}, tc.args...)...)
		if code != tc.code || !strings.Contains(errs, tc.want) || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
			t.Errorf("%s: exit %d, stderr %q; want exit %d and %q on one line", tc.name, code, errs, tc.code, tc.want)
		}
	}
}
