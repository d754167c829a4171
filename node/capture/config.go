package capture

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/leqnode/leqnode/node/lib/scene"
	"github.com/leqnode/leqnode/node/lib/strict"
)

// Config selects and sets up a source; it is one section of the node's TOML config file
// (toml tags, lower-case keys with underscores). The zero value of a field selects its
// default, given beside it. Validate checks it; New applies the defaults.
type Config struct {
	// Kind is the kind of source: portaudio, arecord, stdin, file or synthetic.
	Kind string `toml:"kind"`

	// Device selects the sound card. For portaudio: a device index as listed by Devices, or a
	// case-insensitive substring of its name (an exact name wins over substrings; a substring
	// that matches several input devices is an error listing them); empty means PortAudio's
	// default input device. For arecord: an ALSA PCM name passed to arecord -D as it is, such
	// as "hw:CARD=Mic,DEV=0" (card names, unlike card numbers, survive re-plugging); empty
	// means "default".
	//
	// Danger: ALSA's "default", "sysdefault" and "plughw" devices convert rate and format
	// silently. Measure through the hardware device ("hw:...") at its native rate where you can.
	Device string `toml:"device"`

	// SampleRate in Hz, 8000 to 192000. 0 means: the device's default rate (portaudio, which on
	// a hardware device is its native rate), 48000 (arecord, synthetic), the file's rate
	// (file, WAV on stdin). Raw PCM on stdin needs it. For a file it must be 0 or the file's rate.
	SampleRate int `toml:"sample_rate"`

	// Sample is the sample encoding asked of the device or found in a raw stream: int16,
	// int32, int24in32 (24-bit data left-justified in 32-bit frames, as I2S MEMS microphones
	// deliver it; scaled like int32), float32, and for raw stdin also int24 (packed in 3
	// bytes). Empty means float32 for portaudio (PortAudio converts from the device's format
	// without loss for up to 24 bits) and int32 for arecord. Raw PCM on stdin needs it.
	Sample string `toml:"sample_format"`

	// Channels is the number of channels to open (portaudio, arecord) or found in a raw
	// stream, 1 to 64; 0 means just enough for Channel. A stereo I2S microphone pair, or a
	// device that only opens in stereo, needs 2.
	Channels int `toml:"channels"`

	// Channel is the 1-based channel measured; 0 means 1.
	Channel int `toml:"channel"`

	// FramesPerBuffer is the number of frames read from the device at a time (portaudio) or the
	// block size of the stream sources, 16 to 65536; 0 means 1024 (21 ms at 48 kHz). Larger
	// blocks cost less CPU and survive longer stalls of the reader before an overflow; smaller
	// ones lower the latency, which a noise monitor hardly needs.
	FramesPerBuffer int `toml:"frames_per_buffer"`

	// File is the path of the WAV file the file source replays.
	File string `toml:"file"`

	// Realtime paces the file and synthetic sources in real time, the way a sound card
	// delivers; false delivers as fast as the reader takes the samples (reprocessing, tests).
	// Time stamps of a fast source mean nothing: the caller must take them from the recording.
	Realtime bool `toml:"realtime"`

	// StdinFormat says how to read kind stdin: auto (a WAV stream when it starts with a
	// RIFF, RF64 or BW64 header, else raw PCM), raw or wav. Empty means auto.
	StdinFormat string `toml:"stdin_format"`

	// ArecordPath is the arecord program to run; empty means "arecord" looked up in PATH.
	ArecordPath string `toml:"arecord_path"`

	// AllowResample lets arecord open a rate the device lacks by resampling in ALSA's plug
	// layer; by default arecord runs with --disable-resample and fails with a clear message
	// instead. Danger: a resampler's filters change the level of high-frequency sound and its
	// errors do not show in the node's own checks; measure at the device's native rate.
	AllowResample bool `toml:"allow_resample"`

	// Seed selects the synthetic scene: the same seed gives the same samples.
	Seed int64 `toml:"seed"`

	// CalibratorSeconds is how long the synthetic scene plays a calibrator tone (94 dB SPL at
	// 1 kHz) at the start, 0 to 3600; 0 means none.
	CalibratorSeconds float64 `toml:"calibrator_s"`

	// DurationSeconds ends the synthetic scene with io.EOF after this many seconds; 0 means it
	// never ends.
	DurationSeconds float64 `toml:"duration_s"`

	// Start is the wall-clock time (RFC 3339) of the synthetic scene's first sample, which makes
	// traffic, buses and birds follow the hour of the day. Empty means the time of Open when
	// Realtime is set, else a scene of daytime minutes only.
	Start string `toml:"start"`

	// Scene, when not nil, describes the synthetic scene in full (for programs; it has no
	// place in the config file) and overrides SampleRate, Seed, CalibratorSeconds and Start.
	Scene *scene.Config `toml:"-"`
}

// Validate checks c and returns one error per problem, each naming the key (without the
// section: "sample_rate = 1000: ..."), the value and the allowed values. It returns nil for a
// valid configuration.
func (c Config) Validate() []error {
	var errs []error
	bad := func(key string, val any, format string, args ...any) {
		errs = append(errs, fmt.Errorf("%s = %s: %s", key, quote(val), fmt.Sprintf(format, args...)))
	}
	switch c.Kind {
	case KindPortAudio:
		if !havePortAudio {
			bad("kind", c.Kind, "this build has no PortAudio; use kind arecord")
		}
	case KindArecord, KindStdin, KindFile, KindSynthetic:
	case "":
		bad("kind", c.Kind, "missing; choose one of portaudio, arecord, stdin, file, synthetic")
	default:
		bad("kind", c.Kind, "unknown kind; choose one of portaudio, arecord, stdin, file, synthetic")
	}
	if c.SampleRate != 0 && (c.SampleRate < minRate || c.SampleRate > maxRate) {
		bad("sample_rate", c.SampleRate, "out of range; use 0 (the default) or %d to %d Hz", minRate, maxRate)
	}
	rawStdin := c.Kind == KindStdin && c.StdinFormat == StdinRaw
	switch c.Sample {
	case "":
		if rawStdin {
			bad("sample_format", c.Sample, "raw PCM on stdin needs it; choose int16, int24, int32, int24in32 or float32")
		}
	case Int16, Int32, Int24in32, Float32:
	case Int24:
		if c.Kind != KindStdin {
			bad("sample_format", c.Sample, "packed 24-bit samples are read from raw stdin only; use int24in32 or int32 for a device")
		}
	default:
		bad("sample_format", c.Sample, "unknown; choose int16, int32, int24in32 or float32 (int24 for raw stdin)")
	}
	if rawStdin && c.SampleRate == 0 {
		bad("sample_rate", c.SampleRate, "raw PCM on stdin needs the rate; set %d to %d Hz", minRate, maxRate)
	}
	if c.Channels < 0 || c.Channels > maxChans {
		bad("channels", c.Channels, "out of range; use 0 (as many as channel needs) or 1 to %d", maxChans)
	}
	if c.Channel < 0 || c.Channel > maxChans {
		bad("channel", c.Channel, "out of range; use 0 (the first) or 1 to %d", maxChans)
	} else if c.Channels > 0 && c.Channel > c.Channels {
		bad("channel", c.Channel, "beyond the %d channel(s) opened; use 1 to %d or raise channels", c.Channels, c.Channels)
	}
	if c.FramesPerBuffer != 0 && (c.FramesPerBuffer < 16 || c.FramesPerBuffer > 65536) {
		bad("frames_per_buffer", c.FramesPerBuffer, "out of range; use 0 (1024) or 16 to 65536")
	}
	switch c.StdinFormat {
	case "", StdinAuto, StdinRaw, StdinWAV:
	default:
		bad("stdin_format", c.StdinFormat, "unknown; choose auto, raw or wav")
	}
	if c.Kind == KindFile && c.File == "" {
		bad("file", c.File, "kind file needs the path of a WAV file")
	}
	if !(c.CalibratorSeconds >= 0 && c.CalibratorSeconds <= 3600) {
		bad("calibrator_s", c.CalibratorSeconds, "out of range; use 0 (none) to 3600 s")
	}
	if !(c.DurationSeconds >= 0 && c.DurationSeconds <= 1e9) {
		bad("duration_s", c.DurationSeconds, "out of range; use 0 (endless) or a positive number of seconds")
	}
	if c.Start != "" {
		if _, err := strict.ParseTime(c.Start); err != nil {
			bad("start", c.Start, "not an RFC 3339 time; write it like 2026-06-01T07:00:00+01:00")
		}
	}
	return errs
}

// quote formats a config value the way TOML writes it.
func quote(v any) string {
	switch v := v.(type) {
	case string:
		return strconv.Quote(v)
	case float64:
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return strings.ToLower(fmt.Sprint(v))
		}
		return strconv.FormatFloat(v, 'g', -1, 64)
	}
	return fmt.Sprint(v)
}

// WithDefaults returns c with zero fields replaced by the defaults that do not depend on the
// device or the stream.
func (c Config) WithDefaults() Config {
	if c.Channel == 0 {
		c.Channel = 1
	}
	if c.Channels == 0 {
		c.Channels = c.Channel
	}
	if c.FramesPerBuffer == 0 {
		c.FramesPerBuffer = DefaultFramesPerBuffer
	}
	if c.StdinFormat == "" {
		c.StdinFormat = StdinAuto
	}
	switch c.Kind {
	case KindPortAudio:
		if c.Sample == "" {
			c.Sample = Float32
		}
	case KindArecord:
		if c.Sample == "" {
			c.Sample = Int32
		}
		if c.SampleRate == 0 {
			c.SampleRate = DefaultArecordRate
		}
		if c.Device == "" {
			c.Device = "default"
		}
		if c.ArecordPath == "" {
			c.ArecordPath = "arecord"
		}
	}
	return c
}
