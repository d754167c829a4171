package capture

import (
	"errors"
	"math"
	"testing"
)

// Two's complement full-scale scaling (AES17 convention: full scale ±1.0 is the largest
// code's magnitude; the most negative code reads exactly -1.0), computed by hand below.
func TestDecodeKnownCodes(t *testing.T) {
	tests := []struct {
		sample string
		bytes  []byte
		want   float32
	}{
		{Int16, []byte{0x00, 0x80}, -1},                   // -32768/32768
		{Int16, []byte{0xFF, 0x7F}, 32767.0 / 32768},      // largest positive code
		{Int16, []byte{0x00, 0x40}, 0.5},                  // 16384/32768
		{Int16, []byte{0xFF, 0xFF}, -1.0 / 32768},         // -1
		{Int24, []byte{0x00, 0x00, 0x80}, -1},             // -2^23/2^23
		{Int24, []byte{0x00, 0x00, 0x40}, 0.5},            // 2^22/2^23
		{Int24, []byte{0xFF, 0xFF, 0xFF}, -1.0 / 8388608}, // -1
		{Int32, []byte{0x00, 0x00, 0x00, 0x80}, -1},
		{Int32, []byte{0x00, 0x00, 0x00, 0x40}, 0.5},
		{Int24in32, []byte{0x00, 0x00, 0x00, 0xC0}, -0.5}, // 24-bit data in the top bytes
		{Int24in32, []byte{0x00, 0x01, 0x00, 0x00}, 1.0 / 8388608},
		{Float32, []byte{0x00, 0x00, 0x00, 0x3F}, 0.5}, // IEEE 754 0x3F000000
		{Float32, []byte{0x00, 0x00, 0xC0, 0xBF}, -1.5},
	}
	for _, tc := range tests {
		l := newLayout(tc.sample, 1, 1)
		dst := make([]float32, 1)
		n, err := l.decode(dst, tc.bytes, 0)
		if err != nil || n != 1 || dst[0] != tc.want {
			t.Errorf("%s % x: got (%d, %v) %v, want %v", tc.sample, tc.bytes, n, err, dst[0], tc.want)
		}
	}
}

func TestDecodePicksChannel(t *testing.T) {
	for _, sample := range []string{Int16, Int24, Int32, Int24in32, Float32} {
		for _, shape := range []struct{ channels, ch int }{{1, 0}, {2, 0}, {2, 1}, {4, 3}} {
			x := signal(100, 48000, 0.5)
			raw, want := encode(x, sample, shape.channels, shape.ch)
			l := newLayout(sample, shape.channels, shape.ch+1)
			got := make([]float32, 100)
			n, err := l.decode(got, raw, 0)
			if err != nil || n != 100 {
				t.Fatalf("%s %v: decode = %d, %v", sample, shape, n, err)
			}
			sameSamples(t, got, want)
		}
	}
}

func TestDecodeRejectsNonFiniteFloat(t *testing.T) {
	nan := math.Float32bits(float32(math.NaN()))
	raw := []byte{0, 0, 0, 0, byte(nan), byte(nan >> 8), byte(nan >> 16), byte(nan >> 24)}
	l := newLayout(Float32, 1, 1)
	dst := make([]float32, 2)
	n, err := l.decode(dst, raw, 10)
	if n != 1 || !errors.Is(err, ErrBadInput) {
		t.Fatalf("decode = %d, %v; want 1 sample then an ErrBadInput", n, err)
	}
	t.Log(err)
}

func BenchmarkDecodeInt32Stereo(b *testing.B) {
	raw, _ := encode(signal(1024, 48000, 0.5), Int32, 2, 1)
	l := newLayout(Int32, 2, 2)
	dst := make([]float32, 1024)
	b.SetBytes(int64(len(raw)))
	for b.Loop() {
		l.decode(dst, raw, 0)
	}
}
