package main

import (
	"fmt"
	"math"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/node/lib/wav"
	"github.com/leqnode/leqnode/node/testrig"
)

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
