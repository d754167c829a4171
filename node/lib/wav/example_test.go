package wav_test

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"log"
	"math"

	"github.com/leqnode/leqnode/node/lib/wav"
)

// Write one second of a 1 kHz sine at -6 dBFS as 24-bit stereo, then read it back block by
// block and measure its RMS level.
func Example() {
	var file bytes.Buffer // a pipe-like destination: the sizes stay "unknown"
	f := wav.Format{SampleRate: 48000, Channels: 2, Encoding: wav.PCM24}
	w, err := wav.NewWriter(&file, f)
	if err != nil {
		log.Fatal(err)
	}
	block := make([]float32, 2*480)
	for n := 0; n < 48000; n += 480 {
		for i := 0; i < 480; i++ {
			v := float32(0.5 * math.Sin(2*math.Pi*1000*float64(n+i)/48000))
			block[2*i], block[2*i+1] = v, v
		}
		if err := w.Write(block); err != nil {
			log.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		log.Fatal(err)
	}

	r, err := wav.NewReader(&file)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(r.Format(), "frames:", r.Frames())
	var sum float64
	var frames int
	buf := make([]float32, 2*1024)
	for {
		n, err := r.Read(buf)
		for i := 0; i < n; i += 2 {
			sum += float64(buf[i]) * float64(buf[i])
		}
		frames += n / 2
		if err == io.EOF {
			break
		}
		if err != nil {
			log.Fatal(err)
		}
	}
	// AES17: a sine of peak A reads 20 lg A dBFS; its mean square is A²/2.
	fmt.Printf("%d frames, %.2f dBFS\n", frames, 10*math.Log10(2*sum/float64(frames)))
	// Output:
	// 48000 Hz, 2 channels, PCM24 frames: -1
	// 48000 frames, -6.02 dBFS
}

// Errors wrap sentinels, so a caller can tell bad input from other failures.
func ExampleNewReader_errors() {
	_, err := wav.NewReader(bytes.NewReader([]byte("RIFF\x24\x00\x00\x00WAVEfmt \x10\x00\x00\x00\x07\x00\x01\x00\x40\x1f\x00\x00\x40\x1f\x00\x00\x01\x00\x08\x00data\x00\x00\x00\x00")))
	fmt.Println(errors.Is(err, wav.ErrUnsupported))
	fmt.Println(err)
	// Output:
	// true
	// unsupported WAV format: mu-law encoding (accepted: 16-, 24- or 32-bit signed integer PCM, 32-bit float; convert with sox -e signed-integer -b 24)
}
