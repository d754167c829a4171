// Package wav reads and writes RIFF/WAVE sound files as streams of float32 samples.
//
// The model is a stream: a Reader parses the header up to the start of the sample data and then
// decodes samples as they are read, so a file of any length (or a pipe that never ends) is read
// in constant memory. Samples are interleaved frames (one sample per channel) scaled so that
// integer full scale is ±1.0: a 16-bit sample k reads k/32768, a 24-bit one k/8388608 and a
// 32-bit one k/2147483648. 32-bit IEEE float samples are passed through unchanged (they may
// exceed ±1.0) but must be finite. A Writer does the reverse, rounding to the nearest integer
// step and clipping at full scale.
//
// Accepted encodings are 16-, 24- and 32-bit signed integer PCM and 32-bit IEEE float, in plain
// WAVE_FORMAT_PCM / WAVE_FORMAT_IEEE_FLOAT headers or in WAVE_FORMAT_EXTENSIBLE headers whose
// sub-format is PCM or float, with 1 to 8 channels at 8 kHz to 192 kHz. RF64 and BW64 files
// (EBU Tech 3306, for data beyond 4 GiB) are read too. Other encodings (8-bit unsigned PCM,
// mu-law, A-law, ADPCM, 64-bit float, compressed formats) are refused with an error that names
// the encoding and lists the accepted ones.
//
// The reader is tolerant where the samples are still unambiguous: chunks it does not know
// (LIST, fact, cue, JUNK, bext ...) are skipped, an odd-sized chunk's pad byte is honoured (and
// a missing pad byte recognised) and the RIFF size field is ignored. It is strict where samples
// are missing: a data chunk that ends before the size its header declares (a copy or a recording
// cut short) is read to its end and then reported as ErrTruncated, naming how much of the
// declared length is there. A data size of 0 or
// 0xFFFFFFFF, or the placeholder that sox writes when its output is a pipe (0x7FFFF000 rounded
// down to a whole frame), marks a stream of unknown length, which is read until the end of
// input; Frames then reports -1. So is a declared size within 64 KiB below 2 GiB, which
// programs writing to a pipe use as a placeholder, except that Frames reports it.
//
// Every error wraps one of the sentinel errors ErrNotWAV, ErrTruncated, ErrUnsupported,
// ErrBadFormat, ErrNoData or ErrBadSample, so callers can tell them apart with errors.Is, and
// its text is a single line that says what is wrong and, where there is one, the fix. Callers
// prefix the file name.
package wav
