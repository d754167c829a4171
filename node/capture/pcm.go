package capture

import (
	"encoding/binary"
	"fmt"
	"math"
)

// Full scales of the integer encodings: a sample k reads k/scale.
const (
	scale16 = 1 << 15
	scale24 = 1 << 23
	scale32 = 1 << 31
)

// sampleBytes returns the size in bytes of one sample of the encoding, or 0 if unknown.
func sampleBytes(sample string) int {
	switch sample {
	case Int16:
		return 2
	case Int24:
		return 3
	case Int32, Int24in32, Float32:
		return 4
	}
	return 0
}

// pcmLayout is the layout of interleaved little-endian raw PCM and the channel to pick.
type pcmLayout struct {
	sample   string
	bytes    int // per sample
	channels int
	channel  int // 0-based
}

func newLayout(sample string, channels, channel int) pcmLayout {
	return pcmLayout{sample: sample, bytes: sampleBytes(sample), channels: channels, channel: channel - 1}
}

// frameBytes returns the size of one frame in bytes.
func (l pcmLayout) frameBytes() int { return l.bytes * l.channels }

// decode writes the picked channel of the whole frames in src to dst, scaled to ±1.0 full
// scale, and returns the number of frames decoded: min(len(dst), len(src)/frameBytes).
// A non-finite float sample is an error naming its frame index (counted from first).
func (l pcmLayout) decode(dst []float32, src []byte, first int64) (int, error) {
	fb := l.frameBytes()
	n := min(len(dst), len(src)/fb)
	off := l.channel * l.bytes
	switch l.sample {
	case Int16:
		for i := range n {
			dst[i] = float32(int16(binary.LittleEndian.Uint16(src[i*fb+off:]))) / scale16
		}
	case Int24:
		for i := range n {
			b := src[i*fb+off:]
			v := int32(uint32(b[0])<<8|uint32(b[1])<<16|uint32(b[2])<<24) >> 8
			dst[i] = float32(v) / scale24
		}
	case Int32, Int24in32:
		for i := range n {
			dst[i] = float32(float64(int32(binary.LittleEndian.Uint32(src[i*fb+off:]))) / scale32)
		}
	case Float32:
		for i := range n {
			v := math.Float32frombits(binary.LittleEndian.Uint32(src[i*fb+off:]))
			if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
				return i, fmt.Errorf("%w: float32 sample %d is %v: the stream is not float32 PCM or is corrupt; check sample_format",
					ErrBadInput, first+int64(i), v)
			}
			dst[i] = v
		}
	default:
		return 0, fmt.Errorf("%w: unknown sample encoding %q", ErrBadInput, l.sample)
	}
	return n, nil
}

// pick copies channel ch (0-based) of the interleaved frames in src (channels per frame) to
// dst and returns the number of frames copied.
func pick[T int16 | int32 | float32](dst []float32, src []T, channels, ch int, scale float32) int {
	n := min(len(dst), len(src)/channels)
	if channels == 1 {
		for i, v := range src[:n] {
			dst[i] = float32(v) / scale
		}
		return n
	}
	for i := range n {
		dst[i] = float32(src[i*channels+ch]) / scale
	}
	return n
}
