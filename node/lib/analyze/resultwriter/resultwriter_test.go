package resultwriter_test

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/lib/analyze"
	"github.com/leqnode/leqnode/node/lib/analyze/resultwriter"
	"github.com/leqnode/leqnode/node/lib/wav"
)

// measure writes the analysis of 2.5 s of a 1 kHz sine of peak amplitude amp at 48 kHz (zero:
// digital silence), in 1 s intervals at a sensitivity of -26 dBFS, with o.
func measure(t testing.TB, amp float64, bands dsp.BandSet, o resultwriter.Options) string {
	t.Helper()
	const fs, n = 48000, 120000
	var wbuf bytes.Buffer
	ww, err := wav.NewWriter(&wbuf, wav.Format{SampleRate: fs, Channels: 1, Encoding: wav.Float32})
	if err != nil {
		t.Fatal(err)
	}
	x := make([]float32, n)
	for i := range x {
		x[i] = float32(amp * math.Sin(2*math.Pi*1000*float64(i)/fs))
	}
	if err := ww.Write(x); err != nil {
		t.Fatal(err)
	}
	if err := ww.Close(); err != nil {
		t.Fatal(err)
	}
	r, err := wav.NewReader(&wbuf)
	if err != nil {
		t.Fatal(err)
	}
	var out bytes.Buffer
	w := resultwriter.New(&out, o)
	opts := analyze.Options{Channel: 1, Interval: time.Second, SensitivityDBFS: -26, Bands: bands}
	sum, err := analyze.Run(context.Background(), r, opts, func(iv analyze.Interval) error {
		if iv.Index == 0 {
			w.Begin(r.Format(), 1, iv.Bands)
		}
		w.Interval(iv.Offset, iv.Result)
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	w.Summary(&sum.Result)
	return out.String()
}

// A 1 kHz sine of peak 0.1 is -20 dBFS (AES17: a full-scale sine is 0 dBFS); at a sensitivity
// of -26 dBFS for 94 dB that is 100 dB SPL, and A weighting is 0 dB at 1 kHz (IEC 61672-1:2013
// Table 3), so LAeq = 100 dB.
const sineLAeq = 100.0

func TestJSONLines(t *testing.T) {
	start := time.Date(2031, 5, 4, 7, 0, 0, 0, time.UTC)
	out := measure(t, 0.1, dsp.Octave, resultwriter.Options{Format: "jsonl", Start: start, Stamped: true, File: "quay.wav"})
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) != 4 { // three intervals (the last one half a second) and the summary
		t.Fatalf("%d lines:\n%s", len(lines), out)
	}
	for i, l := range lines {
		var m map[string]any
		if err := json.Unmarshal([]byte(l), &m); err != nil {
			t.Fatalf("line %d is not JSON: %v\n%s", i, err, l)
		}
		if m["file"] != "quay.wav" || math.Abs(m["LAeq"].(float64)-sineLAeq) > 0.05 {
			t.Errorf("line %d: file %v, LAeq %v (want %.2f)", i, m["file"], m["LAeq"], sineLAeq)
		}
		if _, ok := m["octave_LZeq"].(map[string]any)["1000"]; !ok {
			t.Errorf("line %d has no 1000 Hz octave band: %s", i, l)
		}
		summary := i == len(lines)-1
		if _, ok := m["LAF90"]; ok != summary || (m["summary"] == true) != summary {
			t.Errorf("line %d: percentiles and the summary mark belong to the summary only: %s", i, l)
		}
		if want := start.Add(time.Duration(i) * time.Second).Format(time.RFC3339Nano); !summary && m["start"] != want {
			t.Errorf("line %d: start %v, want %s", i, m["start"], want)
		}
	}
}

func TestCSV(t *testing.T) {
	out := measure(t, 0.1, dsp.Third, resultwriter.Options{Format: "csv"})
	rows, err := csv.NewReader(strings.NewReader(out)).ReadAll() // every row has the header's fields
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 5 || !strings.HasPrefix(strings.Join(rows[0], ","), "kind,offset_s,duration_s,LAeq,") ||
		!strings.Contains(strings.Join(rows[0], ","), ",third_octave_LZeq_1000,") {
		t.Fatalf("rows:\n%s", out)
	}
	col := map[string]int{}
	for i, c := range rows[0] {
		col[c] = i
	}
	for _, r := range rows[1:] {
		laeq, err := strconv.ParseFloat(r[col["LAeq"]], 64)
		if err != nil || math.Abs(laeq-sineLAeq) > 0.05 {
			t.Errorf("LAeq %q, want %.2f", r[col["LAeq"]], sineLAeq)
		}
		if (r[col["LAF90"]] != "") != (r[0] == "summary") {
			t.Errorf("%s row: LAF90 %q", r[0], r[col["LAF90"]])
		}
	}
}

// Digital silence has no level: null in JSON, empty in CSV, "-" in the table.
func TestNoLevel(t *testing.T) {
	for _, tc := range []struct{ format, want string }{
		{"jsonl", `"LAeq":null`},
		{"csv", "summary,0,2.5,,"},
		{"table", "  LAeq           - dB"},
	} {
		if out := measure(t, 0, 0, resultwriter.Options{Format: tc.format}); !strings.Contains(out, tc.want) {
			t.Errorf("%s: no %q in\n%s", tc.format, tc.want, out)
		}
	}
}

func TestTableSummaryOnly(t *testing.T) {
	out := measure(t, 0.1, 0, resultwriter.Options{Format: "table", SummaryOnly: true, File: "quay.wav"})
	if !strings.HasPrefix(out, "== quay.wav ==\nrecording: ") || strings.Contains(out, "offset s") ||
		!strings.Contains(out, "summary over 2.500 s") || !strings.Contains(out, "  LAeq      100.00 dB") {
		t.Errorf("table:\n%s", out)
	}
}

func Example() {
	var out bytes.Buffer
	w := resultwriter.New(&out, resultwriter.Options{Format: "csv"})
	w.Begin(wav.Format{SampleRate: 48000, Channels: 1, Encoding: wav.Float32}, 1, nil)
	w.Interval(0, &dsp.Result{Duration: 1, LAeq: 61.234, LAFmax: math.NaN()})
	fmt.Print(out.String())
	// Output:
	// kind,offset_s,duration_s,LAeq,LCeq,LZeq,LAFmax,LAFmin,LASmax,LASmin,LAImax,LCpeak,LZpeak,LAE,LAF1,LAF5,LAF10,LAF50,LAF90,LAF95,LAF99
	// interval,0,1,61.23,0.00,0.00,,0.00,0.00,0.00,0.00,0.00,0.00,0.00,,,,,,,
}
