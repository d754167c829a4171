package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/node/lib/wav"
)

// benchSeconds is the length of the benchmark recordings: LEQNODE_BENCH_SECONDS, 300 in
// `make bench` (the figures in docs/performance.md), 10 by default so that `make test` runs the benchmarks
// quickly once.
func benchSeconds(b *testing.B) int {
	if s := os.Getenv("LEQNODE_BENCH_SECONDS"); s != "" {
		n, err := strconv.Atoi(s)
		if err != nil || n < 1 || n > 3600 {
			b.Fatalf("LEQNODE_BENCH_SECONDS=%q: use 1 to 3600", s)
		}
		return n
	}
	return 10
}

// benchRecording writes secs seconds of street-like noise at 48 kHz, 16-bit (pink-ish noise
// with a slow level swing, 55 to 75 dB at the default sensitivity) and returns its path.
func benchRecording(b *testing.B, dir, name string, secs int, seed uint64) string {
	b.Helper()
	const fs = 48000
	r := rand.New(rand.NewPCG(seed, 7))
	x := make([]float32, secs*fs)
	var p1, p2 float64
	for i := range x {
		w := r.NormFloat64()
		p1 = 0.99*p1 + 0.1*w // a low-frequency part
		p2 = 0.6*p2 + w
		swing := math.Pow(10, (10*math.Sin(2*math.Pi*float64(i)/(20*fs))-5)/20)
		x[i] = float32(0.01 * swing * (p1 + 0.3*p2))
	}
	return writeWAV(b, dir, name, wav.Format{SampleRate: fs, Channels: 1, Encoding: wav.PCM16}, x)
}

// leqnodeProcess runs this test binary as the leqnode command (see TestMain) and returns its
// standard output and the CPU time (user and system) it used.
func leqnodeProcess(b *testing.B, args ...string) ([]byte, time.Duration) {
	b.Helper()
	return runMeasured(b, childCmd(b, args...))
}

func runMeasured(b *testing.B, cmd *exec.Cmd) ([]byte, time.Duration) {
	b.Helper()
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	if err := cmd.Run(); err != nil {
		b.Fatalf("%s: %v\n%s", strings.Join(cmd.Args, " "), err, errb.String())
	}
	return out.Bytes(), cmd.ProcessState.UserTime() + cmd.ProcessState.SystemTime()
}

// scipyPython returns a python3 that has scipy (Debian's python3-scipy); without one the
// benchmark is skipped, except under CI=true, where it fails.
func scipyPython(b *testing.B) string {
	b.Helper()
	for _, py := range []string{"/usr/bin/python3", "python3"} {
		if exec.Command(py, "-c", "import scipy.signal, scipy.io.wavfile").Run() == nil {
			return py
		}
	}
	if os.Getenv("CI") == "true" {
		b.Fatal("python3 with scipy is missing: install the Debian package python3-scipy (make test-deps)")
	}
	b.Skip("python3 with scipy is missing: install python3-scipy")
	return ""
}

// scipyChain is the measurement chain as a researcher would write it with scipy, for the
// side-by-side benchmark: A and C weighting from the analogue poles of IEC 61672-1:2013
// (Annex E) by the bilinear transform, the Fast and Slow time weightings as one-pole filters of
// the squared signal, per-second LAeq, LCeq, LZeq, LAFmax, LAFmin and LASmax, and
// one-third-octave bands from 12.5 Hz to the highest whose upper edge lies below 0.47 fs, each
// a third-order Butterworth band-pass (scipy.signal.butter, second-order sections) run with
// sosfilt at the full rate. It prints the summary LAeq.
const scipyChain = `
import sys, json
import numpy as np
from scipy import signal
from scipy.io import wavfile

fs, x = wavfile.read(sys.argv[1])
x = x.astype(np.float64) / 32768.0
offset = 94.0 + 26.0  # dB SPL of 0 dBFS at a sensitivity of -26 dBFS (94 dB SPL)

def level(ms):
    return 10 * np.log10(2 * ms) + offset

def weighting(kind):
    f1, f2, f3, f4 = 20.598997, 107.65265, 737.86223, 12194.217
    w = lambda f: -2 * np.pi * f
    if kind == "A":
        z, p = [0, 0, 0, 0], [w(f4), w(f4), w(f1), w(f1), w(f2), w(f3)]
    else:
        z, p = [0, 0], [w(f4), w(f4), w(f1), w(f1)]
    zd, pd, kd = signal.bilinear_zpk(z, p, 1.0, fs)
    sos = signal.zpk2sos(zd, pd, kd)
    _, h = signal.sosfreqz(sos, worN=[1000.0], fs=fs)
    sos[0, :3] /= abs(h[0])
    return sos

a = signal.sosfilt(weighting("A"), x)
c = signal.sosfilt(weighting("C"), x)
a2 = a * a
kf, ks = np.exp(-1 / (fs * 0.125)), np.exp(-1 / (fs * 1.0))
fast = signal.lfilter([1 - kf], [1, -kf], a2)
slow = signal.lfilter([1 - ks], [1, -ks], a2)

G = 10 ** 0.3
bands = []
for k in range(-19, 30):
    fm = 1000 * G ** (k / 3)
    lo, hi = fm * G ** (-1 / 6), fm * G ** (1 / 6)
    if hi >= 0.47 * fs:
        break
    sos = signal.butter(3, [lo, hi], btype="bandpass", fs=fs, output="sos")
    bands.append(signal.sosfilt(sos, x))

n = len(x) // fs
for s in range(n):
    i, j = s * fs, (s + 1) * fs
    print(json.dumps({
        "LAeq": level(a2[i:j].mean()), "LCeq": level((c[i:j] ** 2).mean()), "LZeq": level((x[i:j] ** 2).mean()),
        "LAFmax": level(fast[i:j].max()), "LAFmin": level(fast[i:j].min()), "LASmax": level(slow[i:j].max()),
        "bands": [level((b[i:j] ** 2).mean()) for b in bands],
    }))
print(json.dumps({"summary": True, "LAeq": level(a2[: n * fs].mean())}))
`

// BenchmarkAnalyzeVsScipy measures, in one run on the same recording, the CPU time of
// `leqnode analyze` (one-third-octave bands, jsonl) and of the scipy chain above, and reports
// both and their ratio (the goal: at least 10 times less CPU for leqnode). It also reports how
// far the two summaries' LAeq lie apart (a cross-check of the chain against scipy: the two
// A-weighting filters differ above 8 kHz, where the plain bilinear transform makes scipy's fall
// off early: -1.2 dB at 10 kHz).
func BenchmarkAnalyzeVsScipy(b *testing.B) {
	py := scipyPython(b)
	secs := benchSeconds(b)
	dir := b.TempDir()
	path := benchRecording(b, dir, "street.wav", secs, 1)
	script := filepath.Join(dir, "chain.py")
	if err := os.WriteFile(script, []byte(scipyChain), 0o644); err != nil {
		b.Fatal(err)
	}
	var ours, theirs, ratios []float64
	var dLAeq float64
	b.ResetTimer()
	for range b.N {
		lq, lqCPU := leqnodeProcess(b, "analyze", "--format", "jsonl", "--bands", "third", "-j", "1", path)
		sp, spCPU := runMeasured(b, exec.Command(py, script, path))
		ours = append(ours, lqCPU.Seconds())
		theirs = append(theirs, spCPU.Seconds())
		ratios = append(ratios, spCPU.Seconds()/lqCPU.Seconds())
		dLAeq = math.Abs(summaryLAeq(b, lq) - summaryLAeq(b, sp))
	}
	b.ReportMetric(median(ours), "leqnode-cpu-s")
	b.ReportMetric(median(theirs), "scipy-cpu-s")
	b.ReportMetric(median(ratios), "x-less-cpu")
	b.ReportMetric(float64(secs)/median(ours), "x-realtime")
	b.ReportMetric(dLAeq, "LAeq-diff-dB")
}

// BenchmarkAnalyzeBatch measures the throughput of `leqnode analyze` over a directory of eight
// recordings with -j 1 and -j 2 in one run, and reports the recordings per second of each and
// the speed-up of two workers over one (wall-clock time), and the CPU time of each run, which
// should be the same: on a machine whose cores are busy with other work the wall-clock figures
// say more about that work than about leqnode.
func BenchmarkAnalyzeBatch(b *testing.B) {
	secs := max(1, benchSeconds(b)/4)
	dir := b.TempDir()
	for i := range 8 {
		benchRecording(b, dir, fmt.Sprintf("node-%d.wav", i), secs, uint64(i+1))
	}
	var one, two, ratio, cpu1, cpu2 []float64
	b.ResetTimer()
	for range b.N {
		t0 := time.Now()
		out1, c1 := leqnodeProcess(b, "analyze", "--summary", "--format", "jsonl", "-j", "1", dir)
		t1 := time.Now()
		out2, c2 := leqnodeProcess(b, "analyze", "--summary", "--format", "jsonl", "-j", "2", dir)
		t2 := time.Now()
		cpu1 = append(cpu1, c1.Seconds())
		cpu2 = append(cpu2, c2.Seconds())
		if !bytes.Equal(out1, out2) {
			b.Fatal("-j 1 and -j 2 disagree")
		}
		one = append(one, 8/t1.Sub(t0).Seconds())
		two = append(two, 8/t2.Sub(t1).Seconds())
		ratio = append(ratio, t1.Sub(t0).Seconds()/t2.Sub(t1).Seconds())
	}
	b.ReportMetric(median(one), "files/s-j1")
	b.ReportMetric(median(two), "files/s-j2")
	b.ReportMetric(median(ratio), "x-j2-over-j1")
	b.ReportMetric(median(cpu1), "cpu-s-j1")
	b.ReportMetric(median(cpu2), "cpu-s-j2")
}

// summaryLAeq returns the LAeq of the summary line of jsonl output.
func summaryLAeq(b *testing.B, out []byte) float64 {
	b.Helper()
	sc := bufio.NewScanner(bytes.NewReader(out))
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	for sc.Scan() {
		var m map[string]any
		if json.Unmarshal(sc.Bytes(), &m) == nil && m["summary"] == true {
			if v, ok := m["LAeq"].(float64); ok {
				return v
			}
		}
	}
	b.Fatalf("no summary LAeq in %.200s", out)
	return 0
}

func median(v []float64) float64 {
	s := slices.Clone(v)
	slices.Sort(s)
	if len(s) == 0 {
		return math.NaN()
	}
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return (s[len(s)/2-1] + s[len(s)/2]) / 2
}
