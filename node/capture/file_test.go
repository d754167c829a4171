package capture

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/leqnode/leqnode/node/lib/wav"
)

// writeWAV writes x (mono) as a 32-bit float WAV file and returns its path.
func writeWAV(t testing.TB, x []float64, fs int) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "rec.wav")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	w, err := wav.NewWriter(f, wav.Format{SampleRate: fs, Channels: 1, Encoding: wav.Float32})
	if err != nil {
		t.Fatal(err)
	}
	y := make([]float32, len(x))
	for i, v := range x {
		y[i] = float32(v)
	}
	if err := w.Write(y); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}

func TestFileFast(t *testing.T) {
	x := signal(48000+17, 48000, 0.5)
	path := writeWAV(t, x, 48000)
	src, err := New(Config{Kind: KindFile, File: path}, nil)
	if err != nil {
		t.Fatal(err)
	}
	f, err := src.Open(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if f != (Format{SampleRate: 48000, Channels: 1, Channel: 1, Sample: Float32}) {
		t.Errorf("format = %+v", f)
	}
	got, err := readAll(t, src, 4000, 1<<20)
	if !isEOF(err) {
		t.Fatalf("ended with %v, want io.EOF", err)
	}
	want := make([]float32, len(x))
	for i, v := range x {
		want[i] = float32(v)
	}
	sameSamples(t, got, want)
	if !strings.Contains(src.Describe(), "as fast as possible") {
		t.Errorf("Describe = %q", src.Describe())
	}
	if err := src.Close(); err != nil {
		t.Fatal(err)
	}
	if err := src.Close(); err != nil {
		t.Fatalf("second Close = %v", err)
	}
}

func TestFileMissingOrBad(t *testing.T) {
	src, _ := New(Config{Kind: KindFile, File: filepath.Join(t.TempDir(), "absent.wav")}, nil)
	if _, err := src.Open(context.Background()); !errors.Is(err, os.ErrNotExist) || !strings.Contains(err.Error(), "capture.file") {
		t.Fatalf("Open of a missing file = %v", err)
	}
	bad := filepath.Join(t.TempDir(), "bad.wav")
	os.WriteFile(bad, []byte("RIFF\x00\x00\x00\x00WAVEjunk"), 0o644)
	src, _ = New(Config{Kind: KindFile, File: bad}, nil)
	if _, err := src.Open(context.Background()); !errors.Is(err, ErrBadInput) || !strings.Contains(err.Error(), bad) {
		t.Fatalf("Open of a bad file = %v", err)
	}
}

// Real-time replay never runs ahead of the clock: after each Read, the samples delivered so
// far are at most (time since Open) × rate. Checked as counts against the elapsed time, a
// bound a slow machine cannot break (it only makes the reader later).
func TestFileRealtime(t *testing.T) {
	const fs = 8000
	x := signal(fs*6/10, fs, 0.5) // 0.6 s
	path := writeWAV(t, x, fs)
	src, _ := New(Config{Kind: KindFile, File: path, Realtime: true, FramesPerBuffer: 400}, nil)
	start := time.Now()
	if _, err := src.Open(context.Background()); err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	buf := make([]float32, 1000)
	var total int
	for {
		n, err := src.Read(buf)
		if isEOF(err) {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		if n > 400 {
			t.Fatalf("Read delivered %d samples, more than a block of 400", n)
		}
		total += n
		if allowed := time.Since(start).Seconds() * fs; float64(total) > allowed+1 {
			t.Fatalf("%d samples delivered after %.3f s: ahead of real time (at most %.0f)", total, time.Since(start).Seconds(), allowed)
		}
	}
	if total != len(x) {
		t.Fatalf("delivered %d samples, want %d", total, len(x))
	}
}

// Close from another goroutine ends a Read that waits for its pacing deadline, and cancelling
// the context does too.
func TestFileRealtimeCloseAndCancel(t *testing.T) {
	path := writeWAV(t, signal(8000*20, 8000, 0.5), 8000)
	src, _ := New(Config{Kind: KindFile, File: path, Realtime: true, FramesPerBuffer: 8000 * 10 / 2}, nil)
	if _, err := src.Open(context.Background()); err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() {
		_, err := src.Read(make([]float32, 40000)) // 5 s block: waits
		done <- err
	}()
	time.Sleep(20 * time.Millisecond)
	src.Close()
	if err := <-done; !errors.Is(err, ErrClosed) {
		t.Fatalf("Read ended by Close = %v, want ErrClosed", err)
	}

	ctx, cancel := context.WithCancel(context.Background())
	src, _ = New(Config{Kind: KindFile, File: path, Realtime: true, FramesPerBuffer: 40000}, nil)
	if _, err := src.Open(ctx); err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	go func() {
		time.Sleep(20 * time.Millisecond)
		cancel()
	}()
	if _, err := src.Read(make([]float32, 40000)); !errors.Is(err, context.Canceled) {
		t.Fatalf("Read ended by cancel = %v, want context.Canceled", err)
	}
}

// The pacer's deadlines come from the sample count, so a year of samples at 48 kHz is due
// exactly a year after the start, with no accumulated rounding.
func TestPacerNoDrift(t *testing.T) {
	p := newPacer(48000)
	year := int64(365 * 24 * 3600)
	if got := p.due(year * 48000).Sub(p.start); got != time.Duration(year)*time.Second {
		t.Fatalf("due after a year = %v", got)
	}
	p = newPacer(44100)
	// 44100 samples per second: sample 1 is due after 22675.73 ns, truncated to 22675 ns.
	if got := p.due(1).Sub(p.start); got != 22675*time.Nanosecond {
		t.Fatalf("due(1) = %v", got)
	}
	if got := p.due(44100*3600 + 1).Sub(p.start); got != time.Hour+22675*time.Nanosecond {
		t.Fatalf("due one hour and one sample = %v", got)
	}
}
