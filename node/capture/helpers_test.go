package capture

import (
	"encoding/binary"
	"errors"
	"io"
	"math"
	"testing"

	"github.com/leqnode/leqnode/node/testrig"
)

// signal returns n samples of a deterministic test signal: a 1 kHz sine of peak amplitude amp
// at rate fs plus a small pseudo-random dither, so that bit-exact comparisons see every bit.
func signal(n, fs int, amp float64) []float64 {
	x := make([]float64, n)
	var seed uint32 = 12345
	for i := range x {
		seed = seed*1664525 + 1013904223 // Numerical Recipes LCG, common practice
		d := (float64(seed>>8)/float64(1<<24) - 0.5) * 1e-4
		x[i] = amp*math.Sin(2*math.Pi*1000*float64(i)/float64(fs)) + d
	}
	return x
}

// encode writes the samples of channel ch (0-based) of a frame of channels channels as raw
// little-endian PCM; the other channels carry the negated signal, so picking the wrong one
// shows. It returns the bytes and the float32 values a reader must deliver, computed
// independently of the package: k/32768 for int16, k/2^31 for int32, k/2^23 for packed 24-bit
// (two's complement scaling to full scale ±1.0, AES17 convention).
func encode(x []float64, sample string, channels, ch int) ([]byte, []float32) {
	var out []byte
	want := make([]float32, len(x))
	for i, v := range x {
		for c := range channels {
			s := v
			if c != ch {
				s = -v
			}
			switch sample {
			case Int16:
				k := int16(math.Round(s * 32767))
				out = binary.LittleEndian.AppendUint16(out, uint16(k))
				if c == ch {
					want[i] = float32(float64(k) / 32768)
				}
			case Int24:
				k := int32(math.Round(s * 8388607))
				out = append(out, byte(k), byte(k>>8), byte(k>>16))
				if c == ch {
					want[i] = float32(float64(k) / 8388608)
				}
			case Int32, Int24in32:
				k := int32(math.Round(s * 2147483647))
				if sample == Int24in32 {
					k &^= 0xFF // 24 significant bits, left-justified
				}
				out = binary.LittleEndian.AppendUint32(out, uint32(k))
				if c == ch {
					want[i] = float32(float64(k) / 2147483648)
				}
			case Float32:
				f := float32(s)
				out = binary.LittleEndian.AppendUint32(out, math.Float32bits(f))
				if c == ch {
					want[i] = f
				}
			}
		}
	}
	return out, want
}

// readAll reads src until io.EOF or until max samples, in blocks of block samples, checking
// the Source contract (never (0, nil)).
func readAll(t testing.TB, src Source, block, max int) ([]float32, error) {
	t.Helper()
	var got []float32
	buf := make([]float32, block)
	for len(got) < max {
		n, err := src.Read(buf[:min(block, max-len(got))])
		if n == 0 && err == nil {
			t.Fatalf("Read returned (0, nil)")
		}
		got = append(got, buf[:n]...)
		if err != nil {
			return got, err
		}
	}
	return got, nil
}

// sameSamples fails unless got equals want bit for bit.
func sameSamples(t testing.TB, got, want []float32) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("got %d samples, want %d", len(got), len(want))
	}
	for i := range want {
		if math.Float32bits(got[i]) != math.Float32bits(want[i]) {
			t.Fatalf("sample %d = %v (%#08x), want %v (%#08x)", i, got[i], math.Float32bits(got[i]), want[i], math.Float32bits(want[i]))
		}
	}
}

// levelDBFS returns the RMS level of x in dBFS in the AES17 sense: 20·log10(√2·rms), so that a
// full-scale sine reads 0 dBFS.
func levelDBFS(x []float32) float64 {
	var ms float64
	for _, v := range x {
		ms += float64(v) * float64(v)
	}
	ms /= float64(len(x))
	return 10 * math.Log10(2*ms)
}

// needTool returns the path of a Debian tool the test needs (testrig.Need: missing fails under
// CI=true, skips elsewhere).
func needTool(t testing.TB, name, pkg string) string {
	t.Helper()
	return testrig.Need(t, pkg, name)
}

func isEOF(err error) bool { return errors.Is(err, io.EOF) }
