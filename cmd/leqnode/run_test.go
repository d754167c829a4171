package main

import (
	"context"
	"encoding/binary"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/capture"
	"github.com/leqnode/leqnode/node/testrig"
	"github.com/leqnode/leqnode/node/wav"
)

// TestMain lets a test start this test binary as the leqnode command in a child process
// (LEQNODE_TEST_ARGS holds its arguments, separated by 0x1f). PortAudio is one library per
// process and reads ALSA_CONFIG_PATH once, so the end-to-end capture tests run it in a child.
func TestMain(m *testing.M) {
	if args, ok := os.LookupEnv("LEQNODE_TEST_ARGS"); ok {
		os.Args = append([]string{"leqnode"}, strings.Split(args, "\x1f")...)
		main()
		return
	}
	os.Exit(m.Run())
}

// stopChild ends a child `leqnode run` with SIGTERM, as systemd does, and fails the test if it
// does not stop cleanly within 20 s.
func stopChild(t *testing.T, cmd *exec.Cmd, stderr *strings.Builder) {
	t.Helper()
	cmd.Process.Signal(syscall.SIGTERM)
	done := make(chan error, 1)
	go func() { done <- cmd.Wait() }()
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("leqnode run: %v\n%s", err, stderr.String())
		}
	case <-time.After(20 * time.Second):
		cmd.Process.Kill()
		t.Fatalf("leqnode run did not stop on SIGTERM\n%s", stderr.String())
	}
}

// childCmd returns a command that runs leqnode with args in a child process.
func childCmd(t testing.TB, args ...string) *exec.Cmd {
	t.Helper()
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(exe)
	cmd.Env = append(os.Environ(), "LEQNODE_TEST_ARGS="+strings.Join(args, "\x1f"))
	return cmd
}

// e2eSignal is 8 s of a test signal at 48 kHz: a 1 kHz tone whose level changes every second
// (55, 70, 85, 62, 90, 48, 75, 66 dB SPL at -26 dBFS) over a noise floor, so that a second put
// in the wrong place shows.
func e2eSignal() []float32 {
	const fs = 48000
	levels := []float64{55, 70, 85, 62, 90, 48, 75, 66}
	rng := rand.New(rand.NewPCG(5, 6))
	x := make([]float32, len(levels)*fs)
	for i := range x {
		l := levels[i/fs]
		// Peak amplitude from AES17 and the sensitivity definition: SPL = dBFS - S + 94.
		amp := math.Pow(10, (l-94-26)/20)
		x[i] = float32(amp*math.Sin(2*math.Pi*1000*float64(i)/fs) + 3e-4*rng.NormFloat64())
	}
	return x
}

// storedSeconds reads the second records of a store, in time order.
func storedSeconds(t *testing.T, path string) []*record.Second {
	t.Helper()
	st, err := buffer.OpenReadOnly(path, 5*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	var out []*record.Second
	err = st.Range(record.KindSecond, time.Unix(0, 0), time.Date(2200, 1, 1, 0, 0, 0, 0, time.UTC), func(r record.Record) error {
		out = append(out, r.(*record.Second))
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// compareWithChain measures x with the dsp chain cut exactly where the stored seconds were cut
// (their sample counts in order, starting at sample skip) and checks each complete second
// within 0.1 dB (issue: stored seconds match `leqnode analyze` on the same signal).
func compareWithChain(t *testing.T, x []float32, skip int, secs []*record.Second) {
	t.Helper()
	m, err := dsp.NewMeter(dsp.MeterConfig{SampleRate: 48000, SensitivityDBFS: -26, Bands: dsp.Third})
	if err != nil {
		t.Fatal(err)
	}
	m.Process(x[:skip])
	var r dsp.Result
	m.Take(&r)
	pos := skip
	checked := 0
	for k, s := range secs {
		n := int(math.Round(s.Duration.Seconds() * 48000))
		if pos+n > len(x) {
			break
		}
		m.Process(x[pos : pos+n])
		pos += n
		m.Take(&r)
		if k == 0 {
			continue // the first, partial second holds the filters' start from rest
		}
		for _, c := range []struct {
			name string
			a, b float64
		}{{"LAeq", s.LAeq, r.LAeq}, {"LAFmax", s.LAFmax, r.LAFmax}, {"LZeq", s.LZeq, r.LZeq}, {"LCpeak", s.LCpeak, r.LCpeak}} {
			if math.Abs(c.a-c.b) > 0.1 {
				t.Errorf("second %d (%v, %d samples): %s stored %.2f, chain %.2f", k, s.Start.Format("15:04:05.000"), n, c.name, c.a, c.b)
			}
		}
		checked++
	}
	if checked < 5 {
		t.Errorf("only %d seconds compared", checked)
	}
}

func writeConfig(t *testing.T, dir, capture, measure string) string {
	t.Helper()
	cfg := fmt.Sprintf(`version = 1
[node]
id = "test-node"
time_zone = "UTC"
[microphone]
sensitivity_dbfs = -26
self_noise_dba = 0
[measure]
bands = "third"
settling_s = 0
%s
[store]
path = %q
commit_interval = "1s"
[capture]
%s
`, measure, filepath.Join(dir, "node.db"), capture)
	p := filepath.Join(dir, "node.toml")
	if err := os.WriteFile(p, []byte(cfg), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestRunPortAudioEndToEnd(t *testing.T) {
	// The real PortAudio library captures from an ALSA `file` PCM that reads a pipe the test
	// writes in real time (no sound card needed); the node stores seconds that must match the
	// measurement chain run over the same samples.
	if _, err := capture.New(capture.Config{Kind: capture.KindPortAudio}, nil); err != nil && strings.Contains(err.Error(), "PortAudio") {
		t.Skip("this build has no PortAudio:", err)
	}
	dir := t.TempDir()
	asound := filepath.Join(dir, "asound.conf")
	// fd 3 in the child is the read end of the pipe (cmd.ExtraFiles[0]).
	err := os.WriteFile(asound, []byte(`pcm.testsig {
  type file
  slave.pcm { type null }
  file "/dev/null"
  infile 3
  format "raw"
}
pcm.!default "testsig"
`), 0o644)
	if err != nil {
		t.Fatal(err)
	}
	cfg := writeConfig(t, dir, `kind = "portaudio"
device = "testsig"
sample_rate = 48000
sample_format = "float32"
channels = 1
frames_per_buffer = 960`, "")
	pr, pw, err := os.Pipe()
	if err != nil {
		t.Fatal(err)
	}
	cmd := childCmd(t, "run", "--config", cfg)
	cmd.Env = append(cmd.Env, "ALSA_CONFIG_PATH="+asound)
	cmd.ExtraFiles = []*os.File{pr}
	var stderr strings.Builder
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	pr.Close()
	x := e2eSignal()
	// Write the signal in real time, 4800 frames (five device buffers) every 100 ms.
	raw := make([]byte, 4*4800)
	tick := time.NewTicker(100 * time.Millisecond)
	for off := 0; off < len(x); off += 4800 {
		for i, v := range x[off : off+4800] {
			binary.LittleEndian.PutUint32(raw[4*i:], math.Float32bits(v))
		}
		if _, err := pw.Write(raw); err != nil {
			t.Fatalf("writing the signal: %v\n%s", err, stderr.String())
		}
		<-tick.C
	}
	tick.Stop()
	time.Sleep(300 * time.Millisecond)
	stopChild(t, cmd, &stderr)
	pw.Close()
	secs := storedSeconds(t, filepath.Join(dir, "node.db"))
	if len(secs) < 7 {
		t.Fatalf("%d seconds stored\n%s", len(secs), stderr.String())
	}
	for _, s := range secs {
		t.Logf("%s %v LAeq %.2f %v", s.Start.Format("15:04:05.000"), s.Duration, s.LAeq, s.Flags)
	}
	compareWithChain(t, x, 0, secs)
}

func TestRunStdinAndFileEndToEnd(t *testing.T) {
	// The stdin source (a WAV stream) and the file source, run as fast as the node takes the
	// samples: the same comparison as for PortAudio.
	x := e2eSignal()
	dir := t.TempDir()
	wavPath := writeWAV(t, dir, "sig.wav", wav.Format{SampleRate: 48000, Channels: 1, Encoding: wav.Float32}, x)
	data, err := os.ReadFile(wavPath)
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name, capture, measure string
		stdin                  []byte
	}{
		{"stdin", `kind = "stdin"`, `timestamps = "samples"`, data},
		{"file", fmt.Sprintf("kind = \"file\"\nfile = %q\nrealtime = false", wavPath), "", nil},
	} {
		t.Run(tc.name, func(t *testing.T) {
			d := t.TempDir()
			cfg := writeConfig(t, d, tc.capture, tc.measure)
			ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
			defer cancel()
			var out, errb strings.Builder
			code := run(ctx, stdio{in: strings.NewReader(string(tc.stdin)), out: &out, err: &errb}, []string{"run", "--config", cfg})
			if code != 0 {
				t.Fatalf("exit %d: %s", code, errb.String())
			}
			secs := storedSeconds(t, filepath.Join(d, "node.db"))
			compareWithChain(t, x, 0, secs)
		})
	}
}

func TestRunArecordEndToEnd(t *testing.T) {
	// The node starts Debian's arecord itself, which reads an ALSA file PCM backed by a raw
	// file of the signal. The file plugin delivers a file as fast as it is read (real-time
	// pacing needs a pipe on an inherited file descriptor, which arecord, the node's child,
	// does not get), so the node takes its time stamps from the sample count. arecord opens
	// S32_LE, so the file holds 32-bit integers.
	testrig.Need(t, "alsa-utils", "arecord")
	dir := t.TempDir()
	x := e2eSignal()
	raw := make([]byte, 4*len(x))
	for i, v := range x {
		// S32_LE full scale 2^31, the scaling of node/wav and node/capture.
		binary.LittleEndian.PutUint32(raw[4*i:], uint32(int32(math.Round(float64(v)*(1<<31)))))
	}
	rawPath := filepath.Join(dir, "signal.raw")
	if err := os.WriteFile(rawPath, raw, 0o644); err != nil {
		t.Fatal(err)
	}
	asound := filepath.Join(dir, "asound.conf")
	err := os.WriteFile(asound, []byte(fmt.Sprintf(`pcm.testsig {
  type file
  slave.pcm { type null }
  file "/dev/null"
  infile %q
  format "raw"
}
pcm.!default "testsig"
`, rawPath)), 0o644)
	if err != nil {
		t.Fatal(err)
	}
	cfg := writeConfig(t, dir, `kind = "arecord"
device = "testsig"
sample_rate = 48000
sample_format = "int32"
channels = 1
frames_per_buffer = 960`, `timestamps = "samples"`)
	cmd := childCmd(t, "run", "--config", cfg)
	cmd.Env = append(cmd.Env, "ALSA_CONFIG_PATH="+asound)
	var stderr strings.Builder
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer cmd.Process.Kill()
	// 8 s of audio take well under a second to measure; past the end of the file the plugin
	// repeats its last frames, which the comparison leaves out.
	time.Sleep(3 * time.Second)
	stopChild(t, cmd, &stderr)
	secs := storedSeconds(t, filepath.Join(dir, "node.db"))
	if len(secs) < 7 {
		t.Fatalf("%d seconds stored\n%s", len(secs), stderr.String())
	}
	compareWithChain(t, x, 0, secs)
}

// TestAcceleratedRunsDoNotOverlap: a recording replayed faster than real time is stamped from
// the sample count, ahead of the clock; a second run on the same store continues after the
// first run's last second instead of stamping a second record for the same seconds.
func TestAcceleratedRunsDoNotOverlap(t *testing.T) {
	x := e2eSignal()
	dir := t.TempDir()
	wavPath := writeWAV(t, dir, "sig.wav", wav.Format{SampleRate: 48000, Channels: 1, Encoding: wav.Float32}, x)
	cfg := writeConfig(t, dir, fmt.Sprintf("kind = \"file\"\nfile = %q\nrealtime = false", wavPath), "")
	for range 2 {
		var out, errb strings.Builder
		if code := run(context.Background(), stdio{in: strings.NewReader(""), out: &out, err: &errb}, []string{"run", "--config", cfg}); code != 0 {
			t.Fatalf("exit %d: %s", code, errb.String())
		}
	}
	secs := storedSeconds(t, filepath.Join(dir, "node.db"))
	if len(secs) < 16 {
		t.Fatalf("%d seconds after two runs of 8 s", len(secs))
	}
	for i := 1; i < len(secs); i++ {
		if prevEnd := secs[i-1].Start.Add(secs[i-1].Duration); secs[i].Start.Before(prevEnd.Add(-time.Millisecond)) {
			t.Fatalf("second %d starts at %v, before the previous one ends at %v: the runs overlap", i, secs[i].Start, prevEnd)
		}
	}
}

// TestRunArecordMissingDevice: Debian's arecord started on an ALSA PCM that does not exist
// fails at once, every time. The node retries with back-off, stores no gap record per retry
// (the outage has one, written when audio comes back or the node stops) and warns at most
// once a minute.
func TestRunArecordMissingDevice(t *testing.T) {
	testrig.Need(t, "alsa-utils", "arecord")
	dir := t.TempDir()
	asound := filepath.Join(dir, "asound.conf")
	os.WriteFile(asound, []byte("pcm.testsig {\n  type file\n  slave.pcm { type null }\n  file \"/dev/null\"\n  infile \"/dev/null\"\n  format \"raw\"\n}\npcm.!default \"testsig\"\n"), 0o644)
	t.Setenv("ALSA_CONFIG_PATH", asound)
	cfg := writeConfig(t, dir, "kind = \"arecord\"\ndevice = \"no_such_pcm\"", "")
	ctx, cancel := context.WithTimeout(context.Background(), 8*time.Second)
	defer cancel()
	var out, errb strings.Builder
	run(ctx, stdio{in: strings.NewReader(""), out: &out, err: &errb}, []string{"run", "--config", cfg})
	st, err := buffer.OpenReadOnly(filepath.Join(dir, "node.db"), time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	var gaps int
	st.Range(record.KindGap, time.Unix(0, 0), time.Now().Add(time.Hour), func(record.Record) error { gaps++; return nil })
	warnings := strings.Count(errb.String(), "audio source")
	t.Logf("8 s without a device: %d gap records, %d warnings about the source, %d log lines", gaps, warnings, strings.Count(errb.String(), "\n"))
	if gaps > 1 || warnings > 2 {
		t.Errorf("8 s without a device: %d gap records (want at most 1), %d warnings about the source (want at most 2):\n%s", gaps, warnings, errb.String())
	}
}
