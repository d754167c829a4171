package wav

import (
	"bufio"
	"encoding/binary"
	"fmt"
	"io"
	"math"
)

// Format tags of the fmt chunk (RIFF WAVE format registrations).
const (
	tagPCM        = 0x0001
	tagFloat      = 0x0003
	tagExtensible = 0xFFFE
)

// guidTail is bytes 2..15 of the KSDATAFORMAT_SUBTYPE GUIDs; bytes 0..1 hold the format tag.
var guidTail = [14]byte{0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xAA, 0x00, 0x38, 0x9B, 0x71}

// soxPipeSize is the data size sox writes when it cannot seek back to fix the header
// (its output is a pipe): 0x7FFFF000 rounded down to a whole frame.
const soxPipeSize = 0x7FFFF000

// placeholderLow is the lowest declared data size that is taken for a writer's placeholder
// rather than a promise: programs that write WAV headers to a pipe (and cannot seek back to fix
// them) put a guess just below 2 GiB there, and sox's own placeholder is 0x7FFFF000. A data chunk
// declared this large that ends early is read to its end without an error.
const placeholderLow = 1<<31 - 1<<16

// readChunkFrames is the number of frames decoded per refill of the internal byte buffer.
const readChunkFrames = 4096

// Reader decodes the samples of a WAV stream. It is not safe for concurrent use.
type Reader struct {
	br        *bufio.Reader
	format    Format
	frameSize int
	frames    int64 // declared frames, -1 when unknown
	remaining int64 // bytes left in the data chunk, -1 when unknown
	// placeholder: the declared size may be a writer's guess for a stream of unknown length
	// (within 64 KiB below 2 GiB), so data ending before it is not reported as truncated.
	placeholder bool
	pos         int64 // frames delivered so far
	buf         []byte
	err         error // sticky error (io.EOF at the end)
	raw         bool  // no RIFF container: no pad byte at the end
}

// NewReader parses the RIFF/WAVE header of r up to the start of the sample data and returns a
// Reader positioned at the first frame. It reads r through its own buffer, so r should not be
// read by anyone else afterwards. Errors wrap one of the package's sentinel errors (or are the
// underlying reader's I/O error); the caller adds the file name.
func NewReader(r io.Reader) (*Reader, error) {
	rd := &Reader{br: bufio.NewReaderSize(r, 16<<10)}
	if err := rd.parseHeader(); err != nil {
		return nil, err
	}
	return rd, nil
}

// NewRawReader returns a Reader of headerless interleaved little-endian samples in format f,
// such as `arecord -t raw` or `sox -t raw` write on a pipe: the same decoding, scaling and error
// rules as a WAV file's data chunk, with a length that is unknown (Frames returns -1). Unlike
// NewReader it reads nothing before the first Read, so it never blocks; an empty stream gives
// io.EOF on the first Read.
func NewRawReader(r io.Reader, f Format) (*Reader, error) {
	if err := f.Validate(); err != nil {
		return nil, err
	}
	return &Reader{br: bufio.NewReaderSize(r, 16<<10), format: f, frameSize: f.FrameBytes(),
		frames: -1, remaining: -1, raw: true}, nil
}

// Format returns the format of the samples.
func (r *Reader) Format() Format { return r.format }

// Frames returns the number of frames the header declares, or -1 when the length is unknown
// (a streamed file). When the data ends before the declared frames, Read reports ErrTruncated
// after delivering what there is (except for a size that looks like a streaming writer's
// placeholder, within 64 KiB below 2 GiB, which is read to the end of input).
func (r *Reader) Frames() int64 { return r.frames }

// Position returns the number of frames delivered by Read so far.
func (r *Reader) Position() int64 { return r.pos }

// Read decodes interleaved samples into dst and returns the number of samples stored, always a
// whole number of frames (a multiple of Format().Channels). It fills dst unless the data ends
// first, so it blocks on a slow stream until len(dst)/Channels frames have arrived. At the end
// of the data it returns 0, io.EOF. A stream that ends inside a frame, or a NaN or infinite
// float sample, gives an error that names the frame (counted from 0); the frames before it are
// delivered first. Errors are sticky. dst must hold at least one frame.
//
// Read allocates nothing after its first call.
func (r *Reader) Read(dst []float32) (int, error) {
	if r.err != nil {
		return 0, r.err
	}
	ch := r.format.Channels
	want := len(dst) / ch
	if want == 0 {
		return 0, fmt.Errorf("wav: Read buffer of %d samples is shorter than one frame of %d channels: %w",
			len(dst), ch, io.ErrShortBuffer)
	}
	if r.buf == nil {
		r.buf = make([]byte, readChunkFrames*r.frameSize)
	}
	fs := r.frameSize
	n := 0
	for want > 0 {
		k := min(want, readChunkFrames)
		nb := int64(k * fs)
		if r.remaining >= 0 && r.remaining < nb {
			nb = r.remaining
		}
		if nb == 0 {
			r.err = io.EOF
			break
		}
		m, err := io.ReadFull(r.br, r.buf[:nb])
		whole := m / fs
		if bad := r.decode(dst[n:], r.buf[:whole*fs]); bad >= 0 {
			n += bad * ch
			r.pos += int64(bad)
			break
		}
		n += whole * ch
		r.pos += int64(whole)
		want -= whole
		if r.remaining >= 0 {
			r.remaining -= int64(m)
		}
		switch {
		case err == io.EOF || err == io.ErrUnexpectedEOF || (err == nil && m%fs != 0):
			part := m % fs
			if part == 1 && r.remaining < 0 && !r.raw && r.buf[whole*fs] == 0 && (r.pos*int64(fs))%2 == 1 {
				// The zero pad byte of an odd-sized data chunk at the end of a stream of
				// unknown length (RIFF pads every chunk to an even size).
				part = 0
			}
			switch {
			case part != 0:
				r.err = fmt.Errorf("%w: data ends inside frame %d (%d of %d bytes); cut the file to whole frames or re-export it",
					ErrTruncated, r.pos, part, fs)
			case r.remaining > 0 && !r.placeholder:
				// The stream ended before the size that the data chunk's header declares.
				r.err = r.shortData()
			default:
				r.err = io.EOF
			}
		case err != nil:
			r.err = fmt.Errorf("wav: reading samples: %w", err)
		}
		if r.err != nil {
			break
		}
	}
	if n > 0 {
		return n, nil
	}
	return 0, r.err
}

// decode converts whole frames from src into dst. For float data it returns the index of the
// first frame holding a NaN or infinite sample, after setting r.err, or -1 when all are finite.
func (r *Reader) decode(dst []float32, src []byte) int {
	switch r.format.Encoding {
	case PCM16:
		for i := 0; i+1 < len(src); i += 2 {
			dst[i/2] = float32(int16(binary.LittleEndian.Uint16(src[i:]))) * (1.0 / 32768)
		}
	case PCM24:
		for i, j := 0, 0; i+2 < len(src); i, j = i+3, j+1 {
			v := int32(uint32(src[i])<<8|uint32(src[i+1])<<16|uint32(src[i+2])<<24) >> 8
			dst[j] = float32(v) * (1.0 / 8388608)
		}
	case PCM32:
		for i := 0; i+3 < len(src); i += 4 {
			v := int32(binary.LittleEndian.Uint32(src[i:]))
			dst[i/4] = float32(float64(v) * (1.0 / 2147483648))
		}
	case Float32:
		for i := 0; i+3 < len(src); i += 4 {
			b := binary.LittleEndian.Uint32(src[i:])
			if b&0x7F800000 == 0x7F800000 {
				frame := i / r.frameSize
				what := "infinite"
				if b&0x007FFFFF != 0 {
					what = "NaN"
				}
				abs := r.pos + int64(frame)
				r.err = fmt.Errorf("%w: %s float sample in frame %d (%.3f s), channel %d; the recording is damaged",
					ErrBadSample, what, abs, float64(abs)/float64(r.format.SampleRate), (i%r.frameSize)/4+1)
				return frame
			}
			dst[i/4] = math.Float32frombits(b)
		}
	}
	return -1
}

// header parsing state
type headerParser struct {
	br        *bufio.Reader
	off       int64 // bytes consumed so far
	rf64      bool
	ds64      bool
	dataSize  uint64 // from ds64
	haveFmt   bool
	format    Format
	frameSize int
}

func (r *Reader) parseHeader() error {
	p := &headerParser{br: r.br}
	var h [12]byte
	n, err := io.ReadFull(p.br, h[:])
	if err != nil && err != io.EOF && err != io.ErrUnexpectedEOF {
		return fmt.Errorf("wav: reading header: %w", err)
	}
	if n == 0 {
		return fmt.Errorf("%w: the input is empty (0 bytes)", ErrNotWAV)
	}
	if err := checkMagic(h[:n]); err != nil {
		return err
	}
	if n < 12 {
		return fmt.Errorf("%w: header ends after %d bytes", ErrTruncated, n)
	}
	p.off = 12
	p.rf64 = string(h[0:4]) != "RIFF"
	for {
		id, size, err := p.chunkHeader()
		if err != nil {
			return err
		}
		switch id {
		case "ds64":
			if err := p.readDS64(size); err != nil {
				return err
			}
		case "fmt ":
			if err := p.readFmt(size); err != nil {
				return err
			}
		case "data":
			if !p.haveFmt {
				return fmt.Errorf("%w: data chunk before any fmt chunk; the header is damaged", ErrBadFormat)
			}
			return r.startData(p, size)
		default:
			if err := p.skip(id, uint64(size)); err != nil {
				return err
			}
		}
	}
}

// checkMagic checks the RIFF/WAVE signature of the first (up to 12) bytes and names a few
// common other formats.
func checkMagic(h []byte) error {
	s := string(h)
	for _, m := range []string{"RIFF", "RF64", "BW64"} {
		if len(s) < 4 && m[:len(s)] == s {
			return nil // a truncated signature: reported as truncated by the caller
		}
		if len(s) >= 4 && s[:4] == m {
			if len(s) >= 12 && s[8:12] != "WAVE" {
				return fmt.Errorf("%w: a RIFF file of form %q, not WAVE", ErrNotWAV, printable(h[8:12]))
			}
			return nil
		}
	}
	switch {
	case len(s) >= 4 && s[:4] == "RIFX":
		return fmt.Errorf("%w: big-endian WAV (RIFX) (%s; convert with sox)", ErrUnsupported, accepted)
	case len(s) >= 4 && s[:4] == "FORM":
		return fmt.Errorf("%w: an AIFF file; convert it to WAV with sox", ErrNotWAV)
	case len(s) >= 4 && s[:4] == "fLaC":
		return fmt.Errorf("%w: a FLAC file; convert it to WAV with sox or flac -d", ErrNotWAV)
	case len(s) >= 4 && s[:4] == "OggS":
		return fmt.Errorf("%w: an Ogg file; convert it to WAV with sox", ErrNotWAV)
	case len(s) >= 3 && s[:3] == "ID3", len(h) >= 2 && h[0] == 0xFF && h[1]&0xE0 == 0xE0:
		return fmt.Errorf("%w: looks like MP3; decode it to WAV first", ErrNotWAV)
	}
	return fmt.Errorf("%w: starts with %q instead of RIFF", ErrNotWAV, printable(h[:min(4, len(h))]))
}

// printable replaces bytes outside printable ASCII with '.'.
func printable(b []byte) string {
	out := make([]byte, len(b))
	for i, c := range b {
		if c < 0x20 || c > 0x7E {
			c = '.'
		}
		out[i] = c
	}
	return string(out)
}

func isFourCC(b []byte) bool {
	for _, c := range b {
		if c < 0x20 || c > 0x7E {
			return false
		}
	}
	return true
}

// chunkHeader reads the next chunk's id and size.
func (p *headerParser) chunkHeader() (string, uint32, error) {
	var h [8]byte
	n, err := io.ReadFull(p.br, h[:])
	switch {
	case err == io.EOF:
		if !p.haveFmt {
			return "", 0, fmt.Errorf("%w: no fmt or data chunk (the file ends after %d bytes)", ErrNoData, p.off)
		}
		return "", 0, fmt.Errorf("%w: no data chunk (the file ends after %d bytes)", ErrNoData, p.off)
	case err == io.ErrUnexpectedEOF:
		return "", 0, fmt.Errorf("%w: chunk header at byte %d cut short after %d of 8 bytes", ErrTruncated, p.off, n)
	case err != nil:
		return "", 0, fmt.Errorf("wav: reading header: %w", err)
	}
	if !isFourCC(h[:4]) {
		return "", 0, fmt.Errorf("%w: unreadable chunk id %q at byte %d; the header is damaged",
			ErrBadFormat, printable(h[:4]), p.off)
	}
	p.off += 8
	return string(h[:4]), binary.LittleEndian.Uint32(h[4:]), nil
}

// skip discards a chunk's body and its pad byte. Reading (not seeking) keeps memory constant
// whatever size the header claims; a lying size ends at the end of input.
func (p *headerParser) skip(id string, size uint64) error {
	n, err := io.CopyN(io.Discard, p.br, int64(min(size, math.MaxInt64)))
	p.off += n
	if err == io.EOF {
		return fmt.Errorf("%w: no data chunk (the file ends inside a %q chunk that claims %d bytes)", ErrNoData, id, size)
	}
	if err != nil {
		return fmt.Errorf("wav: skipping %q chunk: %w", id, err)
	}
	return p.pad(size)
}

// pad skips the pad byte after an odd-sized chunk, unless the writer left it out: a pad byte
// is zero, so when the next four bytes already form a printable chunk id, there is none.
func (p *headerParser) pad(size uint64) error {
	if size%2 == 0 {
		return nil
	}
	b, _ := p.br.Peek(4)
	if len(b) == 4 && isFourCC(b) {
		return nil
	}
	if len(b) == 0 {
		return nil // end of input: reported by the next chunk header
	}
	if _, err := p.br.Discard(1); err != nil {
		return fmt.Errorf("wav: reading header: %w", err)
	}
	p.off++
	return nil
}

// readBody reads a chunk body of the given size, keeping at most len(dst) bytes and skipping
// the rest. It returns the number of bytes kept.
func (p *headerParser) readBody(id string, size uint32, dst []byte) (int, error) {
	k := min(int(size), len(dst))
	n, err := io.ReadFull(p.br, dst[:k])
	p.off += int64(n)
	if err == io.EOF || err == io.ErrUnexpectedEOF {
		return n, fmt.Errorf("%w: %q chunk at byte %d cut short after %d of %d bytes", ErrTruncated, id, p.off-int64(n)-8, n, size)
	}
	if err != nil {
		return n, fmt.Errorf("wav: reading %q chunk: %w", id, err)
	}
	if rest := uint64(size) - uint64(k); rest > 0 {
		m, err := io.CopyN(io.Discard, p.br, int64(rest))
		p.off += m
		if err == io.EOF {
			return n, fmt.Errorf("%w: %q chunk cut short after %d of %d bytes", ErrTruncated, id, uint64(k)+uint64(m), size)
		}
		if err != nil {
			return n, fmt.Errorf("wav: reading %q chunk: %w", id, err)
		}
	}
	return n, p.pad(uint64(size))
}

func (p *headerParser) readDS64(size uint32) error {
	var b [28]byte
	n, err := p.readBody("ds64", size, b[:])
	if err != nil {
		return err
	}
	if n < 16 {
		return fmt.Errorf("%w: ds64 chunk of %d bytes, need at least 16", ErrBadFormat, size)
	}
	p.ds64 = true
	p.dataSize = binary.LittleEndian.Uint64(b[8:])
	return nil
}

// formatTagName names the format tags that are seen in the wild but not accepted.
func formatTagName(tag uint16) string {
	switch tag {
	case 0x0002:
		return "Microsoft ADPCM"
	case 0x0006:
		return "A-law"
	case 0x0007:
		return "mu-law"
	case 0x0011:
		return "IMA ADPCM"
	case 0x0031:
		return "GSM 6.10"
	case 0x0050:
		return "MPEG audio"
	case 0x0055:
		return "MP3"
	case 0x2000:
		return "AC-3"
	}
	return fmt.Sprintf("format tag 0x%04X", tag)
}

func (p *headerParser) readFmt(size uint32) error {
	if p.haveFmt {
		return fmt.Errorf("%w: a second fmt chunk at byte %d; the header is damaged", ErrBadFormat, p.off-8)
	}
	if size < 16 {
		return fmt.Errorf("%w: fmt chunk of %d bytes, need at least 16", ErrBadFormat, size)
	}
	var b [40]byte
	n, err := p.readBody("fmt ", size, b[:])
	if err != nil {
		return err
	}
	tag := binary.LittleEndian.Uint16(b[0:])
	channels := int(binary.LittleEndian.Uint16(b[2:]))
	rate := binary.LittleEndian.Uint32(b[4:])
	blockAlign := int(binary.LittleEndian.Uint16(b[12:]))
	bits := int(binary.LittleEndian.Uint16(b[14:]))
	valid := 0
	extensible := tag == tagExtensible
	if extensible {
		if n < 40 {
			return fmt.Errorf("%w: WAVE_FORMAT_EXTENSIBLE fmt chunk of %d bytes, need 40", ErrBadFormat, size)
		}
		if cb := binary.LittleEndian.Uint16(b[16:]); cb < 22 {
			return fmt.Errorf("%w: WAVE_FORMAT_EXTENSIBLE fmt chunk with an extension of %d bytes, need 22", ErrBadFormat, cb)
		}
		valid = int(binary.LittleEndian.Uint16(b[18:]))
		if [14]byte(b[26:40]) != guidTail {
			return fmt.Errorf("%w: WAVE_FORMAT_EXTENSIBLE with a sub-format GUID that is neither PCM nor float (%s)",
				ErrUnsupported, accepted)
		}
		tag = binary.LittleEndian.Uint16(b[24:])
		if bits%8 != 0 {
			return fmt.Errorf("%w: WAVE_FORMAT_EXTENSIBLE with a %d-bit container (must be whole bytes)", ErrBadFormat, bits)
		}
		if valid > bits {
			return fmt.Errorf("%w: %d valid bits in a %d-bit sample", ErrBadFormat, valid, bits)
		}
	}
	var enc Encoding
	switch tag {
	case tagPCM:
		container := (bits + 7) / 8 * 8
		if !extensible && container != bits {
			valid = bits // e.g. 20-bit samples in 3-byte containers
		}
		switch {
		case bits == 0:
			return fmt.Errorf("%w: integer PCM with 0 bits per sample", ErrBadFormat)
		case container == 8:
			return fmt.Errorf("%w: 8-bit unsigned PCM (%s; convert with sox -b 16)", ErrUnsupported, accepted)
		case container == 16:
			enc = PCM16
		case container == 24:
			enc = PCM24
		case container == 32:
			enc = PCM32
		default:
			return fmt.Errorf("%w: %d-bit integer PCM (%s; convert with sox -b 32)", ErrUnsupported, bits, accepted)
		}
	case tagFloat:
		switch bits {
		case 32:
			enc = Float32
		case 64:
			return fmt.Errorf("%w: 64-bit float (%s; convert with sox -e floating-point -b 32)", ErrUnsupported, accepted)
		default:
			return fmt.Errorf("%w: %d-bit float", ErrBadFormat, bits)
		}
	default:
		return fmt.Errorf("%w: %s encoding (%s; convert with sox -e signed-integer -b 24)",
			ErrUnsupported, formatTagName(tag), accepted)
	}
	if valid == enc.Bits() {
		valid = 0
	}
	f := Format{SampleRate: int(min(rate, math.MaxInt32)), Channels: channels, Encoding: enc, ValidBits: valid}
	if err := f.Validate(); err != nil {
		return err
	}
	if blockAlign != f.FrameBytes() {
		return fmt.Errorf("%w: block size %d bytes does not match %d channels of %d-byte samples; the header is damaged",
			ErrBadFormat, blockAlign, channels, enc.Bytes())
	}
	p.format = f
	p.frameSize = blockAlign
	p.haveFmt = true
	return nil
}

// startData sets up r to read the data chunk whose header has just been read.
func (r *Reader) startData(p *headerParser, size uint32) error {
	r.format = p.format
	r.frameSize = p.frameSize
	fs := uint64(p.frameSize)
	known := true
	total := uint64(size)
	switch {
	case p.rf64 && size == 0xFFFFFFFF && p.ds64:
		total = p.dataSize
	case size == 0 || size == 0xFFFFFFFF:
		known = false
	case uint64(size) == soxPipeSize-soxPipeSize%fs:
		known = false
	}
	if known && total > math.MaxInt64 {
		known = false
	}
	if known {
		r.remaining = int64(total)
		r.frames = int64(total / fs)
		r.placeholder = total >= placeholderLow && total <= 1<<31
	} else {
		r.remaining = -1
		r.frames = -1
	}
	b, err := r.br.Peek(p.frameSize)
	if err != nil && err != io.EOF && err != bufio.ErrBufferFull {
		return fmt.Errorf("wav: reading samples: %w", err)
	}
	switch {
	case len(b) == 0:
		return fmt.Errorf("%w: the data chunk holds no samples", ErrNoData)
	case known && total < fs:
		return fmt.Errorf("%w: the data chunk of %d bytes is shorter than one frame (%d bytes)", ErrNoData, total, fs)
	case len(b) < p.frameSize:
		return fmt.Errorf("%w: data ends inside frame 0 (%d of %d bytes)", ErrTruncated, len(b), fs)
	}
	return nil
}

// shortData is the error for a data chunk that ends before its declared size: the file was cut
// short (a copy or a recording that did not finish), so some of the recording is missing.
func (r *Reader) shortData() error {
	rate := float64(r.format.SampleRate)
	return fmt.Errorf("%w: the data ends after %d of the %d frames the header declares (%.2f s of %.2f s); "+
		"copy the whole file again, or if the rest is lost for good, rewrite the header with `sox --ignore-length IN.wav OUT.wav`",
		ErrTruncated, r.pos, r.frames, float64(r.pos)/rate, float64(r.frames)/rate)
}
