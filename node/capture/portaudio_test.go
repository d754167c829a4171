//go:build cgo && !noportaudio

package capture

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"github.com/gordonklaus/portaudio"
)

// paChildEnv names the directory of the test signals for TestPortAudioChild. PortAudio is one
// library per process, read its ALSA configuration at Initialize, and prints from C: so its
// tests run in a child process of their own with ALSA_CONFIG_PATH set from the start.
const paChildEnv = "LEQNODE_CAPTURE_PORTAUDIO_DIR"

// paCase is one file-backed ALSA PCM the child captures from.
type paCase struct {
	pcm               string
	sample            string
	channels, channel int
}

var paCases = []paCase{
	{"testsig32", Int32, 1, 1},
	{"testsig16", Int16, 2, 2},
	{"testsigf", Float32, 1, 1},
	{"testsig24", Int24in32, 2, 1},
}

const (
	paRate    = 48000
	paSeconds = 2 // length of each signal file; the child reads one second
	paPacedFD = 100
)

// TestPortAudio captures through the real PortAudio library from ALSA file PCMs (no sound
// card needed), in a child process; see TestPortAudioChild.
//
// Under -race, add -gcflags=all=-d=checkptr=0: the PortAudio binding's pointer handling trips
// Go's checkptr instrumentation (gordonklaus/portaudio issue 57), not our code.
func TestPortAudio(t *testing.T) {
	if os.Getenv(paChildEnv) != "" {
		t.Skip("this is the child process")
	}
	dir := t.TempDir()
	pcms := [][2]string{}
	for _, c := range paCases {
		raw, _ := encode(signal(paSeconds*paRate, paRate, 0.1), c.sample, c.channels, c.channel-1)
		path := filepath.Join(dir, c.pcm+".raw")
		if err := os.WriteFile(path, raw, 0o644); err != nil {
			t.Fatal(err)
		}
		pcms = append(pcms, [2]string{c.pcm, path})
	}
	pcms = append(pcms, [2]string{"testpaced", strconv.Itoa(paPacedFD)})
	conf := alsaFilePCM(t, dir, pcms)
	cmd := exec.Command(os.Args[0], "-test.run=^TestPortAudioChild$", "-test.v", "-test.count=1")
	cmd.Env = append(os.Environ(), "ALSA_CONFIG_PATH="+conf, paChildEnv+"="+dir)
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("child process: %v\n%s", err, out)
	}
	if !bytes.Contains(out, []byte("--- PASS: TestPortAudioChild")) {
		t.Fatalf("the child did not run the PortAudio tests:\n%s", out)
	}
	// JACK prints "Cannot connect to server socket" on every Initialize unless fd 2 is
	// silenced around it.
	if bytes.Contains(out, []byte("Cannot connect to server")) || bytes.Contains(out, []byte("ALSA lib")) {
		t.Errorf("PortAudio's start-up noise reached standard error:\n%s", out)
	}
	t.Logf("child:\n%s", out)
}

// TestPortAudioChild runs in the child process started by TestPortAudio.
func TestPortAudioChild(t *testing.T) {
	dir := os.Getenv(paChildEnv)
	if dir == "" {
		t.Skip("run by TestPortAudio in a child process")
	}
	// The paced PCM reads file descriptor 100: a pipe that a feeder fills on a ticker. It
	// must exist before PortAudio lists the devices.
	pr, pw, err := os.Pipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := syscall.Dup3(int(pr.Fd()), paPacedFD, 0); err != nil {
		t.Fatal(err)
	}
	pr.Close()
	t.Run("formats", func(t *testing.T) {
		for _, c := range paCases {
			_, want := encode(signal(paRate, paRate, 0.1), c.sample, c.channels, c.channel-1)
			var logs bytes.Buffer
			src, err := New(Config{Kind: KindPortAudio, Device: c.pcm, SampleRate: paRate, Sample: c.sample,
				Channels: c.channels, Channel: c.channel, FramesPerBuffer: 480},
				slog.New(slog.NewTextHandler(&logs, nil)))
			if err != nil {
				t.Fatal(err)
			}
			f, err := src.Open(context.Background())
			if err != nil {
				t.Fatalf("%s: %v", c.pcm, err)
			}
			if f != (Format{SampleRate: paRate, Channels: c.channels, Channel: c.channel, Sample: c.sample}) {
				t.Errorf("%s: format = %+v", c.pcm, f)
			}
			got, err := readAll(t, src, 1000, len(want))
			if err != nil {
				t.Fatal(err)
			}
			sameSamples(t, got, want)
			// 1 s of a 1 kHz sine of peak 0.1 at 48 kHz is 1000 whole periods, whose mean
			// square is exactly 0.1²/2: 20·log10(0.1) = -20 dBFS (AES17). The dither adds
			// 10·log10(1 + (1e-4)²/12 / 0.005) ≈ 7e-7 dB.
			if l := levelDBFS(got); math.Abs(l-(-20)) > 0.001 {
				t.Errorf("%s: level %.5f dBFS, want -20", c.pcm, l)
			}
			if !strings.Contains(logs.String(), "conversion layer") {
				t.Errorf("%s: no warning that a file PCM is not hardware; logs:\n%s", c.pcm, logs.String())
			}
			if src.Dropped() != 0 {
				t.Errorf("%s: Dropped = %d", c.pcm, src.Dropped())
			}
			if err := src.Close(); err != nil {
				t.Fatal(err)
			}
			if err := src.Close(); err != nil {
				t.Fatalf("second Close = %v", err)
			}
			if _, err := src.Read(make([]float32, 8)); !errors.Is(err, ErrClosed) {
				t.Fatalf("Read after Close = %v", err)
			}
		}
	})

	t.Run("devices", func(t *testing.T) {
		devs, err := Devices()
		if err != nil {
			t.Fatal(err)
		}
		byName := map[string]DeviceInfo{}
		for _, d := range devs {
			byName[d.Name] = d
			t.Logf("%+v", d)
		}
		for _, c := range paCases {
			d, ok := byName[c.pcm]
			if !ok {
				t.Fatalf("Devices does not list %s", c.pcm)
			}
			if d.InputChannels < 2 || !d.Converts || d.HostAPI != "ALSA" {
				t.Errorf("%s: %+v", c.pcm, d)
			}
			if !strings.Contains(fmt.Sprint(d.Rates), "48000") {
				t.Errorf("%s: rates %v lack 48000", c.pcm, d.Rates)
			}
		}
		if !byName["default"].Default {
			t.Errorf("the default PCM is not marked default: %+v", byName["default"])
		}

		// By index, by substring, the default device and the device's own rate.
		idx := strconv.Itoa(byName["testsig16"].Index)
		for _, tc := range []struct{ spec, want string }{{idx, "testsig16"}, {"SIG1", "testsig16"}, {"", "default"}} {
			src, _ := New(Config{Kind: KindPortAudio, Device: tc.spec, Sample: Int16}, nil)
			f, err := src.Open(context.Background())
			if err != nil {
				t.Fatalf("device %q: %v", tc.spec, err)
			}
			if !strings.Contains(src.Describe(), "portaudio: "+tc.want+" @") {
				t.Errorf("device %q opened %q, want %s", tc.spec, src.Describe(), tc.want)
			}
			if f.SampleRate != byName[tc.want].DefaultRate {
				t.Errorf("sample_rate 0 opened %d Hz, want the device's default %d", f.SampleRate, byName[tc.want].DefaultRate)
			}
			src.Close()
		}
		for _, tc := range []struct {
			spec    string
			noDev   bool
			message string
		}{
			// testsig32, testsig16, testsigf and testsig24; not testpaced or default.
			{"testsig", false, "matches 4 input devices (0 \"testsig32\", 1 \"testsig16\""},
			{"microphone", true, "matches no input device; input devices: 0 \"testsig32\""},
			{"99", true, "no input device with index 99"},
		} {
			src, _ := New(Config{Kind: KindPortAudio, Device: tc.spec}, nil)
			_, err := src.Open(context.Background())
			if err == nil || errors.Is(err, ErrNoDevice) != tc.noDev || !strings.Contains(err.Error(), tc.message) {
				t.Errorf("device %q: Open = %v, want %q", tc.spec, err, tc.message)
			}
			src.Close()
		}
		// More channels than the device has (a config that passed Validate's 1 to 64).
		src, _ := newPortAudio(Config{Kind: KindPortAudio, Device: "testsig32", Channels: 1000, Channel: 1}.WithDefaults(), slog.New(slog.DiscardHandler))
		if _, err := src.Open(context.Background()); err == nil || !strings.Contains(err.Error(), "captures at most 128") {
			t.Errorf("1000 channels: %v", err)
		}
		src.Close()
	})

	t.Run("reopen", func(t *testing.T) {
		// Close and Open again, as the node does after a device loss: every Open initialises
		// PortAudio afresh and every Close terminates it, the path by which a re-plugged USB
		// microphone is found. The file PCM starts again from its first frame.
		c := paCases[0]
		_, want := encode(signal(4800, paRate, 0.1), c.sample, c.channels, c.channel-1)
		src, _ := New(Config{Kind: KindPortAudio, Device: c.pcm, SampleRate: paRate, Sample: c.sample}, nil)
		for range 3 {
			if _, err := src.Open(context.Background()); err != nil {
				t.Fatal(err)
			}
			got, err := readAll(t, src, 512, len(want))
			if err != nil {
				t.Fatal(err)
			}
			sameSamples(t, got, want)
			buf := make([]float32, 480)
			if a := testing.AllocsPerRun(20, func() { src.Read(buf) }); a != 0 {
				t.Errorf("%v allocations per Read", a)
			}
			if err := src.Close(); err != nil {
				t.Fatal(err)
			}
		}
	})

	t.Run("faults", func(t *testing.T) {
		// A file PCM cannot overflow or vanish (ALSA's file plugin keeps delivering even when
		// its input fails), so the results of PortAudio's read are injected here, on a real
		// open stream: an overflow report after the third buffer, then a timeout (what
		// PortAudio's ALSA back end returns when a device stops delivering).
		c := paCases[0]
		_, want := encode(signal(paRate, paRate, 0.1), c.sample, c.channels, c.channel-1)
		src, _ := New(Config{Kind: KindPortAudio, Device: c.pcm, SampleRate: paRate, Sample: c.sample, FramesPerBuffer: 480}, nil)
		if _, err := src.Open(context.Background()); err != nil {
			t.Fatal(err)
		}
		defer src.Close()
		ps := src.(*paSource)
		real, calls := ps.read, 0
		ps.read = func() error {
			err := real()
			switch calls++; calls {
			case 3, 4:
				return portaudio.InputOverflowed // the buffer itself is good
			case 6:
				return portaudio.TimedOut
			}
			return err
		}
		got, err := readAll(t, src, 480, paRate)
		if !errors.Is(err, ErrDeviceLost) || !strings.Contains(err.Error(), "testsig32") {
			t.Fatalf("after 5 buffers: %v, want ErrDeviceLost naming the device", err)
		}
		sameSamples(t, got, want[:5*480])
		if d := src.Dropped(); d != 2*480 {
			t.Errorf("Dropped = %d, want one buffer (480) per overflow report", d)
		}
		if _, err2 := src.Read(make([]float32, 10)); !errors.Is(err2, ErrDeviceLost) {
			t.Errorf("Read after the loss = %v, want ErrDeviceLost again", err2)
		}
	})

	t.Run("hung", func(t *testing.T) {
		// A device whose read never returns (injected: a file PCM always delivers): Close
		// gives up waiting, reports the device lost, and the read releases the stream when it
		// finally returns.
		src, _ := New(Config{Kind: KindPortAudio, Device: "testsig32", SampleRate: paRate, Sample: Int32}, nil)
		if _, err := src.Open(context.Background()); err != nil {
			t.Fatal(err)
		}
		ps := src.(*paSource)
		ps.closeWait = 50 * time.Millisecond
		release, entered := make(chan struct{}), make(chan struct{})
		real := ps.read
		ps.read = func() error {
			close(entered)
			<-release
			return real()
		}
		done := make(chan error, 1)
		go func() {
			_, err := src.Read(make([]float32, 100))
			done <- err
		}()
		<-entered
		if err := src.Close(); !errors.Is(err, ErrDeviceLost) {
			t.Fatalf("Close under a hung read = %v, want ErrDeviceLost", err)
		}
		if _, err := src.Open(context.Background()); !errors.Is(err, ErrDeviceLost) || !strings.Contains(err.Error(), "has not returned") {
			t.Fatalf("Open while the read still hangs = %v, want ErrDeviceLost", err)
		}
		close(release)
		if err := <-done; !errors.Is(err, ErrClosed) {
			t.Fatalf("the hung read returned %v, want ErrClosed", err)
		}
		ps.mu.Lock()
		released := ps.stream == nil && !ps.inited
		ps.mu.Unlock()
		if !released {
			t.Fatal("the stream was not released after the hung read returned")
		}
		if err := src.Close(); err != nil {
			t.Fatalf("second Close = %v", err)
		}
		// Once the read is back, the source opens again.
		_, want := encode(signal(960, paRate, 0.1), Int32, 1, 0)
		if _, err := src.Open(context.Background()); err != nil {
			t.Fatal(err)
		}
		got, err := readAll(t, src, 480, len(want))
		if err != nil {
			t.Fatal(err)
		}
		sameSamples(t, got, want)
		if err := src.Close(); err != nil {
			t.Fatal(err)
		}
	})

	t.Run("paced", func(t *testing.T) {
		// The feeder writes 960 frames (two buffers of 480) every 20 ms: real time. Capture can
		// never run ahead of it: after every Read, the samples read are at most the samples
		// written (counted before each write).
		x := signal(paRate/2, paRate, 0.1)
		raw, want := encode(x, Float32, 1, 0)
		var written atomic.Int64
		stop := make(chan struct{})
		fed := make(chan error, 1)
		go func() {
			tick := time.NewTicker(20 * time.Millisecond)
			defer tick.Stop()
			const chunk = 960 * 4
			for off := 0; off < len(raw); off += chunk {
				written.Add(chunk / 4)
				if _, err := pw.Write(raw[off:min(off+chunk, len(raw))]); err != nil {
					fed <- err
					return
				}
				select {
				case <-tick.C:
				case <-stop:
					fed <- nil
					return
				}
			}
			<-stop
			fed <- nil
		}()
		src, _ := New(Config{Kind: KindPortAudio, Device: "testpaced", SampleRate: paRate, Sample: Float32, FramesPerBuffer: 480}, nil)
		if _, err := src.Open(context.Background()); err != nil {
			t.Fatal(err)
		}
		var got []float32
		buf := make([]float32, 480)
		for len(got) < len(want) {
			n, err := src.Read(buf)
			if err != nil {
				t.Fatal(err)
			}
			got = append(got, buf[:n]...)
			if w := written.Load(); int64(len(got)) > w {
				t.Fatalf("read %d samples but only %d were written: capture ran ahead of its source", len(got), w)
			}
		}
		sameSamples(t, got[:len(want)], want)
		close(stop)
		if err := <-fed; err != nil {
			t.Fatal(err)
		}
		if err := src.Close(); err != nil {
			t.Fatal(err)
		}
	})
}
