package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/node/lib/wav"
)

// runCmd runs the command in-process and returns its exit status, stdout and stderr.
func runCmd(t *testing.T, stdin []byte, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := run(context.Background(), stdio{in: bytes.NewReader(stdin), out: &out, err: &errb}, args)
	return code, out.String(), errb.String()
}

// writeWAV writes samples (interleaved) to a WAV file in dir and returns its path.
func writeWAV(t testing.TB, dir, name string, f wav.Format, samples []float32) string {
	t.Helper()
	path := filepath.Join(dir, name)
	fh, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	w, err := wav.NewWriter(fh, f)
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Write(samples); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if err := fh.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}

func sineSamples(n int, f, amp, fs float64) []float32 {
	x := make([]float32, n)
	for i := range x {
		x[i] = float32(amp * math.Sin(2*math.Pi*f*float64(i)/fs))
	}
	return x
}

// jsonLines parses jsonl output.
func jsonLines(t *testing.T, out string) []map[string]any {
	t.Helper()
	var lines []map[string]any
	sc := bufio.NewScanner(strings.NewReader(out))
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	for sc.Scan() {
		var m map[string]any
		if err := json.Unmarshal(sc.Bytes(), &m); err != nil {
			t.Fatalf("bad jsonl line %q: %v", sc.Text(), err)
		}
		lines = append(lines, m)
	}
	return lines
}

func TestAnalyzeJSONL(t *testing.T) {
	dir := t.TempDir()
	// 2.5 s of a 1 kHz sine of 94 dB SPL at the default sensitivity -26 dBFS (peak 10^(-26/20)
	// by AES17), 48 kHz, 24-bit, two channels with silence on the second.
	const fs = 48000
	mono := sineSamples(fs*5/2, 1000, math.Pow(10, -26.0/20), fs)
	st := make([]float32, 2*len(mono))
	for i, v := range mono {
		st[2*i] = v
	}
	path := writeWAV(t, dir, "tone.wav", wav.Format{SampleRate: fs, Channels: 2, Encoding: wav.PCM24}, st)
	code, out, errs := runCmd(t, nil, "analyze", "--format", "jsonl", "--start", "2026-05-04T07:00:00Z", path)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	lines := jsonLines(t, out)
	if len(lines) != 4 {
		t.Fatalf("%d lines, want 3 intervals and a summary:\n%s", len(lines), out)
	}
	keys := []string{"offset_s", "duration_s", "start", "LAeq", "LCeq", "LZeq", "LAFmax", "LAFmin", "LASmax", "LASmin", "LAImax", "LCpeak", "LZpeak", "LAE", "third_octave_LZeq"}
	for _, k := range keys {
		if _, ok := lines[1][k]; !ok {
			t.Errorf("interval line lacks %q", k)
		}
	}
	if d := lines[2]["duration_s"].(float64); d != 0.5 {
		t.Errorf("partial last interval duration_s = %v, want 0.5", d)
	}
	if s := lines[1]["start"].(string); s != "2026-05-04T07:00:01Z" {
		t.Errorf("second interval start = %q", s)
	}
	// 94 dB SPL at 1 kHz (A = C = 0 dB at 1 kHz, IEC 61672-1:2013 Table 3).
	if la := lines[1]["LAeq"].(float64); math.Abs(la-94) > 0.02 {
		t.Errorf("LAeq = %v, want 94.00", la)
	}
	// The 1 kHz band holds the tone (band edges 891 and 1122 Hz, IEC 61260-1:2014 Eq. 4–5).
	bands := lines[1]["third_octave_LZeq"].(map[string]any)
	if v := bands["1000"].(float64); math.Abs(v-94) > 0.1 {
		t.Errorf("1000 Hz band = %v, want 94", v)
	}
	if _, ok := bands["20000"]; !ok {
		t.Error("the 20 kHz band should exist at 48 kHz (IEC 61260-1 band edge 22.4 kHz < 0.47 fs)")
	}
	sum := lines[3]
	if sum["summary"] != true {
		t.Fatalf("last line is not the summary: %v", sum)
	}
	for _, k := range []string{"duration_s", "LAeq", "LCeq", "LZeq", "LAE", "LAFmax", "LASmax", "LAImax", "LCpeak", "LAF1", "LAF5", "LAF10", "LAF50", "LAF90", "LAF95", "LAF99", "third_octave_LZeq"} {
		if _, ok := sum[k]; !ok {
			t.Errorf("summary lacks %q", k)
		}
	}
	// LAE = LAeq,T + 10 lg(T / 1 s) (ISO 1996-1:2016 3.1.8).
	if lae, leq := sum["LAE"].(float64), sum["LAeq"].(float64); math.Abs(lae-(leq+10*math.Log10(2.5))) > 0.011 {
		t.Errorf("LAE %v vs LAeq %v over 2.5 s", lae, leq)
	}

	// Channel 2 is digital silence: its levels are null.
	code, out, _ = runCmd(t, nil, "analyze", "--format", "jsonl", "--channel", "2", "--bands", "octave", path)
	if code != 0 {
		t.Fatal(out)
	}
	lines = jsonLines(t, out)
	if lines[0]["LAeq"] != nil || lines[0]["octave_LZeq"].(map[string]any)["1000"] != nil {
		t.Errorf("silence should read null: %v", lines[0])
	}
}

func TestAnalyzeIntervals(t *testing.T) {
	// Interval k starts at sample round(k·D·fs) (decisions: intervals that are not a whole
	// number of samples); at 44.1 kHz a 125 ms interval is 5512.5 samples.
	dir := t.TempDir()
	const fs = 44100
	path := writeWAV(t, dir, "t.wav", wav.Format{SampleRate: fs, Channels: 1, Encoding: wav.Float32}, sineSamples(fs, 500, 0.1, fs))
	code, out, errs := runCmd(t, nil, "analyze", "--format", "jsonl", "--interval", "125ms", "--bands", "none", path)
	if code != 0 {
		t.Fatal(errs)
	}
	lines := jsonLines(t, out)
	if len(lines) != 9 {
		t.Fatalf("%d lines, want 8 intervals + summary", len(lines))
	}
	var total float64
	for k, l := range lines[:8] {
		want := (math.Round(float64(k+1)*0.125*fs) - math.Round(float64(k)*0.125*fs)) / fs
		if d := l["duration_s"].(float64); math.Abs(d-want) > 1e-12 {
			t.Errorf("interval %d duration %v, want %v", k, d, want)
		}
		total += l["duration_s"].(float64)
		if _, ok := l["third_octave_LZeq"]; ok {
			t.Error("--bands none still reports bands")
		}
	}
	if math.Abs(total-1) > 1e-9 {
		t.Errorf("intervals add up to %v s, want 1", total)
	}
}

func TestAnalyzeFormats(t *testing.T) {
	dir := t.TempDir()
	path := writeWAV(t, dir, "t.wav", wav.Format{SampleRate: 16000, Channels: 1, Encoding: wav.PCM16}, sineSamples(32000, 250, 0.3, 16000))
	code, out, errs := runCmd(t, nil, "analyze", "--format", "csv", path)
	if code != 0 {
		t.Fatal(errs)
	}
	rows := strings.Split(strings.TrimSpace(out), "\n")
	if len(rows) != 4 || !strings.HasPrefix(rows[0], "kind,offset_s,duration_s,LAeq,") || !strings.HasPrefix(rows[3], "summary,") {
		t.Errorf("csv output:\n%s", out)
	}
	if n := strings.Count(rows[0], ","); n != strings.Count(rows[3], ",") || n != strings.Count(rows[1], ",") {
		t.Errorf("csv rows have different column counts")
	}
	code, out, _ = runCmd(t, nil, "analyze", "--format", "table", path)
	if code != 0 || !strings.Contains(out, "summary over 2.000 s") || !strings.Contains(out, "LAF90") {
		t.Errorf("table output:\n%s", out)
	}
	// Standard input.
	data, _ := os.ReadFile(path)
	code, out, _ = runCmd(t, data, "analyze", "--format", "jsonl", "-")
	if code != 0 || len(jsonLines(t, out)) != 3 {
		t.Errorf("stdin: exit %d:\n%s", code, out)
	}
}

func TestAnalyzeBadInput(t *testing.T) {
	dir := t.TempDir()
	good := writeWAV(t, dir, "good.wav", wav.Format{SampleRate: 48000, Channels: 1, Encoding: wav.Float32}, sineSamples(48000*2, 1000, 0.1, 48000))
	// The bad recordings are the shared ones of testdata/wav (made by sox; see its gen.sh).
	// nan-sample.wav holds a NaN at 1.375 s: the reader fails late, after an interval was measured.
	bad := func(name string) []string { return []string{sharedTestdata("wav", name)} }
	tests := []struct {
		name string
		args []string
		want string // in the error line
	}{
		{"missing file", []string{filepath.Join(dir, "nope.wav")}, "nope.wav"},
		{"empty file", bad("empty.wav"), "empty.wav"},
		{"truncated header", bad("truncated-header.wav"), "truncated-header.wav"},
		{"not a WAV", bad("not-a-wav.wav"), "not-a-wav.wav"},
		{"zero samples", bad("header-only.wav"), "header-only.wav"},
		{"data shorter than declared", bad("short-data.wav"), "short-data.wav"},
		{"8-bit", bad("eight-bit.wav"), "eight-bit.wav"},
		{"mu-law", bad("mu-law.wav"), "mu-law.wav"},
		{"A-law", bad("a-law.wav"), "a-law.wav"},
		{"NaN sample", bad("nan-sample.wav"), "nan-sample.wav"},
		{"infinite sample", bad("inf-sample.wav"), "inf-sample.wav"},
		{"bad channel", []string{"--channel", "3", good}, "channel 3"},
		{"bad format", []string{"--format", "xml", good}, "--format"},
		{"bad interval", []string{"--interval", "-1s", good}, "--interval"},
		{"bad bands", []string{"--bands", "all", good}, "--bands"},
		{"bad start", []string{"--start", "yesterday", good}, "--start"},
		{"no file", nil, "FILE"},
	}
	for _, tc := range tests {
		code, out, errs := runCmd(t, nil, append([]string{"analyze", "--format", "jsonl"}, tc.args...)...)
		if code != 2 {
			t.Errorf("%s: exit %d, want 2", tc.name, code)
		}
		if out != "" {
			t.Errorf("%s: stdout not empty: %q", tc.name, out)
		}
		if strings.Count(strings.TrimSpace(errs), "\n") != 0 || !strings.Contains(errs, tc.want) {
			t.Errorf("%s: stderr %q, want one line naming %q", tc.name, errs, tc.want)
		}
	}
}
