package capture

import (
	"context"
	"math"
	"testing"
	"time"

	"github.com/leqnode/leqnode/node/lib/scene"
)

func TestSyntheticDeterministicAndBlockFree(t *testing.T) {
	read := func(block int, fpb int) []float32 {
		src, err := New(Config{Kind: KindSynthetic, Seed: 7, SampleRate: 16000, DurationSeconds: 1.5, FramesPerBuffer: fpb}, nil)
		if err != nil {
			t.Fatal(err)
		}
		f, err := src.Open(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		if f != (Format{SampleRate: 16000, Channels: 1, Channel: 1, Sample: Float32}) {
			t.Errorf("format = %+v", f)
		}
		got, err := readAll(t, src, block, 1<<20)
		if !isEOF(err) {
			t.Fatalf("ended with %v, want io.EOF", err)
		}
		src.Close()
		return got
	}
	a, b := read(1000, 0), read(77, 129)
	if len(a) != 24000 {
		t.Fatalf("1.5 s at 16 kHz gave %d samples, want 24000", len(a))
	}
	sameSamples(t, b, a)
	// The same scene straight from package scene.
	sc, err := scene.New(scene.Config{SampleRate: 16000, Seed: 7})
	if err != nil {
		t.Fatal(err)
	}
	want := make([]float32, 24000)
	sc.Read(want)
	sameSamples(t, a, want)
}

// The scene's calibrator tone passes through unchanged: 94 dB SPL on a microphone of
// sensitivity -26 dBFS (the level a 94 dB SPL, 1 kHz sine produces, as MEMS data sheets state
// it) reads 94 - 94 + (-26) = -26 dBFS (AES17 level of a sine).
func TestSyntheticCalibratorLevel(t *testing.T) {
	src, _ := New(Config{Kind: KindSynthetic, Seed: 1, CalibratorSeconds: 3, DurationSeconds: 2}, nil)
	if _, err := src.Open(context.Background()); err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	got, _ := readAll(t, src, 4800, 96000)
	// Whole periods from 0.5 s to 1.5 s, clear of the 0.25 s fade-in.
	if l := levelDBFS(got[24000:72000]); math.Abs(l-(-26)) > 0.01 {
		t.Fatalf("calibrator reads %.3f dBFS, want -26", l)
	}
}

// In real time the scene is never ahead of the clock (counts against elapsed time, see
// TestFileRealtime), and cancelling the context ends it.
func TestSyntheticRealtime(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	src, _ := New(Config{Kind: KindSynthetic, SampleRate: 8000, Realtime: true, FramesPerBuffer: 400}, nil)
	start := time.Now()
	if _, err := src.Open(ctx); err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	buf := make([]float32, 400)
	total := 0
	for total < 2400 {
		n, err := src.Read(buf)
		if err != nil {
			t.Fatal(err)
		}
		total += n
		if allowed := time.Since(start).Seconds() * 8000; float64(total) > allowed+1 {
			t.Fatalf("%d samples after %.3f s: ahead of real time", total, time.Since(start).Seconds())
		}
	}
	cancel()
	if _, err := src.Read(buf); err != context.Canceled {
		t.Fatalf("Read after cancel = %v", err)
	}
}
