package capture

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"sync/atomic"

	"github.com/leqnode/leqnode/node/lib/wav"
)

// stream is the stdin source: raw PCM or a WAV stream from an io.Reader.
type stream struct {
	cfg    Config
	in     io.Reader
	name   string
	logger *slog.Logger

	ctx    context.Context
	pump   *pump // reads s.in so that Close can end a Read waiting for input
	format Format
	dec    decoder
	closed atomic.Bool
}

// decoder reads mono samples of one channel; wavDecoder and rawDecoder implement it.
type decoder interface {
	read(dst []float32) (int, error)
}

func newStream(c Config, r io.Reader, name string, logger *slog.Logger) *stream {
	return &stream{cfg: c, in: r, name: name, logger: logger, pump: newPump(r)}
}

// wavMagic reports whether b starts like a RIFF/WAVE, RF64 or BW64 file.
func wavMagic(b []byte) bool {
	return bytes.HasPrefix(b, []byte("RIFF")) || bytes.HasPrefix(b, []byte("RF64")) || bytes.HasPrefix(b, []byte("BW64"))
}

// Open reads the stream's header (a WAV stream) or takes the format from the configuration
// (raw PCM). Opened again after Close, it resumes the same stream where it stopped.
func (s *stream) Open(ctx context.Context) (Format, error) {
	if s.dec != nil {
		if !s.closed.Load() {
			return s.format, fmt.Errorf("%s: already open", s.name)
		}
		s.ctx = ctx
		s.pump.arm(ctx)
		s.closed.Store(false)
		return s.format, nil
	}
	s.closed.Store(false)
	s.ctx = ctx
	s.pump.arm(ctx)
	br := bufio.NewReaderSize(s.pump, 64<<10)
	isWAV := s.cfg.StdinFormat == StdinWAV
	if s.cfg.StdinFormat == StdinAuto {
		head, err := br.Peek(4)
		if len(head) == 0 && err != nil {
			if errors.Is(err, io.EOF) {
				return Format{}, fmt.Errorf("%s: %w: the stream is empty; send a WAV stream or raw PCM", s.name, ErrBadInput)
			}
			return Format{}, fmt.Errorf("%s: %w", s.name, err)
		}
		isWAV = wavMagic(head)
	}
	if isWAV {
		wr, err := wav.NewReader(br)
		if err != nil {
			return Format{}, fmt.Errorf("%s: %w: %w", s.name, ErrBadInput, err)
		}
		f, err := wavFormat(wr.Format(), s.cfg, s.name)
		if err != nil {
			return Format{}, err
		}
		s.format = f
		s.dec = newWAVDecoder(wr, f, s.cfg.FramesPerBuffer)
		s.logger.Debug("reading a WAV stream", "name", s.name, "format", f.String())
		return f, nil
	}
	c := s.cfg
	if c.SampleRate == 0 || c.Sample == "" {
		return Format{}, fmt.Errorf("%s: %w: no WAV header, so the stream is read as raw PCM, which needs %s.sample_rate and %s.sample_format (and channels) in the config",
			s.name, ErrBadInput, section, section)
	}
	s.format = Format{SampleRate: c.SampleRate, Channels: c.Channels, Channel: c.Channel, Sample: c.Sample}
	s.dec = newRawDecoder(br, newLayout(c.Sample, c.Channels, c.Channel), c.FramesPerBuffer, s.name, s.logger)
	s.logger.Debug("reading raw PCM", "name", s.name, "format", s.format.String())
	return s.format, nil
}

// wavFormat checks a WAV format against the configuration and returns the source Format.
func wavFormat(wf wav.Format, c Config, name string) (Format, error) {
	if c.SampleRate != 0 && c.SampleRate != wf.SampleRate {
		return Format{}, fmt.Errorf("%s: %w: the recording is %d Hz but %s.sample_rate is %d; set it to 0 or resample the recording",
			name, ErrBadInput, wf.SampleRate, section, c.SampleRate)
	}
	if c.Channel > wf.Channels {
		return Format{}, fmt.Errorf("%s: %w: %s.channel = %d but the recording has %d channel(s); choose 1 to %d",
			name, ErrBadInput, section, c.Channel, wf.Channels, wf.Channels)
	}
	sample := map[wav.Encoding]string{wav.PCM16: Int16, wav.PCM24: Int24, wav.PCM32: Int32, wav.Float32: Float32}[wf.Encoding]
	if wf.Encoding == wav.PCM32 && wf.ValidBits == 24 {
		sample = Int24in32
	}
	return Format{SampleRate: wf.SampleRate, Channels: wf.Channels, Channel: c.Channel, Sample: sample}, nil
}

func (s *stream) Read(dst []float32) (int, error) {
	if s.closed.Load() {
		return 0, fmt.Errorf("%s: %w", s.name, ErrClosed)
	}
	if s.dec == nil {
		return 0, fmt.Errorf("%s: read before Open", s.name)
	}
	if len(dst) == 0 {
		return 0, io.ErrShortBuffer
	}
	if err := s.ctx.Err(); err != nil {
		return 0, err
	}
	return s.dec.read(dst)
}

func (s *stream) Dropped() int64 { return 0 }

// Close marks the source closed until the next Open and ends a Read that waits for input (see
// pump). It does not close the underlying reader, which belongs to the caller (os.Stdin, say).
func (s *stream) Close() error {
	s.closed.Store(true)
	s.pump.interrupt()
	return nil
}

func (s *stream) Describe() string {
	if s.format.SampleRate == 0 {
		return s.name
	}
	return fmt.Sprintf("%s: %s", s.name, s.format)
}

// wavDecoder picks one channel out of a wav.Reader.
type wavDecoder struct {
	r        *wav.Reader
	channels int
	ch       int
	buf      []float32
}

func newWAVDecoder(r *wav.Reader, f Format, block int) *wavDecoder {
	return &wavDecoder{r: r, channels: f.Channels, ch: f.Channel - 1, buf: make([]float32, block*f.Channels)}
}

func (d *wavDecoder) read(dst []float32) (int, error) {
	if d.channels == 1 {
		n, err := d.r.Read(dst[:min(len(dst), len(d.buf))])
		return d.result(n, err)
	}
	n, err := d.r.Read(d.buf[:min(len(dst), len(d.buf)/d.channels)*d.channels])
	n = pick(dst, d.buf[:n], d.channels, d.ch, 1)
	return d.result(n, err)
}

// result keeps the Source contract: samples first, the error (io.EOF) on the next call.
func (d *wavDecoder) result(n int, err error) (int, error) {
	if n > 0 {
		return n, nil
	}
	if err == nil {
		// wav.Reader returns at least one frame or an error; never loop on (0, nil).
		err = io.ErrNoProgress
	}
	if errors.Is(err, io.EOF) {
		return 0, io.EOF
	}
	return 0, fmt.Errorf("%w: %w", ErrBadInput, err)
}

// rawDecoder reads interleaved raw PCM.
type rawDecoder struct {
	r      io.Reader
	layout pcmLayout
	name   string
	logger *slog.Logger
	buf    []byte
	have   int   // bytes held in buf
	pos    int64 // frames decoded so far
	err    error // sticky
}

func newRawDecoder(r io.Reader, l pcmLayout, block int, name string, logger *slog.Logger) *rawDecoder {
	return &rawDecoder{r: r, layout: l, name: name, logger: logger, buf: make([]byte, block*l.frameBytes())}
}

func (d *rawDecoder) read(dst []float32) (int, error) {
	fb := d.layout.frameBytes()
	for empty := 0; d.have < fb; {
		if d.err != nil {
			if d.err == io.EOF && d.have > 0 {
				d.logger.Warn("raw stream ended inside a frame; the partial frame is ignored",
					"name", d.name, "stray_bytes", d.have, "frame_bytes", fb)
				d.have = 0
			}
			return 0, d.err
		}
		n, err := d.r.Read(d.buf[d.have:])
		d.have += n
		switch {
		case errors.Is(err, io.EOF):
			d.err = io.EOF
		case err != nil:
			d.err = fmt.Errorf("%s: %w", d.name, err)
		case n == 0:
			if empty++; empty >= 100 {
				d.err = fmt.Errorf("%s: %w", d.name, io.ErrNoProgress)
			}
		}
	}
	n, err := d.layout.decode(dst, d.buf[:d.have], d.pos)
	used := n * fb
	copy(d.buf, d.buf[used:d.have])
	d.have -= used
	d.pos += int64(n)
	if err != nil {
		d.err = fmt.Errorf("%s: %w", d.name, err)
		if n == 0 {
			return 0, d.err
		}
	}
	return n, nil
}
