package capture

import (
	"bytes"
	"context"
	"errors"
	"io"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/node/lib/wav"
)

func TestStdinRaw(t *testing.T) {
	for _, sample := range []string{Int16, Int24, Int32, Int24in32, Float32} {
		for _, shape := range []struct{ channels, channel int }{{1, 1}, {2, 2}, {3, 2}} {
			x := signal(5000, 48000, 0.25)
			raw, want := encode(x, sample, shape.channels, shape.channel-1)
			// An io.Reader that returns odd-sized pieces, so frames straddle reads.
			in := &chunky{data: raw, sizes: []int{1, 7, 1000, 3, 4096}}
			cfg := Config{Kind: KindStdin, SampleRate: 48000, Sample: sample, Channels: shape.channels, Channel: shape.channel, FramesPerBuffer: 256}
			if sample == Int16 {
				cfg.StdinFormat = StdinRaw
			}
			src, err := NewReader(cfg, in, nil)
			if err != nil {
				t.Fatal(err)
			}
			f, err := src.Open(context.Background())
			if err != nil {
				t.Fatal(err)
			}
			if f != (Format{SampleRate: 48000, Channels: shape.channels, Channel: shape.channel, Sample: sample}) {
				t.Errorf("format = %+v", f)
			}
			got, err := readAll(t, src, 700, 1<<20)
			if !isEOF(err) {
				t.Fatalf("%s: read ended with %v, want io.EOF", sample, err)
			}
			sameSamples(t, got, want)
			if n, err := src.Read(make([]float32, 10)); n != 0 || !isEOF(err) {
				t.Errorf("Read after the end = %d, %v; want 0, io.EOF", n, err)
			}
			for range 2 {
				if err := src.Close(); err != nil {
					t.Errorf("Close = %v", err)
				}
			}
			if _, err := src.Read(make([]float32, 10)); !errors.Is(err, ErrClosed) {
				t.Errorf("Read after Close = %v, want ErrClosed", err)
			}
		}
	}
}

// chunky returns its data in pieces of the given sizes, cycling.
type chunky struct {
	data  []byte
	sizes []int
	k     int
}

func (c *chunky) Read(p []byte) (int, error) {
	if len(c.data) == 0 {
		return 0, io.EOF
	}
	n := min(len(p), len(c.data), c.sizes[c.k%len(c.sizes)])
	c.k++
	copy(p, c.data[:n])
	c.data = c.data[n:]
	return n, nil
}

func TestStdinRawPartialFrameAndBadFloat(t *testing.T) {
	raw, want := encode(signal(10, 48000, 0.5), Int16, 2, 0)
	raw = append(raw, 0x01, 0x02, 0x03) // three stray bytes: less than a frame of 4
	src, _ := NewReader(Config{Kind: KindStdin, SampleRate: 48000, Sample: Int16, Channels: 2}, bytes.NewReader(raw), nil)
	if _, err := src.Open(context.Background()); err != nil {
		t.Fatal(err)
	}
	got, err := readAll(t, src, 64, 100)
	if !isEOF(err) {
		t.Fatalf("err = %v, want io.EOF after the whole frames", err)
	}
	sameSamples(t, got, want)

	inf := []byte{0, 0, 0x80, 0x7F} // +Inf in IEEE 754 single precision
	src, _ = NewReader(Config{Kind: KindStdin, SampleRate: 48000, Sample: Float32}, bytes.NewReader(append(make([]byte, 8), inf...)), nil)
	if _, err := src.Open(context.Background()); err != nil {
		t.Fatal(err)
	}
	got, err = readAll(t, src, 64, 100)
	if len(got) != 2 || !errors.Is(err, ErrBadInput) || !strings.Contains(err.Error(), "sample 2") {
		t.Fatalf("got %d samples and %v; want 2 and an ErrBadInput naming sample 2", len(got), err)
	}
}

func TestStdinRawNeedsItsFormat(t *testing.T) {
	src, err := NewReader(Config{Kind: KindStdin}, strings.NewReader("not a wav header at all"), nil)
	if err != nil {
		t.Fatal(err)
	}
	_, err = src.Open(context.Background())
	if !errors.Is(err, ErrBadInput) || !strings.Contains(err.Error(), "capture.sample_rate") {
		t.Fatalf("Open = %v, want an error asking for sample_rate and sample_format", err)
	}
	src, _ = NewReader(Config{Kind: KindStdin}, strings.NewReader(""), nil)
	if _, err = src.Open(context.Background()); !errors.Is(err, ErrBadInput) || !strings.Contains(err.Error(), "empty") {
		t.Fatalf("Open on an empty stream = %v", err)
	}
	src, _ = NewReader(Config{Kind: KindStdin, StdinFormat: StdinWAV}, strings.NewReader("RIFX...."), nil)
	if _, err = src.Open(context.Background()); !errors.Is(err, ErrBadInput) {
		t.Fatalf("Open of a non-WAV stream as wav = %v", err)
	}
}

// A WAV stream written by sox (Debian's sox, the reference tool) goes through the stdin source
// unchanged: a 1 kHz sine at half full scale reads 20·log10(0.5) = -6.0206 dBFS (AES17: a
// full-scale sine reads 0 dBFS), and the channel picked is the right one.
func TestStdinWAVFromSox(t *testing.T) {
	sox := needTool(t, "sox", "sox")
	dir := t.TempDir()
	path := filepath.Join(dir, "tone.wav")
	// Left: 1 kHz at amplitude 0.5; right: 250 Hz at amplitude 0.25. 24-bit, 2 s, 48 kHz.
	out, err := exec.Command(sox, "-n", "-r", "48000", "-b", "24", "-c", "2", path,
		"synth", "2", "sine", "1000", "sine", "250", "remix", "1v0.5", "2v0.25").CombinedOutput()
	if err != nil {
		t.Fatalf("sox: %v: %s", err, out)
	}
	for _, tc := range []struct {
		channel int
		want    float64
	}{{1, 20 * math.Log10(0.5)}, {2, 20 * math.Log10(0.25)}} {
		f, err := os.Open(path)
		if err != nil {
			t.Fatal(err)
		}
		src, _ := NewReader(Config{Kind: KindStdin, Channel: tc.channel}, f, nil)
		format, err := src.Open(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		if format != (Format{SampleRate: 48000, Channels: 2, Channel: tc.channel, Sample: Int24}) {
			t.Errorf("format = %+v", format)
		}
		got, err := readAll(t, src, 1000, 1<<20)
		f.Close()
		if !isEOF(err) || len(got) != 96000 {
			t.Fatalf("read %d samples, %v; want 96000 and io.EOF", len(got), err)
		}
		if l := levelDBFS(got); math.Abs(l-tc.want) > 0.001 {
			t.Errorf("channel %d: level %.4f dBFS, want %.4f", tc.channel, l, tc.want)
		}
	}
}

// The WAV stream path agrees sample for sample with package wav reading the same bytes.
func TestStdinWAVMatchesWAVReader(t *testing.T) {
	var buf bytes.Buffer
	w, err := wav.NewWriter(&buf, wav.Format{SampleRate: 16000, Channels: 2, Encoding: wav.PCM16})
	if err != nil {
		t.Fatal(err)
	}
	x := signal(3000, 16000, 0.5)
	inter := make([]float32, 0, 6000)
	for _, v := range x {
		inter = append(inter, float32(v), float32(-v/2))
	}
	if err := w.Write(inter); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	data := buf.Bytes()
	wr, _ := wav.NewReader(bytes.NewReader(data))
	all := make([]float32, 6000)
	n, _ := wr.Read(all)
	want := make([]float32, n/2)
	for i := range want {
		want[i] = all[2*i+1]
	}
	src, _ := NewReader(Config{Kind: KindStdin, Channel: 2, FramesPerBuffer: 100}, bytes.NewReader(data), nil)
	if _, err := src.Open(context.Background()); err != nil {
		t.Fatal(err)
	}
	got, err := readAll(t, src, 333, 1<<20)
	if !isEOF(err) {
		t.Fatal(err)
	}
	sameSamples(t, got, want)

	src, _ = NewReader(Config{Kind: KindStdin, Channel: 3}, bytes.NewReader(data), nil)
	if _, err := src.Open(context.Background()); !errors.Is(err, ErrBadInput) || !strings.Contains(err.Error(), "capture.channel = 3") {
		t.Fatalf("Open with channel 3 of 2 = %v", err)
	}
	src, _ = NewReader(Config{Kind: KindStdin, SampleRate: 48000}, bytes.NewReader(data), nil)
	if _, err := src.Open(context.Background()); !errors.Is(err, ErrBadInput) || !strings.Contains(err.Error(), "16000 Hz") {
		t.Fatalf("Open with a rate that differs = %v", err)
	}
}
