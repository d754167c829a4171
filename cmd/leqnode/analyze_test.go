package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/node/testrig"
	"github.com/leqnode/leqnode/node/wav"
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

// TestAnalyzeStartUp: no level reports the filters' start-up from rest (issue 13, finding 6:
// steady 85.7 dB read LAFmin 44.70 and LASmin 35.67 in the first interval, and a band -797.41
// with --interval 10ms). The rule: a minimum counts only from five time constants after the first
// sample, where an exponential detector started from rest reads within 10 lg(1 - e^-5) = -0.03 dB
// of a steady level (IEC 61672-1:2013 3.10, the exponential time weighting), and is null for an
// interval wholly before that; band levels count only after the band filter has settled. The
// signal is a steady 1 kHz sine of 85.7 dB (AES17: peak 10^((85.7 - 94 - 26)/20) at -26 dBFS
// for 94 dB; A = C = 0 dB at 1 kHz, IEC 61672-1:2013 Table 3), so every settled level is 85.7.
func TestAnalyzeStartUp(t *testing.T) {
	const fs, level = 16000, 85.7
	x := sineSamples(7*fs, 1000, math.Pow(10, (level-94-26)/20), fs)
	path := writeWAV(t, t.TempDir(), "steady.wav", wav.Format{SampleRate: fs, Channels: 1, Encoding: wav.Float32}, x)
	code, out, errs := runCmd(t, nil, "analyze", "--format", "jsonl", path)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	lines := jsonLines(t, out)
	if len(lines) != 8 {
		t.Fatalf("%d lines, want 7 intervals and a summary", len(lines))
	}
	for i, l := range lines {
		what := fmt.Sprintf("interval %d", i)
		if i == 7 {
			what = "summary"
		}
		if v, ok := l["LAFmin"].(float64); !ok || v < level-0.03 {
			t.Errorf("%s: LAFmin %v, want at least %.2f (Fast settles in 0.625 s)", what, l["LAFmin"], level-0.03)
		}
		// Slow settles after 5 s: null in the first five one-second intervals.
		if v, ok := l["LASmin"].(float64); i < 5 && l["LASmin"] != nil || i >= 5 && (!ok || v < level-0.03) {
			t.Errorf("%s: LASmin %v, want null before 5 s and at least %.2f after", what, l["LASmin"], level-0.03)
		}
		if v := l["LAeq"].(float64); math.Abs(v-level) > 0.02 {
			t.Errorf("%s: LAeq %.3f, want %.1f", what, v, level)
		}
	}
	// Percentiles too count only the settled Fast level: every one reads the steady 85.7 (bins
	// of 0.1 dB centred on the grid).
	for _, k := range []string{"LAF1", "LAF10", "LAF50", "LAF90", "LAF95", "LAF99"} {
		if v, ok := lines[7][k].(float64); !ok || math.Abs(v-level) > 1e-9 {
			t.Errorf("summary %s = %v, want %.1f", k, lines[7][k], level)
		}
	}
	// The summary carries the same level keys as the CSV summary.
	for _, k := range []string{"LAeq", "LCeq", "LZeq", "LAFmax", "LAFmin", "LASmax", "LASmin", "LAImax", "LCpeak", "LZpeak", "LAE", "LAF1", "LAF5", "LAF10", "LAF50", "LAF90", "LAF95", "LAF99"} {
		if _, ok := lines[7][k]; !ok {
			t.Errorf("jsonl summary lacks %q", k)
		}
	}

	// 10 ms intervals: the 12.5 Hz band filter needs far longer than 10 ms to settle (its
	// response time alone is 1/bandwidth = 1/2.9 Hz = 0.34 s, common practice), so its first
	// interval is null; the 1 kHz band, once it reports, reads the tone; no band reads the
	// start-up's near-zero output (the finding's -797.41 dB). Float samples carry rounding noise
	// 24 bits below the tone, which the far bands read near -180 dB: above -250.
	code, out, errs = runCmd(t, nil, "analyze", "--format", "jsonl", "--interval", "10ms", path)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	lines = jsonLines(t, out)
	first := lines[0]["third_octave_LZeq"].(map[string]any)
	if first["12.5"] != nil {
		t.Errorf("first 10 ms interval: 12.5 Hz band %v, want null", first["12.5"])
	}
	for i, l := range lines[:len(lines)-1] {
		bands := l["third_octave_LZeq"].(map[string]any)
		for name, v := range bands {
			if f, ok := v.(float64); ok && f < -250 {
				t.Errorf("interval %d: band %s reads %.2f dB", i, name, f)
			}
		}
		if v, ok := bands["1000"].(float64); ok && math.Abs(v-level) > 0.2 {
			t.Errorf("interval %d: 1000 Hz band %.2f, want %.1f", i, v, level)
		}
	}
	// The CSV summary has the same columns as the jsonl summary's keys.
	_, csvOut, _ := runCmd(t, nil, "analyze", "--format", "csv", "--bands", "none", path)
	header := strings.Split(strings.SplitN(csvOut, "\n", 2)[0], ",")
	for _, k := range header[3:] {
		if _, ok := lines[len(lines)-1][k]; !ok {
			t.Errorf("CSV column %q missing from the jsonl summary", k)
		}
	}
}

// TestAnalyzeBatch: several files and a directory at once, on two workers, give each recording
// exactly the lines that analysing it alone gives (plus its path), in the order of the inputs;
// a bad recording gets its one-line error and the others are still measured.
func TestAnalyzeBatch(t *testing.T) {
	dir := t.TempDir()
	sub := filepath.Join(dir, "station")
	if err := os.MkdirAll(sub, 0o755); err != nil {
		t.Fatal(err)
	}
	f48 := wav.Format{SampleRate: 48000, Channels: 1, Encoding: wav.PCM16}
	f16 := wav.Format{SampleRate: 16000, Channels: 1, Encoding: wav.PCM16}
	files := []string{
		writeWAV(t, dir, "first.wav", f48, sineSamples(48000*3/2, 500, 0.05, 48000)),
		writeWAV(t, sub, "b.wav", f16, sineSamples(16000*2, 2000, 0.2, 16000)),
		writeWAV(t, sub, "a.wav", f48, sineSamples(48000, 100, 0.3, 48000)),
		writeWAV(t, dir, "last.wav", f48, sineSamples(48000/2, 8000, 0.1, 48000)),
	}
	order := []string{files[0], files[2], files[1], files[3]} // the directory in lexical order
	code, out, errs := runCmd(t, nil, "analyze", "-j", "2", "--format", "jsonl", files[0], sub, files[3])
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	lines := jsonLines(t, out)
	k := 0
	for _, f := range order {
		_, alone, _ := runCmd(t, nil, "analyze", "-j", "1", "--format", "jsonl", f)
		for _, want := range jsonLines(t, alone) {
			if k >= len(lines) {
				t.Fatalf("batch output ends early, at %s", f)
			}
			got := lines[k]
			k++
			if got["file"] != f {
				t.Fatalf("line %d is of %v, want %s", k, got["file"], f)
			}
			delete(got, "file")
			if g, w := fmt.Sprint(got), fmt.Sprint(want); g != w {
				t.Errorf("%s: batch line\n%s\nwant (alone)\n%s", f, g, w)
			}
		}
	}
	if k != len(lines) {
		t.Errorf("%d lines, want %d", len(lines), k)
	}

	// --summary: one line per recording; csv: a new header only where the columns change.
	_, out, _ = runCmd(t, nil, "analyze", "--summary", "--format", "jsonl", dir)
	if n := len(jsonLines(t, out)); n != 4 {
		t.Errorf("--summary gave %d lines, want 4", n)
	}
	_, out, _ = runCmd(t, nil, "analyze", "--summary", "--format", "csv", files[0], files[2], files[1], files[3])
	rows := strings.Split(strings.TrimSpace(out), "\n")
	if len(rows) != 4+3 || !strings.HasPrefix(rows[0], "file,kind,") || !strings.HasPrefix(rows[3], "file,kind,") || !strings.HasPrefix(rows[5], "file,kind,") {
		t.Errorf("csv summaries: want a header, two 48 kHz rows, a header, the 16 kHz row, a header, a 48 kHz row:\n%s", out)
	}

	// A bad recording in the middle: its error on one line, the others measured, exit 2.
	bad := sharedTestdata("wav", "not-a-wav.wav")
	code, out, errs = runCmd(t, nil, "analyze", "--summary", "-j", "2", "--format", "jsonl", files[0], bad, files[3])
	if code != 2 || len(jsonLines(t, out)) != 2 || !strings.Contains(errs, "not-a-wav.wav") || !strings.Contains(errs, "1 of 3 recordings") {
		t.Errorf("with a bad recording: exit %d, %d lines, stderr %q", code, len(jsonLines(t, out)), errs)
	}
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"-", files[0]}, "standard input"},
		{[]string{"--start", "2026-05-04T07:00:00Z", files[0], files[3]}, "--start"},
		{[]string{"-j", "0", files[0]}, "-j 0"},
		{[]string{filepath.Join(dir, "nope"), files[0]}, "nope: cannot open"},
	} {
		code, out, errs := runCmd(t, nil, append([]string{"analyze"}, tc.args...)...)
		if code != 2 || out != "" || !strings.Contains(errs, tc.want) {
			t.Errorf("%v: exit %d, stdout %q, stderr %q, want exit 2 naming %q", tc.args, code, out, errs, tc.want)
		}
	}
}

// TestTruncatedRecording: a WAV file whose data chunk ends before the size its header declares
// (a copy cut short at a whole frame: a 10 s header with 5.67 s of data) is refused with exit 2
// and one line naming the file and the fix, by analyze and by calibrate. The RIFF specification
// (Multimedia Programming Interface and Data Specifications 1.0) makes the chunk size the size
// of its data, so the rest of the recording is missing.
func TestTruncatedRecording(t *testing.T) {
	dir := t.TempDir()
	const fs = 16000
	full := writeWAV(t, dir, "full.wav", wav.Format{SampleRate: fs, Channels: 1, Encoding: wav.PCM16}, sineSamples(10*fs, 1000, 0.1, fs))
	data, err := os.ReadFile(full)
	if err != nil {
		t.Fatal(err)
	}
	start := bytes.Index(data, []byte("data")) + 8 // the first sample byte
	cut := filepath.Join(dir, "cut.wav")
	if err := os.WriteFile(cut, data[:start+2*int(5.67*fs)], 0o644); err != nil {
		t.Fatal(err)
	}
	for _, args := range [][]string{{"analyze", "--format", "jsonl", cut}, {"calibrate", "--format", "json", "--sensitivity", "-26", cut}} {
		code, out, errs := runCmd(t, nil, args...)
		if code != 2 {
			t.Errorf("%s: exit %d, want 2 (stderr %q)", args[0], code, errs)
		}
		if args[0] == "analyze" && out != "" {
			t.Errorf("%s: stdout not empty: %q", args[0], out)
		}
		if strings.Count(strings.TrimSpace(errs), "\n") != 0 || !strings.Contains(errs, "cut.wav") ||
			!strings.Contains(errs, "5.67 s of 10.00 s") || !strings.Contains(errs, "sox --ignore-length") {
			t.Errorf("%s: stderr %q, want one line naming cut.wav, 5.67 s of 10.00 s and the fix", args[0], errs)
		}
	}
}

// soxRMS returns the RMS level in dB (re full-scale amplitude 1.0) of channel 1 of a file, as
// reported by `sox FILE -n remix 1 stats`.
func soxRMS(t *testing.T, path string) float64 {
	t.Helper()
	out, err := exec.Command("sox", path, "-n", "remix", "1", "stats").CombinedOutput()
	if err != nil {
		t.Fatalf("sox stats %s: %v\n%s", path, err, out)
	}
	m := regexp.MustCompile(`RMS lev dB\s+(-?[0-9.]+)`).FindSubmatch(out)
	if m == nil {
		t.Fatalf("no RMS level in sox output:\n%s", out)
	}
	v, err := strconv.ParseFloat(string(m[1]), 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

func TestAnalyzeAgainstSox(t *testing.T) {
	// Real recordings no one here made: the sound files of Debian's alsa-utils package. sox
	// (Debian package sox) gives their RMS level re full-scale amplitude; per AES17 a full-scale
	// sine is 0 dBFS, i.e. RMS level + 3.01 dB, and with sensitivity S the SPL is
	// dBFS - S + 94 (MEMS data-sheet definition). The summary LZeq must agree within 0.05 dB.
	testrig.Need(t, "sox", "sox")
	files, _ := filepath.Glob("/usr/share/sounds/alsa/*.wav")
	if len(files) == 0 {
		testrig.Missing(t, "no recordings under /usr/share/sounds/alsa: install the Debian package alsa-utils (make test-deps does)")
	}
	const sens = -30.0
	for _, f := range files {
		code, out, errs := runCmd(t, nil, "analyze", "--format", "jsonl", "--bands", "none", "--sensitivity", "-30", f)
		if code != 0 {
			t.Fatalf("%s: %s", f, errs)
		}
		lines := jsonLines(t, out)
		got := lines[len(lines)-1]["LZeq"].(float64)
		want := soxRMS(t, f) + 10*math.Log10(2) - sens + 94
		if math.Abs(got-want) > 0.05 {
			t.Errorf("%s: LZeq %.3f dB, sox says %.3f dB", filepath.Base(f), got, want)
		} else {
			t.Logf("%s: LZeq %.3f dB, sox %.3f dB", filepath.Base(f), got, want)
		}
	}
}
