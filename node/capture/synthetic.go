package capture

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"math"
	"sync"
	"time"

	"github.com/leqnode/leqnode/node/lib/scene"
	"github.com/leqnode/leqnode/node/lib/strict"
)

// synthetic delivers the invented street scene of package scene.
type synthetic struct {
	cfg    Config
	logger *slog.Logger

	mu     sync.Mutex
	closed bool
	done   chan struct{}

	ctx    context.Context
	sc     *scene.Scene
	format Format
	pace   *pacer
	pos    int64
	end    int64 // sample count at which the scene ends, -1 for never
}

func newSynthetic(c Config, logger *slog.Logger) (*synthetic, error) {
	s := &synthetic{cfg: c, logger: logger}
	// Check the scene's own limits now, so a bad config fails at New rather than at Open.
	if _, err := scene.New(s.sceneConfig(time.Time{})); err != nil {
		return nil, fmt.Errorf("%s: %w", section, err)
	}
	return s, nil
}

// sceneConfig returns the scene description; now is the time of Open.
func (s *synthetic) sceneConfig(now time.Time) scene.Config {
	if s.cfg.Scene != nil {
		return *s.cfg.Scene
	}
	sc := scene.Config{SampleRate: s.cfg.SampleRate, Seed: s.cfg.Seed, CalibratorSeconds: s.cfg.CalibratorSeconds}
	switch {
	case s.cfg.Start != "":
		sc.Start, _ = strict.ParseTime(s.cfg.Start) // checked by Validate
	case s.cfg.Realtime:
		sc.Start = now
	}
	return sc
}

// Open starts the scene. Opened again after Close, the scene goes on where it stopped (a
// block whose pacing wait Close interrupted is lost, as from a real device).
func (s *synthetic) Open(ctx context.Context) (Format, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.sc != nil && !s.closed {
		return s.format, fmt.Errorf("synthetic: already open")
	}
	if s.sc == nil {
		sc, err := scene.New(s.sceneConfig(time.Now()))
		if err != nil {
			return Format{}, fmt.Errorf("%s: %w", section, err)
		}
		s.sc = sc
		s.format = Format{SampleRate: sc.SampleRate(), Channels: 1, Channel: 1, Sample: Float32}
		s.end = -1
		if s.cfg.DurationSeconds > 0 {
			s.end = int64(math.Round(s.cfg.DurationSeconds * float64(sc.SampleRate())))
		}
	}
	s.ctx, s.closed, s.done = ctx, false, make(chan struct{})
	if s.cfg.Realtime {
		s.pace = newPacerAt(s.format.SampleRate, s.pos)
	}
	s.logger.Info("synthetic street scene", "seed", s.sc.Config().Seed, "rate", s.format.SampleRate,
		"calibrator_s", s.sc.Config().CalibratorSeconds, "realtime", s.cfg.Realtime, "from_sample", s.pos)
	return s.format, nil
}

func (s *synthetic) Read(dst []float32) (int, error) {
	s.mu.Lock()
	closed, open, done := s.closed, s.sc != nil, s.done
	s.mu.Unlock()
	switch {
	case closed:
		return 0, fmt.Errorf("synthetic: %w", ErrClosed)
	case !open:
		return 0, fmt.Errorf("synthetic: read before Open")
	case len(dst) == 0:
		return 0, io.ErrShortBuffer
	}
	if err := s.ctx.Err(); err != nil {
		return 0, err
	}
	n := min(len(dst), s.cfg.FramesPerBuffer)
	if s.end >= 0 {
		if s.pos >= s.end {
			return 0, io.EOF
		}
		n = int(min(int64(n), s.end-s.pos))
	}
	s.sc.Read(dst[:n])
	s.pos += int64(n)
	if s.pace != nil {
		if err := s.pace.wait(s.ctx, done, s.pos); err != nil {
			if err == ErrClosed {
				err = fmt.Errorf("synthetic: %w", err)
			}
			return 0, err
		}
	}
	return n, nil
}

func (s *synthetic) Dropped() int64 { return 0 }

// Clipped returns the number of samples the scene clipped at full scale so far, as a real
// converter would (a scene too loud for the microphone's sensitivity). Call it from the
// goroutine that reads.
func (s *synthetic) Clipped() int64 {
	if s.sc == nil {
		return 0
	}
	return s.sc.Clipped()
}

func (s *synthetic) Close() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if !s.closed {
		s.closed = true
		if s.done != nil {
			close(s.done)
		}
	}
	return nil
}

func (s *synthetic) Describe() string {
	mode := "as fast as possible"
	if s.cfg.Realtime {
		mode = "in real time"
	}
	seed, rate := s.cfg.Seed, s.cfg.SampleRate
	if s.cfg.Scene != nil {
		seed, rate = s.cfg.Scene.Seed, s.cfg.Scene.SampleRate
	}
	if rate == 0 {
		rate = 48000
	}
	return fmt.Sprintf("synthetic: street scene seed %d @%d Hz, %s", seed, rate, mode)
}
