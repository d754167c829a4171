package wav

import (
	"bytes"
	"encoding/binary"
	"errors"
	"io"
	"math"
	"strings"
	"testing"
)

// fuzzSeeds returns valid files of every encoding and header style, and truncations of them.
func fuzzSeeds() [][]byte {
	one := math.Float32bits(0.5)
	valid := [][]byte{
		minimal16(),
		riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 2, 44100, 6, 24)), ck("data", pcm24(1, -1, 8388607, -8388608))),
		riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 1, 96000, 4, 32)), ck("data", pcm32(1, -1, math.MaxInt32))),
		riffFile("RIFF", -1, ck("fmt ", append(fmtBody(3, 1, 48000, 4, 32), 0, 0)), ck("fact", pcm32(2)), ck("data", f32bits(one, 0))),
		riffFile("RIFF", -1, ck("fmt ", fmtExtBody(3, 48000, 32, 24, 0, 1)), ck("data", pcm32(1, 2, 3, 4, 5, 6))),
		riffFile("RIFF", -1, ck("fmt ", fmtExtBody(2, 8000, 32, 32, 3, 3)), ck("data", f32bits(one, one))),
		riffFile("RIFF", -1, ck("LIST", []byte("INFOabc")), ck("fmt ", fmtBody(1, 1, 8000, 2, 16)), chunk{id: "data", body: pcm16(1, 2, 3), size: 0xFFFFFFFF}),
		riffFile("RF64", 0xFFFFFFFF, ck("ds64", make([]byte, 28)), ck("fmt ", fmtBody(1, 1, 8000, 2, 16)), chunk{id: "data", body: pcm16(1), size: 0xFFFFFFFF}),
		riffFile("RIFF", -1, ck("fmt ", fmtBody(3, 1, 48000, 4, 32)), ck("data", f32bits(one, 0x7FC00000))),
		riffFile("RIFF", -1, ck("fmt ", fmtBody(7, 1, 8000, 1, 8)), ck("data", []byte{1, 2, 3})),
	}
	seeds := append([][]byte(nil), valid...)
	for _, v := range valid[:4] {
		for _, n := range []int{0, 4, 11, 12, 19, 20, 35, 43, 44, len(v) - 1} {
			if n <= len(v) {
				seeds = append(seeds, v[:n])
			}
		}
	}
	return seeds
}

// FuzzReader: whatever the input, NewReader and Read never panic, never loop forever (each
// Read that returns no error consumes at least one frame of input), deliver whole frames of
// finite samples, and fail only with the package's sentinel errors in one-line messages.
// Memory is bounded by construction (no allocation is sized from a header field); see
// TestLyingHeaderMemory.
func FuzzReader(f *testing.F) {
	for _, s := range fuzzSeeds() {
		f.Add(s, uint8(7))
	}
	sentinels := []error{ErrNotWAV, ErrTruncated, ErrUnsupported, ErrBadFormat, ErrNoData, ErrBadSample}
	check := func(t *testing.T, err error) {
		for _, s := range sentinels {
			if errors.Is(err, s) {
				if strings.ContainsAny(err.Error(), "\n\r") {
					t.Fatalf("multi-line error %q", err)
				}
				return
			}
		}
		t.Fatalf("error %v wraps no sentinel", err)
	}
	f.Fuzz(func(t *testing.T, data []byte, block uint8) {
		r, err := NewReader(bytes.NewReader(data))
		if err != nil {
			check(t, err)
			return
		}
		fm := r.Format()
		if err := fm.Validate(); err != nil {
			t.Fatalf("accepted an invalid format %+v: %v", fm, err)
		}
		buf := make([]float32, max(int(block), fm.Channels))
		for calls := 0; ; calls++ {
			if calls > len(data)+1 {
				t.Fatalf("%d Read calls on %d bytes of input", calls, len(data))
			}
			n, err := r.Read(buf)
			if n%fm.Channels != 0 {
				t.Fatalf("Read returned %d samples of %d channels", n, fm.Channels)
			}
			for _, v := range buf[:n] {
				if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
					t.Fatalf("delivered a non-finite sample %v", v)
				}
				if fm.Encoding != Float32 && (v < -1 || v > 1) {
					t.Fatalf("integer sample %v outside full scale", v)
				}
			}
			if err == io.EOF {
				return
			}
			if err != nil {
				check(t, err)
				return
			}
		}
	})
}

// FuzzRoundTrip: any finite samples written by Writer read back as the nearest step of the
// encoding (exactly, for float).
func FuzzRoundTrip(f *testing.F) {
	f.Add([]byte{0, 0, 0x80, 0x3F, 0, 0, 0x80, 0xBF}, uint8(0), uint8(1))
	f.Add([]byte{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12}, uint8(1), uint8(3))
	f.Add([]byte{0xFF, 0xFF, 0x7F, 0x7F}, uint8(3), uint8(1))
	f.Fuzz(func(t *testing.T, raw []byte, enc, ch uint8) {
		fm := Format{SampleRate: 48000, Channels: int(ch%8) + 1, Encoding: Encoding(enc%4) + 1}
		var in []float32
		for i := 0; i+4 <= len(raw); i += 4 {
			v := math.Float32frombits(binary.LittleEndian.Uint32(raw[i:]))
			if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
				v = 0
			}
			in = append(in, v)
		}
		in = in[:len(in)/fm.Channels*fm.Channels]
		if len(in) == 0 {
			return
		}
		var buf bytes.Buffer
		w, err := NewWriter(&buf, fm)
		if err != nil {
			t.Fatal(err)
		}
		if err := w.Write(in); err != nil {
			t.Fatal(err)
		}
		if err := w.Close(); err != nil {
			t.Fatal(err)
		}
		r, err := NewReader(&buf)
		if err != nil {
			t.Fatal(err)
		}
		out := make([]float32, len(in))
		n, err := r.Read(out)
		if err != nil || n != len(in) {
			t.Fatalf("read %d of %d samples: %v", n, len(in), err)
		}
		step := math.Ldexp(1, 1-fm.Encoding.Bits())
		for i := range in {
			want := float64(in[i])
			if fm.Encoding != Float32 {
				want = max(-1, min(1-step, math.Round(want/step)*step))
			}
			tol := 0.0
			if fm.Encoding == PCM32 {
				tol = math.Abs(want) * 0x1p-24 // float32 holds 24 significant bits
			}
			if math.Abs(float64(out[i])-want) > tol {
				t.Fatalf("sample %d: wrote %v, read %v, want %v", i, in[i], out[i], want)
			}
		}
	})
}
