package main

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
)

// exportStore writes a small store for the invented node "ferry-row-2": a session in the zone
// Asia/Kolkata (UTC+05:30), 90 second records from 2026-05-03T18:29:00Z (one with digital
// silence), a minute record with a histogram, and an annotation excluding two seconds.
func exportStore(t *testing.T) (path string, start time.Time) {
	t.Helper()
	path = filepath.Join(t.TempDir(), "ferry-row-2.db")
	start = time.Date(2026, 5, 3, 18, 29, 0, 0, time.UTC)
	st, err := buffer.Open(path, &buffer.Options{NoSync: true, Now: func() time.Time { return start.Add(time.Hour) }})
	if err != nil {
		t.Fatal(err)
	}
	st.Append(&record.Session{At: start, SoftwareVersion: "0.1.0", SensitivityDBFS: -26, SampleRate: 48000, TimeZone: "Asia/Kolkata"})
	for i := range 90 {
		s := &record.Second{Start: start.Add(time.Duration(i) * time.Second), Duration: time.Second,
			LAeq: 50 + float64(i)/10, LCeq: 60, LZeq: 62, LAFmax: 55, LAFmin: 45, LASmax: 53, LASmin: 47,
			LAImax: 57, LCpeak: 80, LZpeak: 81, LAE: 50 + float64(i)/10,
			Spectrum: make([]float64, 33), FirstBand: -19}
		for b := range s.Spectrum {
			s.Spectrum[b] = 20 + float64(b)
		}
		if i == 7 {
			nan := math.NaN()
			s.LAeq, s.LCeq, s.LZeq, s.LAFmax, s.LAFmin, s.LASmax, s.LASmin, s.LAImax, s.LCpeak, s.LZpeak, s.LAE = nan, nan, nan, nan, nan, nan, nan, nan, nan, nan, nan
		}
		if _, err := st.Append(s); err != nil {
			t.Fatal(err)
		}
	}
	st.Append(&record.Minute{Start: start, LAeq: 52.5, LAF90: 46.05, ValidSeconds: 60,
		Histogram: record.LevelHistogram{First: 450, Counts: []uint32{10, 0, 5}}})
	st.Append(&record.Annotation{From: start.Add(10 * time.Second), To: start.Add(12 * time.Second), Flags: record.Excluded,
		Reason: "street market, stalls beside the mast"})
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}
	return path, start
}

func TestExportJSONL(t *testing.T) {
	path, start := exportStore(t)
	code, out, errs := runCmd(t, nil, "export", "--db", path, "--kind", "second",
		"--from", start.Add(5*time.Second).Format(time.RFC3339), "--to", start.Add(15*time.Second).Format(time.RFC3339))
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) != 10 { // half-open [from, to)
		t.Fatalf("%d lines, want 10:\n%s", len(lines), out)
	}
	var rows []map[string]any
	for _, l := range lines {
		var m map[string]any
		if err := json.Unmarshal([]byte(l), &m); err != nil {
			t.Fatalf("not JSON: %s: %v", l, err)
		}
		rows = append(rows, m)
	}
	r := rows[0]
	if r["start"] != "2026-05-03T18:29:05Z" || r["seq"] != 6.0 || r["LAeq"] != 50.5 {
		t.Errorf("first row %v", r)
	}
	spec, ok := r["third_octave_LZeq"].(map[string]any)
	// Nominal midband frequencies of IEC 61260-1:2014 Annex E (from memory; the same list heads
	// the columns of IEC 61672-1:2013 Table 3 via python-acoustics): band -19 is 12.5 Hz, band 0
	// is 1 kHz, band 13 is 20 kHz.
	if !ok || spec["12.5"] != 20.0 || spec["1000"] != 39.0 || spec["20000"] != 52.0 || len(spec) != 33 {
		t.Errorf("spectrum %v", r["third_octave_LZeq"])
	}
	if rows[2]["LAeq"] != nil || !strings.Contains(lines[2], `"LAeq":null`) {
		t.Errorf("digital silence must export as null: %s", lines[2])
	}
	if fmt.Sprint(rows[5]["flags"]) != "[excluded]" || fmt.Sprint(rows[6]["flags"]) != "[excluded]" || fmt.Sprint(rows[7]["flags"]) != "[]" {
		t.Errorf("annotation flags: %v %v %v", rows[5]["flags"], rows[6]["flags"], rows[7]["flags"])
	}
}

func TestExportCSVAndDates(t *testing.T) {
	path, _ := exportStore(t)
	// A date is midnight in the zone of the latest session: 2026-05-04 in Asia/Kolkata is
	// 2026-05-03T18:30:00Z, so the range holds the last 30 of the 90 seconds.
	code, out, errs := runCmd(t, nil, "export", "--db", path, "--kind", "second", "--from", "2026-05-04", "--format", "csv")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	rows, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 31 {
		t.Fatalf("%d rows, want a header and 30", len(rows))
	}
	h := rows[0]
	if h[0] != "store" || h[1] != "seq" || h[2] != "start" || h[4] != "LAeq" || h[len(h)-33] != "third_octave_LZeq_12.5" || h[len(h)-1] != "third_octave_LZeq_20000" {
		t.Errorf("header %v", h)
	}
	if rows[1][2] != "2026-05-03T18:30:00Z" {
		t.Errorf("first start %s", rows[1][2])
	}
	code, out, _ = runCmd(t, nil, "export", "--db", path, "--kind", "minute")
	if code != 0 || !strings.Contains(out, `"LAF90":46.05`) || !strings.Contains(out, `"LAF_histogram":{"first_dB":45.0,"bin_dB":0.1,"counts":[10,0,5]}`) {
		t.Errorf("minute export: %d %s", code, out)
	}
	code, out, _ = runCmd(t, nil, "export", "--db", path, "--kind", "annotation", "--format", "csv")
	if code != 0 || !strings.Contains(out, "street market, stalls beside the mast") || !strings.Contains(out, "excluded") {
		t.Errorf("annotation export: %d %s", code, out)
	}
}

func TestExportErrors(t *testing.T) {
	path, _ := exportStore(t)
	for _, tc := range []struct {
		args []string
		code int
		want string
	}{
		{[]string{"export", "--db", path}, 2, "--kind"},
		{[]string{"export", "--db", path, "--kind", "hour"}, 2, "unknown record kind"},
		{[]string{"export", "--kind", "second"}, 2, "--db FILE"},
		{[]string{"export", "--db", path + ".missing", "--kind", "second"}, 2, "no store at"},
		{[]string{"export", "--db", path, "--kind", "second", "--from", "yesterday"}, 2, "RFC 3339"},
		// RFC 3339 section 5.6: two-digit hours (time.Parse takes one digit).
		{[]string{"export", "--db", path, "--kind", "second", "--from", "2026-05-04T7:00:00Z"}, 2, "RFC 3339"},
		{[]string{"export", "--db", path, "--kind", "second", "--from", "2026-05-05", "--to", "2026-05-04"}, 2, "half-open"},
		{[]string{"export", "--db", path, "--kind", "second", "--format", "html"}, 2, "csv, jsonl"},
	} {
		code, _, errs := runCmd(t, nil, tc.args...)
		if code != tc.code || !strings.Contains(errs, tc.want) || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
			t.Errorf("%v: exit %d, stderr %q; want exit %d and a line with %q", tc.args, code, errs, tc.code, tc.want)
		}
	}
}

// While the daemon holds the store, a reading command fails within about a second with one line
// naming the control socket.
func TestExportWhileHeld(t *testing.T) {
	path, _ := exportStore(t)
	st, err := buffer.Open(path, &buffer.Options{NoSync: true})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	code, _, errs := runCmd(t, nil, "export", "--db", path, "--kind", "second")
	if code != 1 || !strings.Contains(errs, "control socket") || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
		t.Errorf("exit %d, stderr %q", code, errs)
	}
	if _, err := os.Stat(path); err != nil {
		t.Fatal(err)
	}
}

// Every kind exports as valid JSON lines and CSV with "store", "seq" and "start", and the field
// names of the MQTT payloads.
func TestExportEveryKind(t *testing.T) {
	path := filepath.Join(t.TempDir(), "quay-7.db")
	at := time.Date(2026, 7, 1, 9, 0, 0, 0, time.UTC)
	st, err := buffer.Open(path, &buffer.Options{NoSync: true, Now: func() time.Time { return at.Add(time.Hour) }})
	if err != nil {
		t.Fatal(err)
	}
	nan := math.NaN()
	recs := []record.Record{
		&record.Event{Start: at, End: at.Add(4 * time.Second), LAFmax: 81.5, LAeq: 75, LAE: 81, LCpeak: 99, Flags: record.Overload},
		&record.Calibration{At: at, Reference: 94, Measured: 94.00000007166739, Deviation: 7.166739e-8, Frequency: 1000.0000000000001, Stability: 0.02,
			SensitivityBefore: -26.1, SensitivityAfter: -26, Applied: true, OK: true},
		&record.Health{At: at, CPU: 4, MemoryMB: 30, DiskFreeMB: 900, TemperatureC: nan, DCOffset: 0.001, ClockErrorMs: nan, ClockSynced: true},
		&record.Gap{From: at, To: at.Add(time.Minute), Reason: "audio device lost"},
		&record.Session{At: at, SoftwareVersion: "0.1.0", ConfigHash: "c0ffee", SensitivityDBFS: -26, SampleRate: 48000, Device: "default", TimeZone: "UTC"},
	}
	for _, r := range recs {
		if _, err := st.Append(r); err != nil {
			t.Fatal(err)
		}
	}
	st.Close()
	want := map[string][]string{
		"event":       {"end", "duration_s", "LAFmax", "LCpeak"},
		"calibration": {"reference_dB", "deviation_dB", "frequency_hz", "passed", "sensitivity_after_dBFS"},
		"health":      {"cpu_percent", "memory_mb", "temperature_c", "clock_synced", "under_range_seconds"},
		"gap":         {"end", "reason"},
		"session":     {"software_version", "sample_rate_hz", "time_zone"},
	}
	for kind, keys := range want {
		code, out, errs := runCmd(t, nil, "export", "--db", path, "--kind", kind)
		if code != 0 {
			t.Fatalf("%s: exit %d: %s", kind, code, errs)
		}
		var m map[string]any
		if err := json.Unmarshal([]byte(out), &m); err != nil {
			t.Fatalf("%s: %v: %s", kind, err, out)
		}
		for _, k := range append(keys, "store", "seq", "start") {
			if _, ok := m[k]; !ok {
				t.Errorf("%s: no %q in %s", kind, k, out)
			}
		}
		if m["start"] != "2026-07-01T09:00:00Z" {
			t.Errorf("%s: start %v", kind, m["start"])
		}
		code, out, _ = runCmd(t, nil, "export", "--db", path, "--kind", kind, "--format", "csv")
		rows, err := csv.NewReader(strings.NewReader(out)).ReadAll()
		if code != 0 || err != nil || len(rows) != 2 || len(rows[0]) != len(rows[1]) {
			t.Errorf("%s csv: exit %d, %v, %q", kind, code, err, out)
		}
		if kind != "event" && strings.Contains(out, "third_octave") {
			t.Errorf("%s csv has a band column without any spectrum: %q", kind, rows[0])
		}
	}
	// Numbers are rounded as the record model says (0.01 dB, 0.1 Hz), not printed in full.
	if _, out, _ := runCmd(t, nil, "export", "--db", path, "--kind", "calibration"); !strings.Contains(out, `"measured_dB":94,`) ||
		!strings.Contains(out, `"frequency_hz":1000,`) || !strings.Contains(out, `"deviation_dB":0,`) {
		t.Errorf("calibration numbers not rounded: %s", out)
	}
	if code, out, _ := runCmd(t, nil, "export", "--db", path, "--kind", "health"); !strings.Contains(out, `"temperature_c":null`) {
		t.Errorf("unmeasured health field must be null: %d %s", code, out)
	}
}
