package wav

import (
	"bytes"
	"io"
	"math"
	"testing"
)

// benchFile is one second of 48 kHz audio in format f.
func benchFile(b *testing.B, f Format) []byte {
	x := make([]float32, 48000*f.Channels)
	for i := range x {
		x[i] = float32(0.5 * math.Sin(float64(i)*0.01))
	}
	var buf bytes.Buffer
	w, err := NewWriter(&buf, f)
	if err != nil {
		b.Fatal(err)
	}
	if err := w.Write(x); err != nil {
		b.Fatal(err)
	}
	if err := w.Close(); err != nil {
		b.Fatal(err)
	}
	return buf.Bytes()
}

// BenchmarkRead decodes one second of 48 kHz audio per iteration in blocks of 480 frames and
// reports the cost per sample.
func BenchmarkRead(b *testing.B) {
	for _, f := range []Format{
		{SampleRate: 48000, Channels: 1, Encoding: PCM16},
		{SampleRate: 48000, Channels: 2, Encoding: PCM24},
		{SampleRate: 48000, Channels: 2, Encoding: PCM32},
		{SampleRate: 48000, Channels: 1, Encoding: Float32},
	} {
		b.Run(f.String(), func(b *testing.B) {
			file := benchFile(b, f)
			buf := make([]float32, 480*f.Channels)
			src := bytes.NewReader(file)
			b.SetBytes(int64(len(file)))
			b.ReportAllocs()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				src.Reset(file)
				r, err := NewReader(src)
				if err != nil {
					b.Fatal(err)
				}
				for {
					_, err := r.Read(buf)
					if err == io.EOF {
						break
					}
					if err != nil {
						b.Fatal(err)
					}
				}
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(48000*f.Channels), "ns/sample")
		})
	}
}

// BenchmarkWrite encodes one second of 48 kHz stereo audio as 24-bit PCM per iteration.
func BenchmarkWrite(b *testing.B) {
	f := Format{SampleRate: 48000, Channels: 2, Encoding: PCM24}
	x := make([]float32, 480*2)
	for i := range x {
		x[i] = float32(0.5 * math.Sin(float64(i)*0.01))
	}
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		w, err := NewWriter(io.Discard, f)
		if err != nil {
			b.Fatal(err)
		}
		for j := 0; j < 100; j++ {
			if err := w.Write(x); err != nil {
				b.Fatal(err)
			}
		}
		if err := w.Close(); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/96000, "ns/sample")
}
