package capture

import (
	"bytes"
	"context"
	"io"
	"testing"
)

// endless repeats its data forever, so allocation counts see only steady-state reads.
type endless struct {
	data []byte
	off  int
}

func (e *endless) Read(p []byte) (int, error) {
	n := copy(p, e.data[e.off:])
	e.off = (e.off + n) % len(e.data)
	return n, nil
}

// Reading a block allocates nothing on the stream, file and synthetic sources (common
// practice for a loop that runs for months at audio rate: no garbage per block).
func TestReadDoesNotAllocate(t *testing.T) {
	raw, _ := encode(signal(4096, 48000, 0.5), Int32, 2, 1)
	path := writeWAV(t, signal(48000*2, 48000, 0.5), 48000)
	tests := []struct {
		name string
		cfg  Config
		in   io.Reader
	}{
		{"stdin raw", Config{Kind: KindStdin, SampleRate: 48000, Sample: Int32, Channels: 2, Channel: 2}, &endless{data: raw}},
		{"file", Config{Kind: KindFile, File: path}, nil},
		{"synthetic", Config{Kind: KindSynthetic}, nil},
	}
	for _, tc := range tests {
		src, err := NewReader(tc.cfg, tc.in, nil)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := src.Open(context.Background()); err != nil {
			t.Fatal(err)
		}
		buf := make([]float32, 480)
		src.Read(buf)
		if a := testing.AllocsPerRun(50, func() {
			if _, err := src.Read(buf); err != nil {
				t.Fatal(err)
			}
		}); a != 0 {
			t.Errorf("%s: %v allocations per Read", tc.name, a)
		}
		src.Close()
	}
}

// BenchmarkStdinRaw reads one second of 48 kHz stereo int32 PCM from memory through the stdin
// source, channel 2.
func BenchmarkStdinRaw(b *testing.B) {
	raw, _ := encode(signal(48000, 48000, 0.5), Int32, 2, 1)
	buf := make([]float32, 1024)
	b.SetBytes(int64(len(raw)))
	for b.Loop() {
		src, _ := NewReader(Config{Kind: KindStdin, SampleRate: 48000, Sample: Int32, Channels: 2, Channel: 2}, bytes.NewReader(raw), nil)
		src.Open(context.Background())
		for {
			if _, err := src.Read(buf); err != nil {
				break
			}
		}
	}
}
