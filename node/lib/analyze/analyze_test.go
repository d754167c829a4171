package analyze

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"math"
	"testing"
	"time"

	"github.com/leqnode/leqnode/dsp"
	"github.com/leqnode/leqnode/node/lib/wav"
)

// recording returns a WAV stream of n frames of a 1 kHz sine of peak amp on channel 1 and
// silence on channel 2, at 44.1 kHz.
func recording(t testing.TB, n int, amp float64) *wav.Reader {
	t.Helper()
	var buf bytes.Buffer
	w, err := wav.NewWriter(&buf, wav.Format{SampleRate: 44100, Channels: 2, Encoding: wav.Float32})
	if err != nil {
		t.Fatal(err)
	}
	x := make([]float32, 2*n)
	for i := range n {
		x[2*i] = float32(amp * math.Sin(2*math.Pi*1000*float64(i)/44100))
	}
	if err := w.Write(x); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	r, err := wav.NewReader(&buf)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

func TestIntervals(t *testing.T) {
	// Interval k starts at sample round(k·D·fs) (decisions: intervals that are not a whole
	// number of samples); 0.3 s at 44.1 kHz is 13230 samples exactly, 0.125 s is 5512.5.
	for _, d := range []time.Duration{300 * time.Millisecond, 125 * time.Millisecond} {
		const n = 44100 + 1000
		var got []Interval
		var durations []float64
		sum, err := Run(context.Background(), recording(t, n, 0.1), Options{Channel: 1, Interval: d, SensitivityDBFS: -26}, func(iv Interval) error {
			got = append(got, iv)
			durations = append(durations, iv.Result.Duration)
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		fs := 44100.0
		var total float64
		for k, iv := range got {
			if want := math.Round(float64(k)*d.Seconds()*fs) / fs; math.Abs(iv.Offset-want) > 1e-12 {
				t.Errorf("%v: interval %d at %v s, want %v", d, k, iv.Offset, want)
			}
			total += durations[k]
		}
		if math.Abs(total-float64(n)/fs) > 1e-9 || sum.Frames != n || math.Abs(sum.Result.Duration-float64(n)/fs) > 1e-9 {
			t.Errorf("%v: intervals add up to %v s, summary %v s over %d frames, want %v s", d, total, sum.Result.Duration, sum.Frames, float64(n)/fs)
		}
		// The partial last interval keeps its true length.
		if last := durations[len(durations)-1]; last >= d.Seconds() {
			t.Errorf("%v: last interval %v s is not partial", d, last)
		}
	}
}

func TestErrors(t *testing.T) {
	if _, err := Run(context.Background(), recording(t, 100, 0.1), Options{Channel: 3, Interval: time.Second}, func(Interval) error { return nil }); err == nil {
		t.Error("channel 3 of a 2-channel recording accepted")
	}
	if _, err := Run(context.Background(), recording(t, 100, 0.1), Options{Channel: 1, Interval: time.Nanosecond}, func(Interval) error { return nil }); err == nil {
		t.Error("an interval shorter than a sample accepted")
	}
	// A stream that ends before its first sample (unknown length: the reader cannot refuse it
	// up front) gives ErrNoSamples.
	var buf bytes.Buffer
	w, _ := wav.NewWriter(&buf, wav.Format{SampleRate: 44100, Channels: 1, Encoding: wav.PCM16})
	w.Write([]float32{0.5})
	w.Close()
	hdr := buf.Bytes()[:buf.Len()-2] // the header of a stream, without its one sample
	r, err := wav.NewReader(bytes.NewReader(hdr))
	switch {
	case err != nil && !errors.Is(err, wav.ErrNoData) && !errors.Is(err, wav.ErrTruncated):
		t.Errorf("header without samples: %v", err)
	case err == nil:
		if _, err := Run(context.Background(), r, Options{Channel: 1, Interval: time.Second}, func(Interval) error { return nil }); !errors.Is(err, ErrNoSamples) {
			t.Errorf("stream without samples: %v", err)
		}
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Run(ctx, recording(t, 44100, 0.1), Options{Channel: 1, Interval: time.Second}, func(Interval) error { return nil }); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled run: %v", err)
	}
}

func ExampleRun() {
	// One second of a 1 kHz sine at 94 dB SPL for a microphone of sensitivity -26 dBFS: the
	// sine's peak is 10^(-26/20) of full scale (AES17: a full-scale sine reads 0 dBFS).
	var buf bytes.Buffer
	w, _ := wav.NewWriter(&buf, wav.Format{SampleRate: 48000, Channels: 1, Encoding: wav.Float32})
	x := make([]float32, 2*48000)
	for i := range x {
		x[i] = float32(math.Pow(10, -26.0/20) * math.Sin(2*math.Pi*1000*float64(i)/48000))
	}
	w.Write(x)
	w.Close()
	r, _ := wav.NewReader(&buf)
	sum, err := Run(context.Background(), r, Options{Channel: 1, Interval: time.Second, SensitivityDBFS: -26, Bands: dsp.Third},
		func(iv Interval) error {
			fmt.Printf("%.0f s: LAeq %.1f dB\n", iv.Offset, iv.Result.LAeq)
			return nil
		})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("summary: LAeq %.1f dB, LAE %.1f dB\n", sum.Result.LAeq, sum.Result.LAE)
	// Output:
	// 0 s: LAeq 94.0 dB
	// 1 s: LAeq 94.0 dB
	// summary: LAeq 94.0 dB, LAE 97.0 dB
}
