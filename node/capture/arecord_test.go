package capture

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// alsaFilePCM writes an ALSA configuration with one PCM per name in pcms, each of type file
// reading raw samples from the given path (or file descriptor number) over an inline null
// slave, and returns its path, for ALSA_CONFIG_PATH. The first PCM is also the default. With
// ALSA_CONFIG_PATH pointing at it, libasound reads nothing else (no cards, no alsa.conf).
func alsaFilePCM(t testing.TB, dir string, pcms [][2]string) string {
	t.Helper()
	var b strings.Builder
	for _, p := range pcms {
		infile := p[1]
		if !isNumber(infile) {
			infile = fmt.Sprintf("%q", infile)
		}
		fmt.Fprintf(&b, "pcm.%s {\n  type file\n  slave.pcm { type null }\n  file \"/dev/null\"\n  infile %s\n  format \"raw\"\n}\n", p[0], infile)
	}
	// PortAudio 19.6 aborts while listing devices when there is no default PCM.
	fmt.Fprintf(&b, "pcm.!default %q\n", pcms[0][0])
	path := filepath.Join(dir, "asound.conf")
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

func isNumber(s string) bool {
	for _, c := range s {
		if c < '0' || c > '9' {
			return false
		}
	}
	return s != ""
}

// The real arecord (Debian's alsa-utils) reading an ALSA file PCM delivers the file's samples
// bit for bit, for each encoding and with a channel picked out of two.
func TestArecordFilePCM(t *testing.T) {
	needTool(t, "arecord", "alsa-utils")
	tests := []struct {
		sample            string
		channels, channel int
	}{
		{Int32, 1, 1},
		{Int16, 2, 2},
		{Float32, 1, 1},
		{Int24in32, 2, 1},
	}
	for _, tc := range tests {
		t.Run(fmt.Sprintf("%s_ch%dof%d", tc.sample, tc.channel, tc.channels), func(t *testing.T) {
			dir := t.TempDir()
			const fs = 48000
			x := signal(fs, fs, 0.1) // 1 s of a 1 kHz sine at -20 dBFS, with dither
			raw, want := encode(x, tc.sample, tc.channels, tc.channel-1)
			sig := filepath.Join(dir, "signal.raw")
			if err := os.WriteFile(sig, raw, 0o644); err != nil {
				t.Fatal(err)
			}
			t.Setenv("ALSA_CONFIG_PATH", alsaFilePCM(t, dir, [][2]string{{"testsig", sig}}))
			src, err := New(Config{Kind: KindArecord, Device: "testsig", SampleRate: fs, Sample: tc.sample,
				Channels: tc.channels, Channel: tc.channel}, nil)
			if err != nil {
				t.Fatal(err)
			}
			f, err := src.Open(context.Background())
			if err != nil {
				t.Fatal(err)
			}
			if f != (Format{SampleRate: fs, Channels: tc.channels, Channel: tc.channel, Sample: tc.sample}) {
				t.Errorf("format = %+v", f)
			}
			// Read just the file's length: past its end the file PCM repeats its last frames.
			got, err := readAll(t, src, 1000, len(want))
			if err != nil {
				t.Fatal(err)
			}
			sameSamples(t, got, want)
			if d := src.Dropped(); d != 0 {
				t.Errorf("Dropped = %d, want 0", d)
			}
			if err := src.Close(); err != nil {
				t.Fatal(err)
			}
			if err := src.Close(); err != nil {
				t.Fatalf("second Close = %v", err)
			}
			if _, err := src.Read(make([]float32, 10)); !errors.Is(err, ErrClosed) {
				t.Fatalf("Read after Close = %v, want ErrClosed", err)
			}
		})
	}
}

// A device arecord cannot open makes Read fail with ErrDeviceLost carrying arecord's message.
func TestArecordMissingDevice(t *testing.T) {
	needTool(t, "arecord", "alsa-utils")
	dir := t.TempDir()
	t.Setenv("ALSA_CONFIG_PATH", alsaFilePCM(t, dir, [][2]string{{"testsig", "/dev/null"}}))
	src, _ := New(Config{Kind: KindArecord, Device: "no_such_pcm"}, nil)
	if _, err := src.Open(context.Background()); err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	_, err := src.Read(make([]float32, 100))
	if !errors.Is(err, ErrDeviceLost) || !strings.Contains(err.Error(), "no_such_pcm") {
		t.Fatalf("Read = %v, want ErrDeviceLost naming the PCM", err)
	}
	t.Log(err)
}

// standIn writes an executable shell script that stands in for arecord and returns its path.
func standIn(t testing.TB, body string) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "fake-arecord")
	if err := os.WriteFile(path, []byte("#!/bin/sh\n"+body), 0o755); err != nil {
		t.Fatal(err)
	}
	return path
}

// arecord's overrun report (which a file PCM cannot provoke) comes from a stand-in script:
// the overrun is counted as dropped samples, the data around it is delivered, and the script
// dying ends the stream with ErrDeviceLost carrying its last message.
func TestArecordOverrunAndDeath(t *testing.T) {
	dir := t.TempDir()
	x := signal(4800, 48000, 0.5)
	raw, want := encode(x, Int32, 1, 0)
	half := len(raw) / 2
	os.WriteFile(filepath.Join(dir, "a.raw"), raw[:half], 0o644)
	os.WriteFile(filepath.Join(dir, "b.raw"), raw[half:], 0o644)
	script := standIn(t, fmt.Sprintf(`cat %q
echo 'overrun!!! (at least 1.234 ms long)' >&2
echo 'overrun!!! (at least 20.000 ms long)' >&2
cat %q
echo 'arecord: pcm_read:2221: read error: No such device' >&2
exit 1
`, filepath.Join(dir, "a.raw"), filepath.Join(dir, "b.raw")))
	src, err := New(Config{Kind: KindArecord, ArecordPath: script, Sample: Int32}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := src.Open(context.Background()); err != nil {
		t.Fatal(err)
	}
	got, err := readAll(t, src, 1000, 1<<20)
	if !errors.Is(err, ErrDeviceLost) || !strings.Contains(err.Error(), "read error: No such device") ||
		!strings.Contains(err.Error(), "exit status 1") {
		t.Fatalf("stream ended with %v, want ErrDeviceLost with the last message and exit status", err)
	}
	sameSamples(t, got, want)
	// ceil(1.234 ms × 48 kHz) = ceil(59.232) = 60; ceil(20 ms × 48 kHz) = 960.
	if d := src.Dropped(); d != 60+960 {
		t.Fatalf("Dropped = %d, want 1020", d)
	}
	if _, err2 := src.Read(make([]float32, 10)); !errors.Is(err2, ErrDeviceLost) {
		t.Fatalf("Read after the loss = %v, want the same ErrDeviceLost", err2)
	}
	if err := src.Close(); err != nil {
		t.Fatal(err)
	}
	if err := src.Close(); err != nil {
		t.Fatal(err)
	}
}

func TestOverrunSamples(t *testing.T) {
	tests := []struct {
		ms   string
		rate int
		want int64
	}{
		{"1.234", 48000, 60}, // ceil(59.232)
		{"1000.000", 44100, 44100},
		{"0.001", 8000, 1}, // ceil(0.008)
		{"", 48000, 1024},  // no duration: one block
		{"nan", 48000, 1024},
	}
	for _, tc := range tests {
		if got := overrunSamples(tc.ms, tc.rate, 1024); got != tc.want {
			t.Errorf("overrunSamples(%q, %d) = %d, want %d", tc.ms, tc.rate, got, tc.want)
		}
	}
	for _, line := range []string{"overrun!!! (at least 1.234 ms long)", "overrun!!!"} {
		if !overrunLine.MatchString(line) {
			t.Errorf("%q not recognised", line)
		}
	}
}

// Close from another goroutine ends a Read that waits on a silent arecord, kills the whole
// process group, and cancelling the context does the same.
func TestArecordCloseAndCancelWhileWaiting(t *testing.T) {
	script := standIn(t, "sleep 30\n")
	src, _ := New(Config{Kind: KindArecord, ArecordPath: script}, nil)
	if _, err := src.Open(context.Background()); err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() {
		_, err := src.Read(make([]float32, 100))
		done <- err
	}()
	time.Sleep(50 * time.Millisecond)
	start := time.Now()
	if err := src.Close(); err != nil {
		t.Fatal(err)
	}
	if err := <-done; !errors.Is(err, ErrClosed) {
		t.Fatalf("Read ended by Close = %v, want ErrClosed", err)
	}
	if time.Since(start) > 10*time.Second {
		t.Fatalf("Close took %v", time.Since(start)) // generous: it should take milliseconds
	}

	ctx, cancel := context.WithCancel(context.Background())
	src, _ = New(Config{Kind: KindArecord, ArecordPath: script}, nil)
	if _, err := src.Open(ctx); err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	go func() {
		time.Sleep(50 * time.Millisecond)
		cancel()
	}()
	if _, err := src.Read(make([]float32, 100)); !errors.Is(err, context.Canceled) {
		t.Fatalf("Read ended by cancel = %v, want context.Canceled", err)
	}
}

func TestArecordNotInstalled(t *testing.T) {
	src, _ := New(Config{Kind: KindArecord, ArecordPath: filepath.Join(t.TempDir(), "arecord")}, nil)
	_, err := src.Open(context.Background())
	if err == nil || !strings.Contains(err.Error(), "alsa-utils") || !strings.Contains(err.Error(), "arecord_path") {
		t.Fatalf("Open = %v, want advice to install alsa-utils or set arecord_path", err)
	}
	src.Close()
}

func TestArecordArgs(t *testing.T) {
	c := Config{Kind: KindArecord, Device: "hw:CARD=Mic,DEV=0", Sample: Int24in32, Channels: 2, Channel: 2}.WithDefaults()
	got := strings.Join(newArecord(c, nil).args(), " ")
	want := "-D hw:CARD=Mic,DEV=0 -f S32_LE -r 48000 -c 2 -t raw --disable-resample"
	if got != want {
		t.Fatalf("args = %q, want %q", got, want)
	}
	c.AllowResample = true
	if strings.Contains(strings.Join(newArecord(c, nil).args(), " "), "disable-resample") {
		t.Fatal("allow_resample still passes --disable-resample")
	}
}

// Reports that the device refuses the configuration (stand-in scripts printing arecord's
// messages) end the stream with ErrUnsupported and the fix, not ErrDeviceLost: retrying would
// not help. The rate warning matters most: arecord carries on at the other rate, which would
// time every sample wrongly.
func TestArecordRefusals(t *testing.T) {
	tests := []struct {
		name, script, want string
	}{
		{"format", "echo 'arecord: set_params:1343: Sample format non available' >&2\necho 'Available formats:' >&2\necho '- S16_LE' >&2\nexit 1\n",
			"the device refuses int32 samples (S32_LE); choose another capture.sample_format"},
		{"channels", "echo 'arecord: set_params:1357: Channels count non available' >&2\nexit 1\n",
			"the device refuses 1 channel(s); change capture.channels"},
		{"rate", "echo 'Warning: rate is not accurate (requested = 48000Hz, got = 44100Hz)' >&2\necho '         please, try the plug plugin ' >&2\nhead -c 40000 /dev/zero\nsleep 30\n",
			"the device runs at 44100 Hz, not the 48000 Hz asked; set capture.sample_rate = 44100"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			src, _ := New(Config{Kind: KindArecord, ArecordPath: standIn(t, tc.script)}, nil)
			if _, err := src.Open(context.Background()); err != nil {
				t.Fatal(err)
			}
			defer src.Close()
			_, err := readAll(t, src, 1000, 1<<20)
			if !errors.Is(err, ErrUnsupported) || errors.Is(err, ErrDeviceLost) || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("stream ended with %v, want ErrUnsupported saying %q", err, tc.want)
			}
		})
	}
}
