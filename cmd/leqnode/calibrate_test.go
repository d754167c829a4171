package main

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"sort"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/node/lib/wav"
)

// calibratorRecording returns a 16-bit recording of 1 s of background, a 2 s fade-in, hold
// seconds of a steady tone of toneDBFS (AES17: peak 10^(L/20)) and 1 s of background; the
// background is white noise 30 dB below the tone.
func calibratorRecording(fs int, freq, toneDBFS, hold float64) []float32 {
	n := int((4 + hold) * float64(fs))
	x := make([]float32, n)
	amp := math.Pow(10, toneDBFS/20)
	rng := rand.New(rand.NewPCG(42, 1))
	for i := range x {
		t := float64(i) / float64(fs)
		g := 0.0
		switch {
		case t < 1:
		case t < 3:
			g = (t - 1) / 2
		case t < 3+hold:
			g = 1
		}
		x[i] = float32(g*amp*math.Sin(2*math.Pi*freq*t) + amp/math.Sqrt2*0.0316*rng.NormFloat64())
	}
	return x
}

// TestCalibrateJSONContract: the JSON form is a contract other tools rely on: exactly the keys
// frequency_hz, measured_dBFS, sensitivity_dBFS, stable_s, ok, reason (why ok is what it is)
// and, when a nominal sensitivity is known, nominal_dBFS. A 114 dB calibrator on a
// microphone of sensitivity -31 dBFS produces a tone of 114 - 94 - 31 = -11 dBFS (SPL = dBFS -
// S + 94, the MEMS data-sheet definition, Analog Devices AN-1112).
func TestCalibrateJSONContract(t *testing.T) {
	t.Setenv("LEQNODE_CONFIG", "none")
	dir := t.TempDir()
	path := writeWAV(t, dir, "cal.wav", wav.Format{SampleRate: 48000, Channels: 1, Encoding: wav.PCM16}, calibratorRecording(48000, 1000, -11, 7))
	code, out, errs := runCmd(t, nil, "calibrate", "--reference", "114", "--sensitivity", "-30", "--format", "json", path)
	if code != 0 {
		t.Fatalf("exit %d, stderr %q", code, errs)
	}
	var m map[string]any
	if err := json.Unmarshal([]byte(out), &m); err != nil {
		t.Fatalf("output %q: %v", out, err)
	}
	var keys []string
	for k := range m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	want := []string{"frequency_hz", "measured_dBFS", "nominal_dBFS", "ok", "reason", "sensitivity_dBFS", "stable_s"}
	if !reflect.DeepEqual(keys, want) {
		t.Errorf("keys %v, want %v", keys, want)
	}
	num := func(k string) float64 { v, _ := m[k].(float64); return v }
	if math.Abs(num("sensitivity_dBFS")+31) > 0.1 || math.Abs(num("measured_dBFS")+11) > 0.1 {
		t.Errorf("sensitivity %v, measured %v; want -31 and -11 within 0.1 dB", m["sensitivity_dBFS"], m["measured_dBFS"])
	}
	if math.Abs(num("frequency_hz")-1000) > 0.1 || num("stable_s") < 5 || m["ok"] != true {
		t.Errorf("output %s", out)
	}
	// The same recording from standard input, as a table.
	data, _ := os.ReadFile(path)
	code, out, _ = runCmd(t, data, "calibrate", "--reference", "114", "--format", "table", "-")
	if code != 0 || !strings.Contains(out, "sensitivity") || !strings.Contains(out, "-31.0") {
		t.Errorf("table from stdin: exit %d\n%s", code, out)
	}
}

func TestCalibrateErrors(t *testing.T) {
	t.Setenv("LEQNODE_CONFIG", "none")
	dir := t.TempDir()
	f := wav.Format{SampleRate: 16000, Channels: 1, Encoding: wav.PCM16}
	tone250 := writeWAV(t, dir, "tone250.wav", f, calibratorRecording(16000, 250, -20, 7))
	cal := writeWAV(t, dir, "cal.wav", f, calibratorRecording(16000, 1000, -20, 7))     // S = -20 at 94 dB
	offFreq := writeWAV(t, dir, "off.wav", f, calibratorRecording(16000, 1013, -20, 7)) // 1.3 % off
	clipped := calibratorRecording(16000, 1000, 2, 7)                                   // +2 dBFS: 114 dB on a -18 dBFS microphone
	for i, v := range clipped {
		clipped[i] = max(-1, min(1, v))
	}
	clip := writeWAV(t, dir, "clip.wav", f, clipped)
	junk := sharedTestdata("wav", "not-a-wav.wav")
	for _, tc := range []struct {
		name     string
		args     []string
		code     int
		stderr   string // substring of the one-line error
		okInJSON any    // nil: no JSON expected
	}{
		{"no tone", []string{"--format", "json", tone250}, 2, "no calibrator tone found in 11.0 s of audio: found a steady tone at 250.0 Hz", false},
		{"microphone fault", []string{"--format", "json", "--sensitivity", "-26", cal}, 1, "microphone fault", false},
		{"frequency off for class 1", []string{"--format", "json", offFreq}, 1, "class 1 calibrator", false},
		{"frequency fine for class 2", []string{"--format", "json", "--class", "2", offFreq}, 0, "", true},
		{"within a wider range", []string{"--format", "json", "--sensitivity", "-26", "--range", "7", cal}, 0, "", true},
		{"clipped tone", []string{"--format", "json", "--reference", "114", clip}, 1, "clipped", false},
		{"missing file", []string{filepath.Join(dir, "nope.wav")}, 2, "cannot open", nil},
		{"not a WAV file", []string{junk}, 2, "not-a-wav.wav", nil},
		{"8-bit recording", []string{sharedTestdata("wav", "eight-bit.wav")}, 2, "eight-bit.wav", nil},
		{"NaN sample", []string{sharedTestdata("wav", "nan-sample.wav")}, 2, "nan-sample.wav", nil},
		{"two files", []string{cal, cal}, 2, "at most one", nil},
		{"bad format", []string{"--format", "csv", cal}, 2, "--format", nil},
		{"bad reference", []string{"--reference", "12", cal}, 2, "--reference", nil},
		{"bad sensitivity", []string{"--sensitivity", "5", cal}, 2, "--sensitivity", nil},
		{"bad class", []string{"--class", "3", cal}, 2, "--class", nil},
		{"no daemon", []string{"--format", "json"}, 1, "control socket is not available", nil},
	} {
		code, out, errs := runCmd(t, nil, append([]string{"calibrate"}, tc.args...)...)
		if code != tc.code {
			t.Errorf("%s: exit %d, want %d (stderr %q)", tc.name, code, tc.code, errs)
		}
		if tc.stderr != "" && (!strings.Contains(errs, tc.stderr) || strings.Count(strings.TrimSpace(errs), "\n") != 0) {
			t.Errorf("%s: stderr %q, want one line with %q", tc.name, errs, tc.stderr)
		}
		if tc.okInJSON != nil {
			var m map[string]any
			if err := json.Unmarshal([]byte(out), &m); err != nil || m["ok"] != tc.okInJSON {
				t.Errorf("%s: JSON %q, want ok %v", tc.name, out, tc.okInJSON)
			}
			if _, has := m["frequency_hz"]; !has {
				t.Errorf("%s: JSON without frequency_hz: %q", tc.name, out)
			}
			if r, _ := m["reason"].(string); r == "" || (tc.stderr != "" && !strings.Contains(errs, r)) {
				t.Errorf("%s: JSON reason %q, want the reason given on stderr %q", tc.name, m["reason"], errs)
			}
		}
	}
}

// TestCalibrateLevelSwitch: the most common field mistake, a calibrator on its 114 dB setting
// checked as 94 dB, is caught. A 114 dB tone on a microphone of -26 dBFS reads 114 - 94 - 26 =
// -6 dBFS (SPL = dBFS - S + 94, "Understanding Microphone Sensitivity", Analog Dialogue), which
// with --reference 94 implies -6 dBFS: outside the range microphones have without a nominal,
// 20 dB from the nominal with one (given, configured, or the installed node's).
func TestCalibrateLevelSwitch(t *testing.T) {
	t.Setenv("LEQNODE_CONFIG", "none")
	dir := t.TempDir()
	f := wav.Format{SampleRate: 48000, Channels: 1, Encoding: wav.PCM16}
	loud := writeWAV(t, dir, "loud.wav", f, calibratorRecording(48000, 1000, -6, 7))
	cfg := filepath.Join(dir, "node.toml")
	os.WriteFile(cfg, []byte("version = 1\n[node]\nid = \"quay-7\"\n[capture]\nkind = \"synthetic\"\n[microphone]\nsensitivity_dbfs = -26\n"), 0o644)
	for _, tc := range []struct {
		name    string
		env     string
		args    []string
		reasons []string
	}{
		{"no nominal", "none", nil, []string{"outside the range microphones have (-60 to -15 dBFS", "fits a 114 dB calibrator", "--reference 114"}},
		{"data sheet", "none", []string{"--sensitivity", "-26"}, []string{"+20.00 dB from the nominal -26.00 dBFS (--sensitivity)", "--reference 114"}},
		{"configuration", "none", []string{"--config", cfg}, []string{"from the nominal -26.00 dBFS (microphone.sensitivity_dbfs of " + cfg, "--reference 114"}},
		{"installed node", cfg, nil, []string{"from the nominal -26.00 dBFS (microphone.sensitivity_dbfs of " + cfg, "--reference 114"}},
	} {
		t.Setenv("LEQNODE_CONFIG", tc.env)
		code, out, errs := runCmd(t, nil, append(append([]string{"calibrate", "--reference", "94", "--format", "json"}, tc.args...), loud)...)
		var m map[string]any
		if err := json.Unmarshal([]byte(out), &m); err != nil {
			t.Fatalf("%s: output %q: %v", tc.name, out, err)
		}
		if code != 1 || m["ok"] != false {
			t.Errorf("%s: exit %d, ok %v; want 1 and false (stderr %q)", tc.name, code, m["ok"], errs)
		}
		for _, r := range tc.reasons {
			if s, _ := m["reason"].(string); !strings.Contains(s, r) {
				t.Errorf("%s: reason %q lacks %q", tc.name, s, r)
			}
		}
		// Given the right level, the same recording passes.
		code, out, errs = runCmd(t, nil, append(append([]string{"calibrate", "--reference", "114", "--format", "json"}, tc.args...), loud)...)
		if code != 0 || !strings.Contains(out, `"ok":true`) {
			t.Errorf("%s with --reference 114: exit %d, %s %s", tc.name, code, out, errs)
		}
	}
}

// TestCalibrateSaysWhatItFound: a recording without a calibrator tone gets a reason that says
// what it held instead, from the test signal's construction: a 1 kHz tone with white noise
// 3 dB below it (its band well under 20 dB above the top band, which holds about a fifth of
// the noise), a 1 kHz tone whose level swings by 2 dB, and a tone held for 2 s.
func TestCalibrateSaysWhatItFound(t *testing.T) {
	t.Setenv("LEQNODE_CONFIG", "none")
	dir := t.TempDir()
	f := wav.Format{SampleRate: 48000, Channels: 1, Encoding: wav.PCM16}
	noisy := make([]float32, 10*48000)
	drifting := make([]float32, 10*48000)
	rng := rand.New(rand.NewPCG(7, 7))
	amp := math.Pow(10, -12.0/20)
	for i := range noisy {
		ti := float64(i) / 48000
		s := math.Sin(2 * math.Pi * 1000 * ti)
		noisy[i] = float32(amp*s + amp/math.Sqrt2*math.Pow(10, -3.0/20)*rng.NormFloat64())
		drifting[i] = float32(amp * math.Pow(10, (1*math.Sin(2*math.Pi*0.25*ti))/20) * s)
	}
	for _, tc := range []struct {
		name string
		x    []float32
		want string
	}{
		{"noisy", noisy, "dB above the background in the other bands, where a calibrator needs 20 dB"},
		{"drifting", drifting, "its level drifted"},
		{"short", calibratorRecording(48000, 1000, -12, 2), "held for only"},
	} {
		path := writeWAV(t, dir, tc.name+".wav", f, tc.x)
		code, out, errs := runCmd(t, nil, "calibrate", "--format", "json", path)
		if code != 2 || !strings.Contains(errs, tc.want) || !strings.Contains(out, tc.want) {
			t.Errorf("%s: exit %d, stderr %q, JSON %q; want exit 2 and %q", tc.name, code, errs, out, tc.want)
		}
	}
}
