package wav

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/leqnode/leqnode/node/testrig"
)

// needSox returns the path of sox (Debian package sox, which make test installs).
func needSox(t *testing.T) string {
	t.Helper()
	return testrig.Need(t, "sox", "sox")
}

func runSox(t *testing.T, sox string, args ...string) []byte {
	t.Helper()
	cmd := exec.Command(sox, append([]string{"-V1"}, args...)...)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("sox %s: %v\n%s", strings.Join(args, " "), err, stderr.String())
	}
	return out
}

// TestSox reads files made by sox (the reference tool; Debian package sox) in every accepted
// encoding, written to a file and to a pipe, and compares each sample with (a) sox's own decoding
// of the same file to raw 32-bit float and (b) the analytic signal
// x_c[n] = 10^(-6/20) sin(2π f_c n / fs), with f = 1000 Hz on channel 1 and 500 Hz on channel 2
// (sox's synth starts each sine at phase 0; `-D` turns off dither so the only error is
// the rounding to the sample format, at most half a step), and (c) the sine's RMS level.
func TestSox(t *testing.T) {
	sox := needSox(t)
	dir := t.TempDir()
	tests := []struct {
		name string
		args []string
		tol  float64 // tolerance against the analytic sine: one quantisation step
		enc  Encoding
	}{
		{"PCM16", []string{"-b", "16", "-e", "signed-integer"}, 1.0 / 32768, PCM16},
		{"PCM24", []string{"-b", "24", "-e", "signed-integer"}, 1.0 / 8388608, PCM24},
		{"PCM32", []string{"-b", "32", "-e", "signed-integer"}, 1e-7, PCM32},
		{"Float32", []string{"-b", "32", "-e", "floating-point"}, 1e-7, Float32},
	}
	for _, tc := range tests {
		for _, ch := range []int{1, 2} {
			for _, rate := range []int{44100, 48000} {
				for _, pipe := range []bool{false, true} {
					name := fmt.Sprintf("%s/%dch/%d", tc.name, ch, rate)
					if pipe {
						name += "/pipe"
					}
					t.Run(name, func(t *testing.T) {
						path := filepath.Join(dir, strings.ReplaceAll(name, "/", "_")+".wav")
						synth := []string{"synth", "0.5", "sine", "1000"}
						if ch == 2 {
							synth = append(synth, "sine", "500")
						}
						synth = append(synth, "gain", "-6")
						// -r before -n sets the rate of the null input, so sox synthesises at the
						// target rate instead of resampling from its default 48 kHz.
						args := append([]string{"-r", fmt.Sprint(rate), "-n", "-r", fmt.Sprint(rate), "-c", fmt.Sprint(ch)}, tc.args...)
						args = append(args, "-D")
						if pipe {
							b := runSox(t, sox, append(append(args, "-t", "wav", "-"), synth...)...)
							if err := os.WriteFile(path, b, 0o644); err != nil {
								t.Fatal(err)
							}
						} else {
							runSox(t, sox, append(append(args, path), synth...)...)
						}
						raw := runSox(t, sox, path, "-t", "f32", "-e", "floating-point", "-")

						f, err := os.Open(path)
						if err != nil {
							t.Fatal(err)
						}
						defer f.Close()
						r, err := NewReader(f)
						if err != nil {
							t.Fatal(err)
						}
						want := Format{SampleRate: rate, Channels: ch, Encoding: tc.enc}
						if r.Format() != want {
							t.Errorf("Format = %v, want %v", r.Format(), want)
						}
						frames := int64(rate / 2)
						if pipe {
							frames = -1 // sox cannot fix the sizes on a pipe
						}
						if r.Frames() != frames {
							t.Errorf("Frames = %d, want %d", r.Frames(), frames)
						}
						got, err := readAll(t, r, 480)
						if err != nil {
							t.Fatal(err)
						}
						if len(got) != ch*rate/2 || len(raw) != 4*len(got) {
							t.Fatalf("read %d samples, sox decoded %d, want %d", len(got), len(raw)/4, ch*rate/2)
						}
						amp := math.Pow(10, -6.0/20)
						for i, v := range got {
							ref := math.Float32frombits(binary.LittleEndian.Uint32(raw[4*i:]))
							if math.Abs(float64(v-ref)) > 1e-7 {
								t.Fatalf("sample %d: read %v, sox decodes %v", i, v, ref)
							}
							freq := []float64{1000, 500}[i%ch]
							n := float64(i / ch)
							s := amp * math.Sin(2*math.Pi*freq*n/float64(rate))
							if math.Abs(float64(v)-s) > tc.tol {
								t.Fatalf("sample %d: read %v, analytic sine %v", i, v, s)
							}
						}
						// The RMS of channel 1 over its 500 whole cycles is amp/√2: a sine of peak A
						// reads 20 lg A dBFS (AES17), i.e. -6.00 dBFS; its RMS level re 1.0 is
						// -6 - 10 lg 2 = -9.0103 dB (computed from the definition of RMS).
						var ss float64
						for i := 0; i < len(got); i += ch {
							ss += float64(got[i]) * float64(got[i])
						}
						rmsDB := 10 * math.Log10(ss/float64(len(got)/ch))
						if want := -6 - 10*math.Log10(2); math.Abs(rmsDB-want) > 0.001 {
							t.Errorf("RMS level %.4f dB, want %.4f", rmsDB, want)
						}
					})
				}
			}
		}
	}
}

// TestSoxStreamedPadByte: sox pads an odd-sized data chunk (24-bit mono, odd frame count)
// even when it writes to a pipe; the reader must not take the pad byte for a partial frame.
func TestSoxStreamedPadByte(t *testing.T) {
	sox := needSox(t)
	b := runSox(t, sox, "-r", "8000", "-n", "-r", "8000", "-c", "1", "-b", "24", "-D", "-t", "wav", "-", "synth", "1001s", "sine", "100")
	r, err := NewReader(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	got, err := readAll(t, r, 100)
	if err != nil || len(got) != 1001 {
		t.Fatalf("read %d samples, err %v; want 1001", len(got), err)
	}
}

// TestSoxRefused: files in encodings the reader does not accept, made by sox, are refused
// with ErrUnsupported and an error that names the encoding.
func TestSoxRefused(t *testing.T) {
	sox := needSox(t)
	dir := t.TempDir()
	tests := []struct {
		name string
		args []string
		text string
	}{
		{"8-bit", []string{"-b", "8", "-e", "unsigned-integer"}, "8-bit unsigned PCM"},
		{"mu-law", []string{"-e", "mu-law"}, "mu-law"},
		{"A-law", []string{"-e", "a-law"}, "A-law"},
		{"IMA ADPCM", []string{"-e", "ima-adpcm"}, "IMA ADPCM"},
		{"MS ADPCM", []string{"-e", "ms-adpcm"}, "Microsoft ADPCM"},
		{"GSM", []string{"-e", "gsm-full-rate"}, "GSM 6.10"},
		{"64-bit float", []string{"-b", "64", "-e", "floating-point"}, "64-bit float"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(dir, strings.ReplaceAll(tc.name, " ", "_")+".wav")
			args := append([]string{"-n", "-r", "8000", "-c", "1"}, tc.args...)
			runSox(t, sox, append(args, path, "synth", "0.1", "sine", "440")...)
			f, err := os.Open(path)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			_, err = NewReader(f)
			if !errors.Is(err, ErrUnsupported) || !strings.Contains(err.Error(), tc.text) {
				t.Errorf("got %v, want ErrUnsupported naming %q", err, tc.text)
			}
		})
	}
}

// TestSoxRaw compares headerless 16-bit PCM from sox with sox's own decoding to float.
func TestSoxRaw(t *testing.T) {
	sox := needSox(t)
	raw := runSox(t, sox, "-r", "16000", "-n", "-r", "16000", "-c", "1", "-b", "16", "-e", "signed-integer", "-D", "-t", "raw", "-",
		"synth", "0.1", "sine", "440", "gain", "-3")
	cmd := exec.Command(sox, "-V1", "-r", "16000", "-c", "1", "-b", "16", "-e", "signed-integer", "-t", "raw", "-", "-t", "f32", "-")
	cmd.Stdin = bytes.NewReader(raw)
	f32, err := cmd.Output()
	if err != nil {
		t.Fatal(err)
	}
	r, err := NewRawReader(bytes.NewReader(raw), Format{SampleRate: 16000, Channels: 1, Encoding: PCM16})
	if err != nil {
		t.Fatal(err)
	}
	got, err := readAll(t, r, 100)
	if err != nil || len(got) != 1600 || len(f32) != 4*1600 {
		t.Fatalf("read %d samples (%v), sox %d", len(got), err, len(f32)/4)
	}
	for i, v := range got {
		if w := math.Float32frombits(binary.LittleEndian.Uint32(f32[4*i:])); v != w {
			t.Fatalf("sample %d: %v, sox %v", i, v, w)
		}
	}
}
