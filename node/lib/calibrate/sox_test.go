package calibrate

import (
	"context"
	"math"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"

	"github.com/leqnode/leqnode/node/testrig"
)

// TestSoxRecordings checks the file form against recordings made by sox (Debian package sox,
// the reference tool): `synth sine 1000 vol A` writes a sine of peak A, which is 20 lg A dBFS
// (AES17), with a 2 s fade-in and a pink-noise background mixed 30 dB below. The sensitivity
// must come back within 0.1 dB; sox's pink noise alone is not a calibrator.
func TestSoxRecordings(t *testing.T) {
	sox := testrig.Need(t, "sox", "sox")
	dir := t.TempDir()
	run := func(args ...string) {
		t.Helper()
		if out, err := exec.Command(sox, args...).CombinedOutput(); err != nil {
			t.Fatalf("sox %v: %v\n%s", args, err, out)
		}
	}
	for _, tc := range []struct {
		name      string
		ref, sens float64
	}{
		{"94 dB, S = -26", 94, -26},
		{"114 dB, S = -38", 114, -38},
	} {
		tone := tc.ref - 94 + tc.sens // dBFS of the calibrator's sine (AN-1112 definition)
		peak := math.Pow(10, tone/20)
		// Pink noise of RMS 30 dB below the tone's RMS: sox's pinknoise at vol 1 has an RMS of
		// 0.225 (`sox FILE -n stats`: "RMS lev dB -12.95", re 1.0), so scale by 1/0.225.
		toneF := filepath.Join(dir, "tone.wav")
		noiseF := filepath.Join(dir, "noise.wav")
		mixF := filepath.Join(dir, "mix.wav")
		run("-n", "-r", "48000", "-b", "32", "-e", "floating-point", toneF, "synth", "10", "sine", "1000", "vol", ftoa(peak), "fade", "t", "2", "10", "0", "pad", "1", "1")
		run("-n", "-r", "48000", "-b", "32", "-e", "floating-point", noiseF, "synth", "12", "pinknoise", "vol", ftoa(peak/math.Sqrt2*math.Pow(10, -30.0/20)/0.225))
		run("-m", "-v", "1", toneF, "-v", "1", noiseF, "-b", "16", mixF)
		res, err := FromFile(context.Background(), mixF, Options{Reference: tc.ref})
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		t.Logf("%s: sensitivity %.4f dBFS, %.4f Hz, stable %.2f s", tc.name, res.SensitivityDBFS, res.Detection.FrequencyHz, res.Detection.Stable)
		if math.Abs(res.SensitivityDBFS-tc.sens) > 0.1 || math.Abs(res.Detection.FrequencyHz-1000) > 0.1 {
			t.Errorf("%s: sensitivity %.3f dBFS, %.3f Hz; want %g within 0.1 dB, 1000 Hz within 0.1 Hz", tc.name, res.SensitivityDBFS, res.Detection.FrequencyHz, tc.sens)
		}
		if _, err := FromFile(context.Background(), noiseF, Options{}); err == nil {
			t.Errorf("%s: sox pink noise taken for a calibrator", tc.name)
		}
	}
}

func ftoa(v float64) string { return strconv.FormatFloat(v, 'f', 8, 64) }
