package wav

import (
	"encoding/binary"
	"fmt"
	"io"
	"math"
)

// maxRIFFSize is the largest size a RIFF size field can hold.
const maxRIFFSize = 0xFFFFFFFF

// Writer encodes float32 samples into a WAV stream. It is not safe for concurrent use.
//
// When the destination is an io.WriteSeeker that can seek (a regular file), Close goes back and
// fills in the sizes, and a file that outgrows the 4 GiB limit of RIFF is turned into an RF64
// file (EBU Tech 3306) through a JUNK chunk reserved for the purpose. On a destination that
// cannot seek (a pipe, a socket) the sizes are written as 0xFFFFFFFF, which readers, this
// package's included, take as "read to the end".
type Writer struct {
	w        io.Writer
	ws       io.WriteSeeker // nil when the destination cannot seek
	start    int64          // offset of the RIFF header in ws
	format   Format
	factPos  int64 // offset of the fact chunk's sample count from start, 0 when absent
	dataPos  int64 // offset of the data chunk's size field from start
	junkPos  int64 // offset of the JUNK chunk reserved for ds64, 0 when absent
	data     uint64
	frames   int64
	clipped  int64
	buf      []byte
	err      error
	closed   bool
	limit    uint64 // maxRIFFSize; smaller in tests
	scale    float64
	minInt   float64
	maxInt   float64
	headerSz int64
}

// NewWriter writes the header of a WAV file of format f to w and returns a Writer for its
// samples. Formats with more than two channels, or with fewer valid bits than the container
// holds, get a WAVE_FORMAT_EXTENSIBLE header (with channel mask 0: a measurement device's
// channels are not loudspeaker positions); float files get a fact chunk. Close does not close w.
func NewWriter(w io.Writer, f Format) (*Writer, error) {
	if err := f.Validate(); err != nil {
		return nil, err
	}
	wr := &Writer{w: w, format: f, limit: maxRIFFSize}
	if ws, ok := w.(io.WriteSeeker); ok {
		if off, err := ws.Seek(0, io.SeekCurrent); err == nil {
			wr.ws, wr.start = ws, off
		}
	}
	if f.Encoding != Float32 {
		wr.scale = math.Ldexp(1, f.Encoding.Bits()-1)
		wr.minInt, wr.maxInt = -wr.scale, wr.scale-1
	}
	hdr := wr.header()
	wr.headerSz = int64(len(hdr))
	if _, err := w.Write(hdr); err != nil {
		return nil, fmt.Errorf("wav: writing header: %w", err)
	}
	return wr, nil
}

// header builds the file header up to and including the data chunk's size field.
func (w *Writer) header() []byte {
	f := w.format
	unknown := uint32(0xFFFFFFFF)
	h := make([]byte, 0, 100)
	le16 := func(v uint16) { h = binary.LittleEndian.AppendUint16(h, v) }
	le32 := func(v uint32) { h = binary.LittleEndian.AppendUint32(h, v) }
	h = append(h, "RIFF"...)
	le32(unknown)
	h = append(h, "WAVE"...)
	if w.ws != nil {
		w.junkPos = int64(len(h))
		h = append(h, "JUNK"...)
		le32(28)
		h = append(h, make([]byte, 28)...)
	}
	bits := f.Encoding.Bits()
	extensible := f.Channels > 2 || (f.ValidBits != 0 && f.ValidBits != bits)
	tag := uint16(tagPCM)
	if f.Encoding == Float32 {
		tag = tagFloat
	}
	h = append(h, "fmt "...)
	switch {
	case extensible:
		le32(40)
		le16(tagExtensible)
	case tag == tagFloat:
		le32(18)
		le16(tag)
	default:
		le32(16)
		le16(tag)
	}
	le16(uint16(f.Channels))
	le32(uint32(f.SampleRate))
	le32(uint32(f.SampleRate * f.FrameBytes()))
	le16(uint16(f.FrameBytes()))
	le16(uint16(bits))
	switch {
	case extensible:
		valid := f.ValidBits
		if valid == 0 {
			valid = bits
		}
		le16(22)
		le16(uint16(valid))
		le32(0) // channel mask: no speaker positions
		le16(tag)
		h = append(h, guidTail[:]...)
	case tag == tagFloat:
		le16(0)
	}
	if f.Encoding == Float32 {
		h = append(h, "fact"...)
		le32(4)
		w.factPos = int64(len(h))
		le32(unknown)
	}
	h = append(h, "data"...)
	w.dataPos = int64(len(h))
	le32(unknown)
	return h
}

// Format returns the format being written.
func (w *Writer) Format() Format { return w.format }

// Frames returns the number of frames written so far.
func (w *Writer) Frames() int64 { return w.frames }

// Clipped returns the number of samples that lay outside the integer range and were clipped to
// full scale (always 0 for float files). A float sample of +1.0 is one step above the largest
// positive integer and counts as clipped.
func (w *Writer) Clipped() int64 { return w.clipped }

// Write encodes interleaved samples, a whole number of frames. Integer encodings round each
// sample to the nearest step of the full scale ±1.0 and clip at full scale; NaN or infinite
// samples are refused with an error wrapping ErrBadSample and nothing of that call is written.
// Write allocates nothing after its first call for blocks of the same or smaller size.
func (w *Writer) Write(samples []float32) error {
	if w.err != nil {
		return w.err
	}
	if w.closed {
		return fmt.Errorf("wav: Write after Close")
	}
	ch := w.format.Channels
	if len(samples)%ch != 0 {
		return fmt.Errorf("wav: Write of %d samples is not a whole number of %d-channel frames", len(samples), ch)
	}
	for i, v := range samples {
		if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
			return fmt.Errorf("%w: %v in frame %d, channel %d of the block to write", ErrBadSample, v, i/ch, i%ch+1)
		}
	}
	nb := len(samples) * w.format.Encoding.Bytes()
	if cap(w.buf) < nb {
		w.buf = make([]byte, nb)
	}
	b := w.buf[:nb]
	switch w.format.Encoding {
	case PCM16:
		for i, v := range samples {
			binary.LittleEndian.PutUint16(b[2*i:], uint16(int16(w.quantize(v))))
		}
	case PCM24:
		for i, v := range samples {
			q := uint32(int32(w.quantize(v)))
			b[3*i], b[3*i+1], b[3*i+2] = byte(q), byte(q>>8), byte(q>>16)
		}
	case PCM32:
		for i, v := range samples {
			binary.LittleEndian.PutUint32(b[4*i:], uint32(int32(w.quantize(v))))
		}
	case Float32:
		for i, v := range samples {
			binary.LittleEndian.PutUint32(b[4*i:], math.Float32bits(v))
		}
	}
	if _, err := w.w.Write(b); err != nil {
		w.err = fmt.Errorf("wav: writing samples: %w", err)
		return w.err
	}
	w.data += uint64(nb)
	w.frames += int64(len(samples) / ch)
	return nil
}

// quantize scales v to the integer range, rounding half away from zero and clipping.
func (w *Writer) quantize(v float32) float64 {
	q := math.Round(float64(v) * w.scale)
	if q > w.maxInt {
		w.clipped++
		return w.maxInt
	}
	if q < w.minInt {
		w.clipped++
		return w.minInt
	}
	return q
}

// Close finishes the file. On a seekable destination it writes the pad byte an odd-sized data
// chunk needs, fills in the header's sizes (switching to RF64 beyond 4 GiB) and leaves the destination
// positioned at the end of the file. It does not close the destination.
func (w *Writer) Close() error {
	if w.closed {
		return w.err
	}
	w.closed = true
	if w.err != nil {
		return w.err
	}
	if w.ws == nil {
		// No pad byte: the size of a stream is unknown, so readers cannot tell it from data.
		return nil
	}
	total := uint64(w.headerSz) + w.data
	if w.data%2 == 1 {
		if _, err := w.w.Write([]byte{0}); err != nil {
			w.err = fmt.Errorf("wav: writing pad byte: %w", err)
			return w.err
		}
		total++
	}
	riff := total - 8
	if riff <= w.limit && w.data <= w.limit {
		w.patch(4, le32(uint32(riff)))
		w.patch(w.dataPos, le32(uint32(w.data)))
		if w.factPos != 0 {
			w.patch(w.factPos, le32(uint32(min(w.frames, maxRIFFSize))))
		}
	} else {
		// RF64 (EBU Tech 3306): the 32-bit fields say 0xFFFFFFFF, the ds64 chunk holds the sizes.
		w.patch(0, []byte("RF64"))
		w.patch(4, le32(0xFFFFFFFF))
		ds := make([]byte, 0, 36)
		ds = append(ds, "ds64"...)
		ds = binary.LittleEndian.AppendUint32(ds, 28)
		ds = binary.LittleEndian.AppendUint64(ds, riff)
		ds = binary.LittleEndian.AppendUint64(ds, w.data)
		ds = binary.LittleEndian.AppendUint64(ds, uint64(w.frames))
		ds = binary.LittleEndian.AppendUint32(ds, 0) // no table entries
		w.patch(w.junkPos, ds)
		w.patch(w.dataPos, le32(0xFFFFFFFF))
		if w.factPos != 0 {
			w.patch(w.factPos, le32(0xFFFFFFFF))
		}
	}
	if w.err == nil {
		if _, err := w.ws.Seek(w.start+int64(total), io.SeekStart); err != nil {
			w.err = fmt.Errorf("wav: seeking to the end: %w", err)
		}
	}
	return w.err
}

func le32(v uint32) []byte { return binary.LittleEndian.AppendUint32(nil, v) }

// patch overwrites the header at offset off (from the start of the file).
func (w *Writer) patch(off int64, b []byte) {
	if w.err != nil {
		return
	}
	if _, err := w.ws.Seek(w.start+off, io.SeekStart); err != nil {
		w.err = fmt.Errorf("wav: seeking to fix the header: %w", err)
		return
	}
	if _, err := w.ws.Write(b); err != nil {
		w.err = fmt.Errorf("wav: fixing the header: %w", err)
	}
}
