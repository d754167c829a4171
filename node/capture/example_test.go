package capture_test

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"log"
	"log/slog"

	"github.com/leqnode/leqnode/node/capture"
)

// A source is configured, validated, opened, read until it ends and closed. Here the
// invented street scene, two seconds of it as fast as possible.
func ExampleNew() {
	cfg := capture.Config{Kind: capture.KindSynthetic, Seed: 1, SampleRate: 48000, DurationSeconds: 2}
	src, err := capture.New(cfg, slog.New(slog.DiscardHandler))
	if err != nil {
		log.Fatal(err)
	}
	defer src.Close()
	format, err := src.Open(context.Background())
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(src.Describe())
	fmt.Println(format)
	buf := make([]float32, 4800)
	total := 0
	for {
		n, err := src.Read(buf)
		total += n
		if errors.Is(err, io.EOF) {
			break
		}
		if errors.Is(err, capture.ErrDeviceLost) {
			// A live device: close, record a gap, open again after a backoff.
			log.Fatal(err)
		}
		if err != nil {
			log.Fatal(err)
		}
	}
	fmt.Println(total, "samples,", src.Dropped(), "dropped")
	// Output:
	// synthetic: street scene seed 1 @48000 Hz, as fast as possible
	// 48000 Hz, channel 1 of 1, float32
	// 96000 samples, 0 dropped
}

// Raw PCM from any io.Reader: here two stereo frames of 16-bit samples, of which the right
// channel is measured.
func ExampleNewReader() {
	var raw bytes.Buffer
	for _, v := range []int16{100, 16384, -100, -32768} { // L R L R
		binary.Write(&raw, binary.LittleEndian, v)
	}
	cfg := capture.Config{Kind: capture.KindStdin, StdinFormat: capture.StdinRaw,
		SampleRate: 48000, Sample: capture.Int16, Channels: 2, Channel: 2}
	src, err := capture.NewReader(cfg, &raw, nil)
	if err != nil {
		log.Fatal(err)
	}
	defer src.Close()
	if _, err := src.Open(context.Background()); err != nil {
		log.Fatal(err)
	}
	buf := make([]float32, 10)
	n, err := src.Read(buf)
	fmt.Println(buf[:n], err)
	_, err = src.Read(buf)
	fmt.Println(err)
	// Output:
	// [0.5 -1] <nil>
	// EOF
}

func ExampleConfig_Validate() {
	cfg := capture.Config{Kind: capture.KindArecord, SampleRate: 44000 * 10, Channels: 2, Channel: 3}
	for _, err := range cfg.Validate() {
		fmt.Println(err)
	}
	// Output:
	// sample_rate = 440000: out of range; use 0 (the default) or 8000 to 192000 Hz
	// channel = 3: beyond the 2 channel(s) opened; use 1 to 2 or raise channels
}
