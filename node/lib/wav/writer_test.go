package wav

import (
	"bytes"
	"encoding/binary"
	"errors"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
)

// encode writes samples in format f, to a file (seekable, sizes patched on Close) or to a
// pipe-like buffer (not seekable, sizes unknown), and returns the bytes.
func encode(t testing.TB, f Format, samples []float32, seekable bool) []byte {
	t.Helper()
	var out io.Writer
	var file *os.File
	var buf bytes.Buffer
	if seekable {
		var err error
		file, err = os.Create(filepath.Join(t.TempDir(), "x.wav"))
		if err != nil {
			t.Fatal(err)
		}
		defer file.Close()
		out = file
	} else {
		out = &buf
	}
	w, err := NewWriter(out, f)
	if err != nil {
		t.Fatal(err)
	}
	// Write in uneven blocks of whole frames.
	for i, step := 0, 0; i < len(samples); step++ {
		n := min(len(samples)-i, f.Channels*(1+step%5*37))
		if err := w.Write(samples[i : i+n]); err != nil {
			t.Fatal(err)
		}
		i += n
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if !seekable {
		return buf.Bytes()
	}
	b, err := os.ReadFile(file.Name())
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// exactSamples returns random samples that the encoding represents exactly: multiples of
// 2^-(bits-1) in [-1, 1) for integers (with both extremes present), any finite float32 for float.
func exactSamples(e Encoding, n int, rng *rand.Rand) []float32 {
	s := make([]float32, n)
	for i := range s {
		switch e {
		case Float32:
			s[i] = float32(rng.NormFloat64() * 0.3)
		case PCM32:
			// float32 holds 24 significant bits: keep the low bits clear.
			s[i] = float32(float64(int32(rng.Uint32())&^0xFF) / 2147483648)
		default:
			bits := e.Bits()
			k := rng.Int64N(1<<bits) - 1<<(bits-1)
			s[i] = float32(math.Ldexp(float64(k), 1-bits))
		}
	}
	if e != Float32 && n >= 2 {
		s[0], s[1] = -1, float32(1-math.Ldexp(1, 1-e.Bits()))
	}
	return s
}

// TestRoundTrip writes and reads back every encoding and channel count, to a seekable file
// and to a stream, and expects the samples bit for bit.
func TestRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, enc := range []Encoding{PCM16, PCM24, PCM32, Float32} {
		for _, ch := range []int{1, 2, 3, 6, 8} {
			for _, seekable := range []bool{true, false} {
				f := Format{SampleRate: []int{8000, 44100, 48000, 96000, 192000}[ch%5], Channels: ch, Encoding: enc}
				name := f.String()
				if !seekable {
					name += " streamed"
				}
				t.Run(name, func(t *testing.T) {
					frames := 1001 // odd: a 24-bit mono file needs a pad byte
					in := exactSamples(enc, frames*ch, rng)
					file := encode(t, f, in, seekable)
					r, err := NewReader(bytes.NewReader(file))
					if err != nil {
						t.Fatal(err)
					}
					if r.Format() != f {
						t.Errorf("Format = %v, want %v", r.Format(), f)
					}
					wantFrames := int64(frames)
					if !seekable {
						wantFrames = -1
					}
					if r.Frames() != wantFrames {
						t.Errorf("Frames = %d, want %d", r.Frames(), wantFrames)
					}
					out, err := readAll(t, r, 480)
					if err != nil {
						t.Fatal(err)
					}
					if len(out) != len(in) {
						t.Fatalf("read %d samples, wrote %d", len(out), len(in))
					}
					for i := range in {
						if math.Float32bits(in[i]) != math.Float32bits(out[i]) {
							t.Fatalf("sample %d: wrote %v, read %v", i, in[i], out[i])
						}
					}
					if seekable {
						// The RIFF size is the file size minus 8, padded to even (RIFF rules).
						if got := binary.LittleEndian.Uint32(file[4:]); int(got) != len(file)-8 || len(file)%2 != 0 {
							t.Errorf("RIFF size %d for a file of %d bytes", got, len(file))
						}
					}
				})
			}
		}
	}
}

// TestWriterValidBits writes 24-bit data in 32-bit containers with an extensible header.
func TestWriterValidBits(t *testing.T) {
	f := Format{SampleRate: 48000, Channels: 1, Encoding: PCM32, ValidBits: 24}
	file := encode(t, f, []float32{0.5, -0.25}, true)
	if tag := binary.LittleEndian.Uint16(file[12+36+8:]); tag != tagExtensible {
		t.Errorf("format tag 0x%04X, want WAVE_FORMAT_EXTENSIBLE", tag)
	}
	r, err := NewReader(bytes.NewReader(file))
	if err != nil {
		t.Fatal(err)
	}
	if r.Format() != f {
		t.Errorf("Format = %+v, want %+v", r.Format(), f)
	}
}

func TestWriterQuantizeAndClip(t *testing.T) {
	f := Format{SampleRate: 8000, Channels: 1, Encoding: PCM16}
	in := []float32{1.0, -1.0, 2, -3, 0.4 / 32768, 0.6 / 32768, -0.6 / 32768, 1.5 / 32768}
	want := []int16{32767, -32768, 32767, -32768, 0, 1, -1, 2}
	var buf bytes.Buffer
	w, err := NewWriter(&buf, f)
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Write(in); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if w.Clipped() != 3 {
		t.Errorf("Clipped = %d, want 3", w.Clipped())
	}
	data := buf.Bytes()[buf.Len()-2*len(want):]
	for i, v := range want {
		if got := int16(binary.LittleEndian.Uint16(data[2*i:])); got != v {
			t.Errorf("sample %d (%v) encoded as %d, want %d", i, in[i], got, v)
		}
	}
}

func TestWriterErrors(t *testing.T) {
	if _, err := NewWriter(io.Discard, Format{SampleRate: 48000, Channels: 0, Encoding: PCM16}); !errors.Is(err, ErrBadFormat) {
		t.Errorf("zero channels: %v", err)
	}
	if _, err := NewWriter(io.Discard, Format{SampleRate: 4000, Channels: 1, Encoding: PCM16}); !errors.Is(err, ErrUnsupported) {
		t.Errorf("4 kHz: %v", err)
	}
	if _, err := NewWriter(io.Discard, Format{SampleRate: 48000, Channels: 1}); !errors.Is(err, ErrUnsupported) {
		t.Errorf("no encoding: %v", err)
	}
	w, err := NewWriter(io.Discard, Format{SampleRate: 48000, Channels: 2, Encoding: Float32})
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Write([]float32{1, 2, 3}); err == nil {
		t.Error("Write of a partial frame: no error")
	}
	if err := w.Write([]float32{0, float32(math.NaN())}); !errors.Is(err, ErrBadSample) {
		t.Errorf("NaN: %v", err)
	}
	if err := w.Write([]float32{float32(math.Inf(1)), 0}); !errors.Is(err, ErrBadSample) {
		t.Errorf("Inf: %v", err)
	}
	if w.Frames() != 0 {
		t.Errorf("refused blocks were counted: %d frames", w.Frames())
	}
}

// TestWriterRF64 lowers the size limit so that a small file takes the RF64 path of a file
// beyond 4 GiB (EBU Tech 3306: "RF64" signature, 0xFFFFFFFF sizes, ds64 chunk in place of the
// reserved JUNK chunk).
func TestWriterRF64(t *testing.T) {
	path := filepath.Join(t.TempDir(), "big.wav")
	file, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer file.Close()
	f := Format{SampleRate: 48000, Channels: 1, Encoding: Float32}
	w, err := NewWriter(file, f)
	if err != nil {
		t.Fatal(err)
	}
	w.limit = 100
	in := exactSamples(Float32, 1000, rand.New(rand.NewPCG(3, 4)))
	if err := w.Write(in); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	b, _ := os.ReadFile(path)
	if string(b[:4]) != "RF64" || string(b[12:16]) != "ds64" {
		t.Fatalf("header starts %q ... %q", b[:4], b[12:16])
	}
	if got := binary.LittleEndian.Uint64(b[28:]); got != 4000 {
		t.Errorf("ds64 data size %d, want 4000", got)
	}
	r, err := NewReader(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	if r.Frames() != 1000 {
		t.Errorf("Frames = %d, want 1000", r.Frames())
	}
	out, err := readAll(t, r, 333)
	if err != nil || len(out) != len(in) {
		t.Fatalf("read %d samples, err %v", len(out), err)
	}
}

// TestWriterUnclosed: a file whose writer never reached Close (power cut) still reads, as a
// stream of unknown length.
func TestWriterUnclosed(t *testing.T) {
	path := filepath.Join(t.TempDir(), "cut.wav")
	file, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	w, err := NewWriter(file, Format{SampleRate: 48000, Channels: 1, Encoding: PCM24})
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Write([]float32{0.5, 0.25, -0.5}); err != nil {
		t.Fatal(err)
	}
	file.Close()
	b, _ := os.ReadFile(path)
	r, err := NewReader(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	out, err := readAll(t, r, 16)
	if err != nil || len(out) != 3 || r.Frames() != -1 {
		t.Errorf("read %v, err %v, Frames %d", out, err, r.Frames())
	}
}

func TestWriteNoAllocs(t *testing.T) {
	w, err := NewWriter(io.Discard, Format{SampleRate: 48000, Channels: 1, Encoding: PCM24})
	if err != nil {
		t.Fatal(err)
	}
	block := make([]float32, 480)
	if err := w.Write(block); err != nil {
		t.Fatal(err)
	}
	if a := testing.AllocsPerRun(100, func() { _ = w.Write(block) }); a != 0 {
		t.Errorf("Write allocates %v times per call", a)
	}
}
