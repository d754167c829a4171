// Package capture delivers the samples a noise monitoring node measures: one channel of a
// microphone or of a recording, scaled to ±1.0 full scale, in time order, through one small
// interface, Source.
//
// # Model
//
// A Source is opened, read and closed. Open starts the stream and reports its Format (the rate,
// the device's channel count, the channel delivered and the sample encoding). Read fills a
// slice of float32 with the next samples of the one measured channel; it blocks until at least
// one sample is there and never returns (0, nil). Samples the source had to throw away (an input
// overflow of the sound card, an overrun reported by arecord) are not errors: they are counted
// by Dropped, and the caller flags the time they touch. Errors end the stream and come in three
// kinds the caller tells apart with errors.Is:
//
//   - io.EOF: a finite source (a file, standard input, a synthetic scene of set length) ended;
//   - ErrDeviceLost: the device vanished or failed (a USB microphone unplugged, arecord died, a
//     stream that stopped delivering); the caller closes the source, records a gap and opens it
//     again after a backoff;
//   - anything else: the input is bad (ErrBadInput: a corrupt or mis-described stream) or the
//     device refuses the configuration (ErrUnsupported: a rate, encoding or channel count it
//     does not have), and retrying will not help until someone fixes it.
//
// Open may fail with ErrNoDevice when the configured device is not there (yet): worth retrying
// too. Close stops capture and releases the device; it may be called more than once, and from
// another goroutine than Read's, which then returns ErrClosed. A closed source can be opened
// again, which is how the caller recovers from a lost device: a device source (portaudio,
// arecord) starts afresh, while a stream that simply goes on (stdin, a file, the synthetic
// scene) resumes where it stopped. Cancelling the context given to Open ends a Read that is
// waiting (for pacing or for a device) with the context's error.
//
// # Kinds
//
// The kind of source is chosen by Config.Kind:
//
//   - portaudio: a sound card through the PortAudio library (cgo; absent from builds with the
//     noportaudio tag or without cgo). Device by index or name substring, int16, int32,
//     int24in32 or float32 samples, any channel. PortAudio is initialised on every Open and
//     terminated on every Close, because its device list is fixed at initialisation: that is
//     what lets a re-plugged USB microphone be found again.
//   - arecord: the node runs ALSA's arecord (Debian package alsa-utils) itself, reads raw PCM
//     from its standard output and its overrun reports from its standard error. For builds
//     without PortAudio.
//   - stdin: raw PCM in the configured rate, encoding and channel count, or a WAV stream
//     (recognised by its RIFF, RF64 or BW64 header), from standard input or any io.Reader.
//   - file: a WAV file, replayed as fast as possible (reprocessing) or in real time (tests and
//     demonstrations of the live chain). Real-time pacing is computed from the sample count
//     against absolute deadlines, so it does not drift however long it runs.
//   - synthetic: the invented street scene of package scene, deterministic for a seed, in real
//     time or as fast as possible.
//
// # Scaling
//
// Integer samples are divided by the full scale of their container: 32768 for int16, 8388608
// for packed 24-bit (WAV and raw int24), 2147483648 for int32 and for int24in32 (24-bit data
// left-justified in 32-bit frames, as I2S MEMS microphones and ALSA's S32_LE deliver it; the
// low byte is zero or noise and the scaling is that of int32). Float samples pass unchanged.
// A full-scale sine therefore reads 0 dBFS in the AES17 sense whatever the encoding.
//
// # Accuracy cautions
//
// Capture gain and automatic gain control change what a given sound reads: pin the gain (for
// ALSA, with amixer) before calibrating, and calibrate again after any change. An ALSA "plug" or
// "default" device may resample and mix behind the node's back; the portaudio source warns when
// the chosen device is such a layer and prefers the device's native rate. Levels from a node are
// indicative: legally valid measurements need a type-approved class 1 instrument with traceable
// calibration, and local regulations and accredited practice decide what counts.
package capture
