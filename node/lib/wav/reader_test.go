package wav

import (
	"bytes"
	"encoding/binary"
	"errors"
	"io"
	"math"
	"runtime"
	"strings"
	"testing"
	"testing/iotest"
)

// readAll reads every sample with blocks of the given number of samples.
func readAll(t testing.TB, r *Reader, block int) ([]float32, error) {
	t.Helper()
	var out []float32
	buf := make([]float32, block)
	for i := 0; ; i++ {
		if i > 1<<24 {
			t.Fatal("Read does not end")
		}
		n, err := r.Read(buf)
		if n%r.Format().Channels != 0 {
			t.Fatalf("Read returned %d samples, not whole frames of %d", n, r.Format().Channels)
		}
		out = append(out, buf[:n]...)
		if err == io.EOF {
			return out, nil
		}
		if err != nil {
			return out, err
		}
		if n == 0 {
			t.Fatal("Read returned 0, nil")
		}
	}
}

// TestScaling checks the integer full-scale convention: a b-bit sample k reads k / 2^(b-1)
// (common practice: "integer full scale is ±1.0", as sox and most audio libraries scale).
func TestScaling(t *testing.T) {
	tests := []struct {
		name string
		fmt  []byte
		data []byte
		want []float32
	}{
		{"PCM16", fmtBody(1, 1, 48000, 2, 16), pcm16(0, 1, -1, 16384, -32768, 32767),
			[]float32{0, 1.0 / 32768, -1.0 / 32768, 0.5, -1, 32767.0 / 32768}},
		{"PCM24", fmtBody(1, 1, 48000, 3, 24), pcm24(0, 1, -1, 4194304, -8388608, 8388607),
			[]float32{0, 1.0 / 8388608, -1.0 / 8388608, 0.5, -1, float32(8388607.0 / 8388608)}},
		{"PCM32", fmtBody(1, 1, 48000, 4, 32), pcm32(0, 256, -256, 1<<30, math.MinInt32, math.MaxInt32),
			[]float32{0, 256.0 / 2147483648, -256.0 / 2147483648, 0.5, -1, 1}},
		{"Float32", fmtBody(3, 1, 48000, 4, 32), f32bits(0, math.Float32bits(0.25), math.Float32bits(-1.5), 0x80000000),
			[]float32{0, 0.25, -1.5, float32(math.Copysign(0, -1))}},
		// 24-bit data left-justified in 32-bit containers (extensible, 24 valid bits), as I2S MEMS
		// microphones deliver it: scaled by the container, so 0x400000 << 8 reads 0.5.
		{"PCM32 valid 24", fmtExtBody(1, 48000, 32, 24, 0, 1), pcm32(0x400000<<8, -0x800000<<8),
			[]float32{0.5, -1}},
		{"PCM16 extensible", fmtExtBody(1, 48000, 16, 16, 4, 1), pcm16(8192), []float32{0.25}},
		{"Float32 extensible", fmtExtBody(1, 48000, 32, 32, 4, 3), f32bits(math.Float32bits(0.125)), []float32{0.125}},
		// 20-bit samples in 3-byte containers with a plain PCM header: scaled by the container.
		{"PCM20 in 24", fmtBody(1, 1, 48000, 3, 20), pcm24(0x400000), []float32{0.5}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			file := riffFile("RIFF", -1, ck("fmt ", tc.fmt), ck("data", tc.data))
			r, err := NewReader(bytes.NewReader(file))
			if err != nil {
				t.Fatal(err)
			}
			got, err := readAll(t, r, 7)
			if err != nil {
				t.Fatal(err)
			}
			if len(got) != len(tc.want) {
				t.Fatalf("got %d samples, want %d", len(got), len(tc.want))
			}
			for i := range got {
				if got[i] != tc.want[i] || math.Signbit(float64(got[i])) != math.Signbit(float64(tc.want[i])) {
					t.Errorf("sample %d = %v, want %v", i, got[i], tc.want[i])
				}
			}
			if r.Frames() != int64(len(tc.want)) {
				t.Errorf("Frames = %d, want %d", r.Frames(), len(tc.want))
			}
		})
	}
}

func TestFormatFromHeader(t *testing.T) {
	tests := []struct {
		name string
		fmt  []byte
		want Format
	}{
		{"plain 16", fmtBody(1, 2, 44100, 4, 16), Format{44100, 2, PCM16, 0}},
		{"plain float", append(fmtBody(3, 1, 96000, 4, 32), 0, 0), Format{96000, 1, Float32, 0}},
		{"extensible 24 in 32", fmtExtBody(8, 192000, 32, 24, 0, 1), Format{192000, 8, PCM32, 24}},
		{"extensible valid 0", fmtExtBody(2, 8000, 24, 0, 3, 1), Format{8000, 2, PCM24, 0}},
		{"plain 12 bit", fmtBody(1, 1, 16000, 2, 12), Format{16000, 1, PCM16, 12}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			data := make([]byte, tc.want.FrameBytes()*3)
			r, err := NewReader(bytes.NewReader(riffFile("RIFF", -1, ck("fmt ", tc.fmt), ck("data", data))))
			if err != nil {
				t.Fatal(err)
			}
			if r.Format() != tc.want {
				t.Errorf("Format = %+v, want %+v", r.Format(), tc.want)
			}
		})
	}
}

// TestTolerance covers files that break the letter of the RIFF rules but whose samples are
// unambiguous.
func TestTolerance(t *testing.T) {
	fmt16 := ck("fmt ", fmtBody(1, 1, 48000, 2, 16))
	samples := pcm16(1, 2, 3, 4, 5)
	want := 5
	odd := chunk{id: "LIST", body: []byte("INFOISFT\x03\x00\x00\x00ab\x00"), size: -1, pad: true} // 15 bytes
	oddNoPad := odd
	oddNoPad.pad = false
	tests := []struct {
		name       string
		file       []byte
		wantFrames int64
	}{
		{"LIST and fact before data", riffFile("RIFF", -1, fmt16, ck("LIST", []byte("INFOabcd")), ck("fact", pcm32(5)), ck("data", samples)), 5},
		{"chunks before fmt", riffFile("RIFF", -1, ck("JUNK", make([]byte, 28)), ck("bext", make([]byte, 602)), fmt16, ck("data", samples)), 5},
		{"odd chunk with pad byte", riffFile("RIFF", -1, fmt16, odd, ck("data", samples)), 5},
		{"odd chunk without pad byte", riffFile("RIFF", -1, fmt16, oddNoPad, ck("data", samples)), 5},
		{"fmt chunk longer than needed", riffFile("RIFF", -1, ck("fmt ", append(fmtBody(1, 1, 48000, 2, 16), 0, 0, 9, 9, 9, 9)), ck("data", samples)), 5},
		{"RIFF size zero", riffFile("RIFF", 0, fmt16, ck("data", samples)), 5},
		{"RIFF size too large", riffFile("RIFF", 0x7FFFFFFF, fmt16, ck("data", samples)), 5},
		{"RIFF size too small", riffFile("RIFF", 12, fmt16, ck("data", samples)), 5},
		// A program that writes a WAV header to a pipe cannot seek back to fix the sizes and
		// puts a placeholder just below 2 GiB there; its early end is the end of the stream.
		{"data size a streaming placeholder", riffFile("RIFF", -1, fmt16, chunk{id: "data", body: samples, size: 0x7FFFFFF0}), 0x3FFFFFF8},
		{"data size 0 (streamed)", riffFile("RIFF", -1, fmt16, chunk{id: "data", body: samples, size: 0}), -1},
		{"data size 0xFFFFFFFF (streamed)", riffFile("RIFF", -1, fmt16, chunk{id: "data", body: samples, size: 0xFFFFFFFF}), -1},
		// sox writes 0x7FFFF000 rounded down to a whole frame when it writes to a pipe
		// (observed with SoX v14.4.2 from Debian: `sox -n -t wav - synth ...`).
		{"sox pipe placeholder", riffFile("RIFF", 0x7FFFF024, fmt16, chunk{id: "data", body: samples, size: 0x7FFFF000}), -1},
		{"chunks after data", riffFile("RIFF", -1, fmt16, ck("data", samples), ck("LIST", []byte("INFOabcd"))), 5},
		{"RF64 with ds64", riffFile("RF64", 0xFFFFFFFF,
			ck("ds64", append(append(binary.LittleEndian.AppendUint64(nil, 0), binary.LittleEndian.AppendUint64(nil, 10)...), make([]byte, 12)...)),
			fmt16, chunk{id: "data", body: samples, size: 0xFFFFFFFF}), 5},
		{"RF64 without ds64", riffFile("RF64", 0xFFFFFFFF, fmt16, chunk{id: "data", body: samples, size: 0xFFFFFFFF}), -1},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r, err := NewReader(bytes.NewReader(tc.file))
			if err != nil {
				t.Fatal(err)
			}
			if r.Frames() != tc.wantFrames {
				t.Errorf("Frames = %d, want %d", r.Frames(), tc.wantFrames)
			}
			got, err := readAll(t, r, 3)
			if err != nil {
				t.Fatal(err)
			}
			if len(got) != want {
				t.Fatalf("read %d samples, want %d", len(got), want)
			}
			for i, v := range got {
				if v != float32(i+1)/32768 {
					t.Errorf("sample %d = %v", i, v)
				}
			}
		})
	}
}

// TestErrors checks that every kind of bad input gets its sentinel and a one-line message that
// names the problem.
func TestErrors(t *testing.T) {
	fmt16 := ck("fmt ", fmtBody(1, 1, 48000, 2, 16))
	good := minimal16()
	tests := []struct {
		name string
		file []byte
		want error
		text string
	}{
		{"empty", nil, ErrNotWAV, "empty"},
		{"text file", []byte("hello, this is not a sound file\n"), ErrNotWAV, `"hell"`},
		{"AIFF", []byte("FORM\x00\x00\x00\x10AIFFCOMM"), ErrNotWAV, "AIFF"},
		{"AVI", riffFile("RIFF", -1)[:8], ErrTruncated, "header"},
		{"RIFF not WAVE", append([]byte("RIFF\x10\x00\x00\x00AVI "), make([]byte, 8)...), ErrNotWAV, "not WAVE"},
		{"big-endian RIFX", []byte("RIFX\x00\x00\x00\x10WAVE"), ErrUnsupported, "RIFX"},
		{"truncated signature", []byte("RI"), ErrTruncated, "header ends after 2 bytes"},
		{"truncated header", good[:10], ErrTruncated, "header ends after 10 bytes"},
		{"truncated chunk header", good[:16], ErrTruncated, "chunk header"},
		{"truncated fmt chunk", good[:30], ErrTruncated, `"fmt " chunk`},
		{"no chunks", good[:12], ErrNoData, "no fmt or data chunk"},
		{"no data chunk", riffFile("RIFF", -1, fmt16), ErrNoData, "no data chunk"},
		{"no data chunk, only LIST", riffFile("RIFF", -1, fmt16, ck("LIST", []byte("INFO"))), ErrNoData, "no data chunk"},
		{"lying chunk size", riffFile("RIFF", -1, fmt16, chunk{id: "LIST", body: []byte("INFO"), size: 0x7FFFFFF0}), ErrNoData, "claims 2147483632 bytes"},
		{"data before fmt", riffFile("RIFF", -1, ck("data", pcm16(1)), fmt16), ErrBadFormat, "before any fmt"},
		{"two fmt chunks", riffFile("RIFF", -1, fmt16, fmt16, ck("data", pcm16(1))), ErrBadFormat, "second fmt"},
		{"short fmt", riffFile("RIFF", -1, ck("fmt ", make([]byte, 14)), ck("data", pcm16(1))), ErrBadFormat, "fmt chunk of 14 bytes"},
		{"garbage chunk id", append(bytes.Clone(good[:12]), 0x01, 0x02, 0x03, 0x04, 0, 0, 0, 0), ErrBadFormat, "unreadable chunk id"},
		{"zero samples", riffFile("RIFF", -1, fmt16, ck("data", nil)), ErrNoData, "no samples"},
		{"zero samples declared", riffFile("RIFF", -1, fmt16, chunk{id: "data", size: 100}), ErrNoData, "no samples"},
		{"data shorter than a frame", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 2, 48000, 4, 16)), ck("data", []byte{1, 2})), ErrNoData, "shorter than one frame"},
		{"stream ends inside frame 0", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 2, 48000, 4, 16)), chunk{id: "data", body: []byte{1, 2, 3}, size: 0}), ErrTruncated, "inside frame 0 (3 of 4 bytes)"},
		{"zero channels", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 0, 48000, 0, 16)), ck("data", pcm16(1))), ErrBadFormat, "0 channels"},
		{"nine channels", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 9, 48000, 18, 16)), ck("data", pcm16(1))), ErrUnsupported, "9 channels (accepted: 1 to 8"},
		{"rate 0", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 1, 0, 2, 16)), ck("data", pcm16(1))), ErrBadFormat, "sample rate 0 Hz"},
		{"rate too low", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 1, 7999, 2, 16)), ck("data", pcm16(1))), ErrUnsupported, "7999 Hz out of range"},
		{"rate too high", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 1, 384000, 2, 16)), ck("data", pcm16(1))), ErrUnsupported, "384000 Hz out of range"},
		{"rate huge", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 1, 0xFFFFFFFF, 2, 16)), ck("data", pcm16(1))), ErrUnsupported, "out of range"},
		{"8-bit PCM", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 1, 8000, 1, 8)), ck("data", []byte{128})), ErrUnsupported, "8-bit unsigned PCM (accepted: 16-, 24- or 32-bit"},
		{"mu-law", riffFile("RIFF", -1, ck("fmt ", fmtBody(7, 1, 8000, 1, 8)), ck("data", []byte{0xFF})), ErrUnsupported, "mu-law encoding (accepted"},
		{"A-law", riffFile("RIFF", -1, ck("fmt ", fmtBody(6, 1, 8000, 1, 8)), ck("data", []byte{0xD5})), ErrUnsupported, "A-law"},
		{"IMA ADPCM", riffFile("RIFF", -1, ck("fmt ", fmtBody(0x11, 1, 8000, 256, 4)), ck("data", make([]byte, 256))), ErrUnsupported, "IMA ADPCM"},
		{"MS ADPCM", riffFile("RIFF", -1, ck("fmt ", fmtBody(2, 1, 8000, 256, 4)), ck("data", make([]byte, 256))), ErrUnsupported, "Microsoft ADPCM"},
		{"unknown tag", riffFile("RIFF", -1, ck("fmt ", fmtBody(0x1234, 1, 8000, 2, 16)), ck("data", pcm16(1))), ErrUnsupported, "format tag 0x1234"},
		{"64-bit float", riffFile("RIFF", -1, ck("fmt ", fmtBody(3, 1, 48000, 8, 64)), ck("data", make([]byte, 8))), ErrUnsupported, "64-bit float"},
		{"16-bit float", riffFile("RIFF", -1, ck("fmt ", fmtBody(3, 1, 48000, 2, 16)), ck("data", make([]byte, 2))), ErrBadFormat, "16-bit float"},
		{"48-bit integer", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 1, 48000, 6, 48)), ck("data", make([]byte, 6))), ErrUnsupported, "48-bit integer"},
		{"0-bit integer", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 1, 48000, 2, 0)), ck("data", make([]byte, 2))), ErrBadFormat, "0 bits"},
		{"block size mismatch", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 2, 48000, 2, 16)), ck("data", pcm16(1))), ErrBadFormat, "block size 2 bytes"},
		{"extensible mu-law", riffFile("RIFF", -1, ck("fmt ", fmtExtBody(1, 8000, 8, 8, 0, 7)), ck("data", []byte{1, 2})), ErrUnsupported, "mu-law"},
		{"extensible 8-bit", riffFile("RIFF", -1, ck("fmt ", fmtExtBody(1, 8000, 8, 8, 0, 1)), ck("data", []byte{1, 2})), ErrUnsupported, "8-bit"},
		{"extensible 64-bit float", riffFile("RIFF", -1, ck("fmt ", fmtExtBody(1, 8000, 64, 64, 0, 3)), ck("data", make([]byte, 8))), ErrUnsupported, "64-bit float"},
		{"extensible short", riffFile("RIFF", -1, ck("fmt ", fmtExtBody(1, 8000, 16, 16, 0, 1)[:24]), ck("data", pcm16(1))), ErrBadFormat, "need 40"},
		{"extensible cbSize 0", riffFile("RIFF", -1, ck("fmt ", append(fmtExtBody(1, 8000, 16, 16, 0, 1)[:16], make([]byte, 24)...)), ck("data", pcm16(1))), ErrBadFormat, "extension of 0 bytes, need 22"},
		{"extensible odd container", riffFile("RIFF", -1, ck("fmt ", fmtExtBody(1, 8000, 20, 20, 0, 1)), ck("data", pcm16(1))), ErrBadFormat, "20-bit container"},
		{"extensible valid > container", riffFile("RIFF", -1, ck("fmt ", fmtExtBody(1, 8000, 16, 24, 0, 1)), ck("data", pcm16(1))), ErrBadFormat, "24 valid bits in a 16-bit"},
		{"extensible foreign GUID", riffFile("RIFF", -1, ck("fmt ", append(fmtExtBody(1, 8000, 16, 16, 0, 1)[:26], make([]byte, 14)...)), ck("data", pcm16(1))), ErrUnsupported, "GUID"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r, err := NewReader(bytes.NewReader(tc.file))
			if err == nil {
				t.Fatalf("no error; format %v", r.Format())
			}
			if !errors.Is(err, tc.want) {
				t.Errorf("error %q does not wrap %q", err, tc.want)
			}
			if !strings.Contains(err.Error(), tc.text) {
				t.Errorf("error %q does not contain %q", err, tc.text)
			}
			if strings.Contains(err.Error(), "\n") {
				t.Errorf("error %q is not one line", err)
			}
		})
	}
}

// TestReadErrors covers errors found while reading samples: the good frames before the fault
// are delivered, then the error names the frame, and it sticks.
func TestReadErrors(t *testing.T) {
	nan, inf := uint32(0x7FC00000), uint32(0xFF800000)
	one := math.Float32bits(1)
	fmtF2 := ck("fmt ", fmtBody(3, 2, 48000, 8, 32))
	tests := []struct {
		name      string
		file      []byte
		wantGood  int // samples delivered before the error
		want      error
		text      string
		blockSize int
	}{
		{"NaN in frame 3", riffFile("RIFF", -1, fmtF2, ck("data", f32bits(one, one, one, one, one, one, one, nan, one, one))), 6, ErrBadSample, "NaN float sample in frame 3 (0.000 s), channel 2", 4},
		{"-Inf in frame 0", riffFile("RIFF", -1, fmtF2, ck("data", f32bits(inf, one))), 0, ErrBadSample, "infinite float sample in frame 0", 64},
		{"NaN in a later block", riffFile("RIFF", -1, fmtF2, ck("data", f32bits(one, one, one, one, nan, one))), 4, ErrBadSample, "frame 2", 2},
		{"partial trailing frame", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 2, 48000, 4, 16)), ck("data", pcm16(1, 2, 3, 4, 5))), 4, ErrTruncated, "inside frame 2 (2 of 4 bytes)", 64},
		{"partial trailing frame, streamed", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 1, 48000, 3, 24)), chunk{id: "data", body: pcm16(1, 2, 3, 4), size: 0}), 2, ErrTruncated, "inside frame 2 (2 of 3 bytes)", 1},
		// The RIFF specification (Multimedia Programming Interface and Data Specifications 1.0,
		// "RIFF chunks") makes ckSize the size of the chunk's data: a data chunk that ends before
		// it has lost the rest of the recording (issue 13, finding 7: a 10 s header with 5.67 s
		// of data was measured without a word).
		{"data shorter than declared", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 1, 48000, 2, 16)), chunk{id: "data", body: pcm16(1, 2, 3, 4, 5), size: 1000}), 5, ErrTruncated,
			"the data ends after 5 of the 500 frames the header declares", 3},
		{"data shorter than declared, cut at a block boundary", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 1, 48000, 2, 16)), chunk{id: "data", body: pcm16(1, 2, 3, 4), size: 10}), 4, ErrTruncated,
			"after 4 of the 5 frames", 2},
		{"declared size ends inside a frame", riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 1, 48000, 2, 16)), chunk{id: "data", body: pcm16(1, 2, 3), size: 5}), 2, ErrTruncated, "inside frame 2 (1 of 2 bytes)", 64},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r, err := NewReader(bytes.NewReader(tc.file))
			if err != nil {
				t.Fatal(err)
			}
			got, err := readAll(t, r, tc.blockSize)
			if len(got) != tc.wantGood {
				t.Errorf("delivered %d samples before the error, want %d", len(got), tc.wantGood)
			}
			if !errors.Is(err, tc.want) || !strings.Contains(err.Error(), tc.text) {
				t.Errorf("error %v, want %v containing %q", err, tc.want, tc.text)
			}
			if _, err2 := r.Read(make([]float32, 8)); err2 != err {
				t.Errorf("error not sticky: then %v", err2)
			}
		})
	}
}

func TestReadShortBuffer(t *testing.T) {
	r, err := NewReader(bytes.NewReader(riffFile("RIFF", -1, ck("fmt ", fmtBody(1, 2, 48000, 4, 16)), ck("data", pcm16(1, 2)))))
	if err != nil {
		t.Fatal(err)
	}
	if _, err := r.Read(make([]float32, 1)); !errors.Is(err, io.ErrShortBuffer) {
		t.Errorf("Read into 1 sample of a stereo file: %v", err)
	}
}

// TestSlowStream reads through a reader that returns one byte at a time and one that returns
// data with its final error, as pipes and network streams do.
func TestSlowStream(t *testing.T) {
	samples := make([]int16, 1001)
	for i := range samples {
		samples[i] = int16(i*37 - 18000)
	}
	file := riffFile("RIFF", -1, ck("LIST", []byte("INFOx")), ck("fmt ", fmtBody(1, 1, 8000, 2, 16)), chunk{id: "data", body: pcm16(samples...), size: 0xFFFFFFFF})
	for name, src := range map[string]io.Reader{
		"one byte": iotest.OneByteReader(bytes.NewReader(file)),
		"data+EOF": iotest.DataErrReader(bytes.NewReader(file)),
		"half":     iotest.HalfReader(bytes.NewReader(file)),
	} {
		t.Run(name, func(t *testing.T) {
			r, err := NewReader(src)
			if err != nil {
				t.Fatal(err)
			}
			got, err := readAll(t, r, 480)
			if err != nil {
				t.Fatal(err)
			}
			if len(got) != len(samples) {
				t.Fatalf("read %d samples, want %d", len(got), len(samples))
			}
			for i := range got {
				if got[i] != float32(samples[i])/32768 {
					t.Fatalf("sample %d = %v, want %v", i, got[i], float32(samples[i])/32768)
				}
			}
			if r.Position() != int64(len(samples)) {
				t.Errorf("Position = %d", r.Position())
			}
		})
	}
}

// TestIOError passes the underlying reader's error through, not as a format error.
func TestIOError(t *testing.T) {
	boom := errors.New("device unplugged")
	file := minimal16()
	src := io.MultiReader(bytes.NewReader(file[:len(file)-2]), iotest.ErrReader(boom))
	r, err := NewReader(src)
	if err != nil {
		t.Fatal(err)
	}
	_, err = readAll(t, r, 2)
	if !errors.Is(err, boom) {
		t.Errorf("got %v, want the reader's error", err)
	}
	if _, err := NewReader(iotest.ErrReader(boom)); !errors.Is(err, boom) {
		t.Errorf("NewReader: got %v, want the reader's error", err)
	}
}

func TestReadNoAllocs(t *testing.T) {
	f := Format{SampleRate: 48000, Channels: 2, Encoding: PCM24}
	file := encode(t, f, make([]float32, 2*48000*4), false)
	r, err := NewReader(bytes.NewReader(file))
	if err != nil {
		t.Fatal(err)
	}
	buf := make([]float32, 960)
	if _, err := r.Read(buf); err != nil {
		t.Fatal(err)
	}
	allocs := testing.AllocsPerRun(100, func() {
		if _, err := r.Read(buf); err != nil {
			t.Fatal(err)
		}
	})
	if allocs != 0 {
		t.Errorf("Read allocates %v times per call", allocs)
	}
}

// TestLyingHeaderMemory: sizes in the header never drive allocation. A header that claims
// 4 GiB chunks costs no more memory than a correct one.
func TestLyingHeaderMemory(t *testing.T) {
	files := [][]byte{
		riffFile("RIFF", 0xFFFFFFFF, chunk{id: "fmt ", body: fmtBody(1, 1, 48000, 2, 16), size: 0xFFFFFFF0}),
		riffFile("RIFF", 0xFFFFFFFF, ck("fmt ", fmtBody(1, 1, 48000, 2, 16)), chunk{id: "LIST", body: []byte("INFO"), size: 0xFFFFFFFE}),
		riffFile("RF64", 0xFFFFFFFF, chunk{id: "ds64", body: bytes.Repeat([]byte{0xFF}, 28), size: 0xFFFFFFFF}),
		riffFile("RF64", 0xFFFFFFFF, ck("ds64", bytes.Repeat([]byte{0xFF}, 28)), ck("fmt ", fmtBody(1, 1, 48000, 2, 16)), chunk{id: "data", body: pcm16(1, 2, 3), size: 0xFFFFFFFF}),
	}
	for i, file := range files {
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		r, err := NewReader(bytes.NewReader(file))
		if err == nil {
			_, err = readAll(t, r, 1024)
		}
		runtime.ReadMemStats(&after)
		// Bound: the 16 KiB input buffer plus the 4096-frame decode buffer of at most
		// 8 channels × 4 bytes, plus the caller's 1024 samples and slack for error strings.
		if d := after.TotalAlloc - before.TotalAlloc; d > 256<<10 {
			t.Errorf("file %d: %d bytes allocated (err %v)", i, d, err)
		}
	}
}

// TestRawReader reads headerless PCM made by sox (`-t raw`, the reference tool) and by hand.
func TestRawReader(t *testing.T) {
	f := Format{SampleRate: 48000, Channels: 2, Encoding: PCM32, ValidBits: 24}
	// 24-bit data left-justified in 32-bit words, as ALSA's S32_LE from an I2S microphone.
	data := pcm32(0x400000<<8, -0x800000<<8, 0x000100<<8, 0)
	r, err := NewRawReader(bytes.NewReader(data), f)
	if err != nil {
		t.Fatal(err)
	}
	got, err := readAll(t, r, 64)
	want := []float32{0.5, -1, 1.0 / 32768, 0}
	if err != nil || len(got) != len(want) {
		t.Fatalf("read %v, %v", got, err)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("sample %d = %v, want %v", i, got[i], want[i])
		}
	}
	if r.Frames() != -1 || r.Format() != f {
		t.Errorf("Frames %d, Format %v", r.Frames(), r.Format())
	}
	// A trailing byte is a partial frame here: there is no RIFF pad byte in raw data.
	r, _ = NewRawReader(bytes.NewReader(append(pcm16(1, 2), 0)), Format{SampleRate: 8000, Channels: 1, Encoding: PCM16})
	if _, err := readAll(t, r, 8); !errors.Is(err, ErrTruncated) {
		t.Errorf("trailing byte: %v", err)
	}
	// An empty stream ends at once.
	r, _ = NewRawReader(bytes.NewReader(nil), Format{SampleRate: 8000, Channels: 1, Encoding: PCM16})
	if n, err := r.Read(make([]float32, 4)); n != 0 || err != io.EOF {
		t.Errorf("empty: %d, %v", n, err)
	}
	if _, err := NewRawReader(bytes.NewReader(nil), Format{SampleRate: 8000, Channels: 0, Encoding: PCM16}); !errors.Is(err, ErrBadFormat) {
		t.Errorf("zero channels: %v", err)
	}
}
