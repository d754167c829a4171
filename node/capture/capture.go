package capture

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
)

// Source delivers mono samples of one channel, scaled to ±1.0 full scale, in time order.
// A Source is used by one goroutine at a time, except Close, which may be called from another
// goroutine to end a Read that is waiting.
type Source interface {
	// Open starts capture and returns the stream's format. The context bounds the whole
	// capture, not just the opening: cancelling it ends a waiting Read.
	Open(ctx context.Context) (Format, error)
	// Read blocks until it can fill dst[:n] with n > 0 samples, or fails. It never returns
	// (0, nil). Samples the source had to discard (an input overflow) are reported by Dropped,
	// not by an error. An error wrapping ErrDeviceLost means the device is gone: the caller
	// closes the source, records a gap and re-opens after a backoff. io.EOF ends a finite
	// source (file, stdin).
	Read(dst []float32) (n int, err error)
	// Dropped returns the number of samples discarded so far (overflows, overruns). It is
	// safe to call from any goroutine.
	Dropped() int64
	// Close stops capture and releases the device. It is safe to call twice. Open may be
	// called again afterwards.
	Close() error
	// Describe names the source for logs and session records, e.g. "portaudio: testsig @48000 Hz".
	Describe() string
}

// Format describes the stream a Source delivers.
type Format struct {
	SampleRate int    // samples per second of the delivered channel
	Channels   int    // channels of the device or file (only one is delivered)
	Channel    int    // 1-based channel delivered
	Sample     string // encoding at the source: int16, int24, int32, int24in32 or float32
}

// String returns a description such as "48000 Hz, channel 1 of 2, int32".
func (f Format) String() string {
	return fmt.Sprintf("%d Hz, channel %d of %d, %s", f.SampleRate, f.Channel, f.Channels, f.Sample)
}

var (
	// ErrDeviceLost is wrapped by errors from Read (and Open) when the device disappeared or
	// failed: the caller records a gap, closes the source and opens it again after a backoff.
	ErrDeviceLost = errors.New("capture device lost")
	// ErrNoDevice is wrapped by errors from Open when the configured device is not present.
	// A USB microphone may appear later, so it is worth retrying like ErrDeviceLost.
	ErrNoDevice = errors.New("capture device not found")
	// ErrClosed is returned by Read after Close, until the source is opened again.
	ErrClosed = errors.New("capture source closed")
	// ErrBadInput is wrapped by errors about a stream that cannot be decoded (a corrupt or
	// mis-described recording); retrying does not help.
	ErrBadInput = errors.New("bad capture input")
	// ErrUnsupported is wrapped by errors about a configuration the device refuses (a sample
	// rate, encoding or channel count it does not have); retrying does not help until the
	// configuration changes.
	ErrUnsupported = errors.New("capture configuration not supported by the device")
)

// Kinds of source, the values of Config.Kind.
const (
	KindPortAudio = "portaudio"
	KindArecord   = "arecord"
	KindStdin     = "stdin"
	KindFile      = "file"
	KindSynthetic = "synthetic"
)

// Sample encodings, the values of Config.Sample and Format.Sample. All integers are signed and
// little-endian in raw streams.
const (
	Int16     = "int16"     // 16-bit integer, full scale 32768
	Int24     = "int24"     // 24-bit integer packed in 3 bytes (WAV files and raw stdin only)
	Int32     = "int32"     // 32-bit integer, full scale 2^31
	Int24in32 = "int24in32" // 24-bit data left-justified in 32-bit frames, scaled like int32
	Float32   = "float32"   // 32-bit IEEE float, full scale 1.0
)

// Ways to read kind stdin, the values of Config.StdinFormat.
const (
	StdinAuto = "auto" // WAV when the stream starts with a RIFF, RF64 or BW64 header, else raw
	StdinRaw  = "raw"  // raw PCM as sample_rate, sample_format and channels describe it
	StdinWAV  = "wav"  // a WAV stream; anything else is an error
)

const (
	section  = "capture" // the config file section, for error messages
	minRate  = 8000
	maxRate  = 192000
	maxChans = 64
)

// Default values used where Config leaves a field zero.
const (
	// DefaultFramesPerBuffer is the block of frames read from a device or stream at a time:
	// 1024 frames is 21 ms at 48 kHz.
	DefaultFramesPerBuffer = 1024
	// DefaultArecordRate is the rate arecord opens when sample_rate is 0 (arecord cannot ask
	// the device for its native rate).
	DefaultArecordRate = 48000
)

// New returns a Source for the configuration c, not yet opened. It validates c first and
// returns the problems joined into one error (one line per problem, each starting "capture."). Logs go to logger (nil discards them).
// Kind stdin reads os.Stdin; use NewReader to read another io.Reader.
func New(c Config, logger *slog.Logger) (Source, error) {
	return newSource(c, os.Stdin, logger)
}

// NewReader is New for kind stdin reading r instead of os.Stdin (a pipe, a network stream, a
// test's buffer). For other kinds r is ignored.
func NewReader(c Config, r io.Reader, logger *slog.Logger) (Source, error) {
	return newSource(c, r, logger)
}

func newSource(c Config, r io.Reader, logger *slog.Logger) (Source, error) {
	if errs := c.Validate(); len(errs) > 0 {
		for i, e := range errs {
			errs[i] = fmt.Errorf("%s.%w", section, e)
		}
		return nil, errors.Join(errs...)
	}
	if logger == nil {
		logger = slog.New(slog.DiscardHandler)
	}
	c = c.WithDefaults()
	logger = logger.With("source", c.Kind)
	switch c.Kind {
	case KindPortAudio:
		return newPortAudio(c, logger)
	case KindArecord:
		return newArecord(c, logger), nil
	case KindStdin:
		if r == nil {
			return nil, fmt.Errorf("%s.kind = %q: no input stream given (pass an io.Reader to NewReader)", section, c.Kind)
		}
		return newStream(c, r, "stdin", logger), nil
	case KindFile:
		return newFile(c, logger), nil
	case KindSynthetic:
		return newSynthetic(c, logger)
	}
	return nil, fmt.Errorf("%s.kind = %q: unknown kind", section, c.Kind)
}

// HavePortAudio reports whether this build has the portaudio source (a cgo build with
// PortAudio); a pure-Go build captures through arecord, standard input or files only.
func HavePortAudio() bool { return havePortAudio }
