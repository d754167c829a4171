package wav

import (
	"errors"
	"fmt"
)

// Sentinel errors. Every error returned by this package wraps exactly one of them.
var (
	// ErrNotWAV: the input is not a RIFF/WAVE file at all.
	ErrNotWAV = errors.New("not a WAV file")
	// ErrTruncated: the input ends inside the header or inside a sample frame.
	ErrTruncated = errors.New("truncated WAV file")
	// ErrUnsupported: a well-formed WAV file in an encoding, channel count or sample rate
	// that this package does not accept.
	ErrUnsupported = errors.New("unsupported WAV format")
	// ErrBadFormat: the format chunk contradicts itself (zero channels, a block size that does
	// not match the channels and sample size) or is missing.
	ErrBadFormat = errors.New("malformed WAV format")
	// ErrNoData: there is no data chunk, or it holds no complete sample frame.
	ErrNoData = errors.New("no samples in WAV file")
	// ErrBadSample: a sample cannot stand for a sound pressure (NaN or infinite float) or
	// cannot be written.
	ErrBadSample = errors.New("bad sample")
)

// Limits of the accepted formats.
const (
	MinSampleRate = 8000
	MaxSampleRate = 192000
	MaxChannels   = 8
)

// Encoding is the way one sample is stored.
type Encoding int

// The accepted encodings. The zero Encoding is invalid.
const (
	PCM16   Encoding = iota + 1 // 16-bit signed integer, little-endian
	PCM24                       // 24-bit signed integer in 3 bytes, little-endian
	PCM32                       // 32-bit signed integer, little-endian
	Float32                     // 32-bit IEEE 754 float, little-endian
)

// accepted is the list quoted in errors about unsupported encodings.
const accepted = "accepted: 16-, 24- or 32-bit signed integer PCM, 32-bit float"

// String returns a short name such as "PCM16" or "Float32".
func (e Encoding) String() string {
	switch e {
	case PCM16:
		return "PCM16"
	case PCM24:
		return "PCM24"
	case PCM32:
		return "PCM32"
	case Float32:
		return "Float32"
	}
	return fmt.Sprintf("Encoding(%d)", int(e))
}

// Bytes returns the size of one sample in bytes (its container size), or 0 for an invalid
// Encoding.
func (e Encoding) Bytes() int {
	switch e {
	case PCM16:
		return 2
	case PCM24:
		return 3
	case PCM32, Float32:
		return 4
	}
	return 0
}

// Bits returns the container size of one sample in bits.
func (e Encoding) Bits() int { return 8 * e.Bytes() }

// Format describes the samples of a WAV file.
type Format struct {
	SampleRate int      // frames per second, MinSampleRate to MaxSampleRate
	Channels   int      // samples per frame, 1 to MaxChannels
	Encoding   Encoding // how each sample is stored
	// ValidBits is the number of significant bits in each sample: Encoding.Bits() unless an
	// extensible header says fewer (a 24-bit converter's data in 32-bit containers, say). It does
	// not change the scaling: samples are scaled by the container's full scale, since valid bits
	// are the most significant ones. Zero means all bits are valid.
	ValidBits int
}

// FrameBytes returns the size of one frame (one sample of every channel) in bytes.
func (f Format) FrameBytes() int { return f.Channels * f.Encoding.Bytes() }

// Validate reports whether f is a format this package reads and writes.
func (f Format) Validate() error {
	if f.Encoding.Bytes() == 0 {
		return fmt.Errorf("%w: encoding %v (%s)", ErrUnsupported, f.Encoding, accepted)
	}
	if f.Channels <= 0 {
		return fmt.Errorf("%w: %d channels (a file needs at least one)", ErrBadFormat, f.Channels)
	}
	if f.Channels > MaxChannels {
		return fmt.Errorf("%w: %d channels (accepted: 1 to %d; extract the channels with sox remix)",
			ErrUnsupported, f.Channels, MaxChannels)
	}
	if f.SampleRate <= 0 {
		return fmt.Errorf("%w: sample rate %d Hz", ErrBadFormat, f.SampleRate)
	}
	if f.SampleRate < MinSampleRate || f.SampleRate > MaxSampleRate {
		return fmt.Errorf("%w: sample rate %d Hz out of range (accepted: %d to %d Hz; resample with sox rate)",
			ErrUnsupported, f.SampleRate, MinSampleRate, MaxSampleRate)
	}
	if f.ValidBits < 0 || f.ValidBits > f.Encoding.Bits() {
		return fmt.Errorf("%w: %d valid bits in a %d-bit sample", ErrBadFormat, f.ValidBits, f.Encoding.Bits())
	}
	if f.Encoding == Float32 && f.ValidBits != 0 && f.ValidBits != 32 {
		return fmt.Errorf("%w: %d valid bits in a 32-bit float sample", ErrBadFormat, f.ValidBits)
	}
	return nil
}

// String returns a description such as "48000 Hz, 2 channels, PCM24".
func (f Format) String() string {
	ch := "channels"
	if f.Channels == 1 {
		ch = "channel"
	}
	s := fmt.Sprintf("%d Hz, %d %s, %v", f.SampleRate, f.Channels, ch, f.Encoding)
	if f.ValidBits != 0 && f.ValidBits != f.Encoding.Bits() {
		s += fmt.Sprintf(" (%d valid bits)", f.ValidBits)
	}
	return s
}
