package capture

import (
	"bytes"
	"context"
	"errors"
	"io"
	"math"
	"testing"

	"github.com/leqnode/leqnode/node/lib/wav"
)

// FuzzStdin feeds arbitrary bytes to the stdin source, detecting WAV or reading raw PCM of
// every encoding: it must never panic, never return (0, nil), never deliver a non-finite
// sample, and end with io.EOF or an error that wraps ErrBadInput.
func FuzzStdin(f *testing.F) {
	var w bytes.Buffer
	ww, _ := wav.NewWriter(&w, wav.Format{SampleRate: 8000, Channels: 2, Encoding: wav.PCM24})
	ww.Write([]float32{0.5, -0.5, 0.25, -0.25})
	ww.Close()
	f.Add(w.Bytes(), uint8(0))
	f.Add([]byte("RIFF\x24\x00\x00\x00WAVEfmt "), uint8(1))
	f.Add([]byte{0, 0, 0x80, 0x7F, 1, 2, 3}, uint8(4))
	f.Add([]byte{}, uint8(2))
	samples := []string{Int16, Int24, Int32, Int24in32, Float32}
	f.Fuzz(func(t *testing.T, data []byte, sel uint8) {
		cfg := Config{Kind: KindStdin, SampleRate: 8000, Sample: samples[int(sel)%len(samples)],
			Channels: 1 + int(sel/8)%3, FramesPerBuffer: 16}
		cfg.Channel = 1 + int(sel/32)%cfg.Channels
		src, err := NewReader(cfg, bytes.NewReader(data), nil)
		if err != nil {
			t.Fatal(err)
		}
		defer src.Close()
		if _, err := src.Open(context.Background()); err != nil {
			if !errors.Is(err, ErrBadInput) {
				t.Fatalf("Open: %v does not wrap ErrBadInput", err)
			}
			return
		}
		buf := make([]float32, 7)
		for range len(data) + 2 {
			n, err := src.Read(buf)
			if n == 0 && err == nil {
				t.Fatal("Read returned (0, nil)")
			}
			for _, v := range buf[:n] {
				if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
					t.Fatalf("non-finite sample %v", v)
				}
			}
			if err != nil {
				if !errors.Is(err, io.EOF) && !errors.Is(err, ErrBadInput) {
					t.Fatalf("Read: %v is neither io.EOF nor ErrBadInput", err)
				}
				return
			}
		}
		t.Fatal("the stream did not end")
	})
}
