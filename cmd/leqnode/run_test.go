package main

import (
	"context"
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/capture"
	"github.com/leqnode/leqnode/node/lib/wav"
	"github.com/leqnode/leqnode/node/testrig"
)

func TestRunPortAudioEndToEnd(t *testing.T) {
	// The real PortAudio library captures from an ALSA `file` PCM that reads a pipe the test
	// writes in real time (no sound card needed); the node stores seconds that must match the
	// measurement chain run over the same samples.
	if _, err := capture.New(capture.Config{Kind: capture.KindPortAudio}, nil); err != nil && strings.Contains(err.Error(), "PortAudio") {
		testrig.Missing(t, "this build has no PortAudio ("+err.Error()+"): install gcc and portaudio19-dev (make test-deps does, as root) and build with cgo")
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
		// S32_LE full scale 2^31, the scaling of node/lib/wav and node/capture.
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
