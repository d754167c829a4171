package capture

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"sync"

	"github.com/leqnode/leqnode/node/lib/wav"
)

// fileSource replays a WAV file as fast as possible or in real time.
type fileSource struct {
	cfg    Config
	logger *slog.Logger

	mu     sync.Mutex // guards f, closed and done against a concurrent Close
	f      *os.File
	closed bool
	done   chan struct{} // closed by Close, ends a pacing wait

	ctx    context.Context
	format Format
	dec    *wavDecoder
	pace   *pacer
	pos    int64 // samples delivered
}

func newFile(c Config, logger *slog.Logger) *fileSource {
	return &fileSource{cfg: c, logger: logger}
}

// Open opens the file and reads its header. Opened again after Close, it resumes at the
// sample where it stopped (the file is a stream that went on), paced from then on.
func (s *fileSource) Open(ctx context.Context) (Format, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.f != nil {
		return s.format, fmt.Errorf("file %s: already open", s.cfg.File)
	}
	f, err := os.Open(s.cfg.File)
	if err != nil {
		return Format{}, fmt.Errorf("%w (check %s.file)", err, section)
	}
	wr, err := wav.NewReader(f)
	if err != nil {
		_ = f.Close() // read only, and the header's error is the one to report
		return Format{}, fmt.Errorf("file %s: %w: %w", s.cfg.File, ErrBadInput, err)
	}
	format, err := wavFormat(wr.Format(), s.cfg, "file "+s.cfg.File)
	if err != nil {
		_ = f.Close() // read only, and the format's error is the one to report
		return Format{}, err
	}
	if s.pos > 0 && format != s.format {
		_ = f.Close() // read only, and the change is the error to report
		return Format{}, fmt.Errorf("file %s: %w: the file changed from %s to %s while it was replayed", s.cfg.File, ErrBadInput, s.format, format)
	}
	dec := newWAVDecoder(wr, format, s.cfg.FramesPerBuffer)
	if s.pos > 0 {
		// Resume: decode and drop what was delivered before.
		skip := make([]float32, s.cfg.FramesPerBuffer)
		for left := s.pos; left > 0; {
			n, err := dec.read(skip[:min(int64(len(skip)), left)])
			if err != nil {
				break // the file got shorter; Read reports its end
			}
			left -= int64(n)
		}
	}
	s.f, s.ctx, s.format, s.dec = f, ctx, format, dec
	s.closed, s.done = false, make(chan struct{})
	if s.cfg.Realtime {
		s.pace = newPacerAt(format.SampleRate, s.pos)
	}
	s.logger.Info("replaying a recording", "file", s.cfg.File, "format", format.String(),
		"realtime", s.cfg.Realtime, "frames", wr.Frames(), "from_sample", s.pos)
	return format, nil
}

func (s *fileSource) Read(dst []float32) (int, error) {
	s.mu.Lock()
	closed, open, done := s.closed, s.f != nil, s.done
	s.mu.Unlock()
	switch {
	case closed:
		return 0, fmt.Errorf("file %s: %w", s.cfg.File, ErrClosed)
	case !open:
		return 0, fmt.Errorf("file %s: read before Open", s.cfg.File)
	case len(dst) == 0:
		return 0, io.ErrShortBuffer
	}
	if err := s.ctx.Err(); err != nil {
		return 0, err
	}
	n, err := s.dec.read(dst[:min(len(dst), s.cfg.FramesPerBuffer)])
	if err != nil {
		if s.isClosed() {
			return 0, fmt.Errorf("file %s: %w", s.cfg.File, ErrClosed)
		}
		if !errors.Is(err, io.EOF) {
			err = fmt.Errorf("file %s: %w", s.cfg.File, err)
		}
		return 0, err
	}
	if s.pace != nil {
		if err := s.pace.wait(s.ctx, done, s.pos+int64(n)); err != nil {
			// The block is not delivered: a resumed replay starts with it again.
			if errors.Is(err, ErrClosed) {
				err = fmt.Errorf("file %s: %w", s.cfg.File, err)
			}
			return 0, err
		}
	}
	s.pos += int64(n)
	return n, nil
}

func (s *fileSource) isClosed() bool {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.closed
}

func (s *fileSource) Dropped() int64 { return 0 }

// Close closes the file. It ends a Read that waits for its pacing deadline.
func (s *fileSource) Close() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closed || s.f == nil {
		s.closed = true
		return nil
	}
	s.closed = true
	close(s.done)
	err := s.f.Close()
	s.f = nil
	return err
}

func (s *fileSource) Describe() string {
	mode := "as fast as possible"
	if s.cfg.Realtime {
		mode = "in real time"
	}
	if s.format.SampleRate == 0 {
		return fmt.Sprintf("file: %s, %s", s.cfg.File, mode)
	}
	return fmt.Sprintf("file: %s (%s), %s", s.cfg.File, s.format, mode)
}
