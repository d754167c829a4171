package scene

import (
	"fmt"
	"io"
	"math"
	"time"

	"github.com/leqnode/leqnode/node/lib/wav"
)

// Render writes duration d of the scene described by cfg to w as a mono 24-bit PCM WAV file
// (the sizes are filled in when w can seek, left unknown otherwise). It reports clipping, which
// the default scene never reaches, as an error after writing the whole file.
func Render(w io.Writer, cfg Config, d time.Duration) error {
	s, err := New(cfg)
	if err != nil {
		return err
	}
	if d <= 0 {
		return fmt.Errorf("scene: duration %v must be positive", d)
	}
	frames := int64(math.Round(d.Seconds() * float64(s.SampleRate())))
	ww, err := wav.NewWriter(w, wav.Format{SampleRate: s.SampleRate(), Channels: 1, Encoding: wav.PCM24})
	if err != nil {
		return fmt.Errorf("scene: %w", err)
	}
	buf := make([]float32, 4800)
	for left := frames; left > 0; {
		n := int(min(left, int64(len(buf))))
		s.Read(buf[:n])
		if err := ww.Write(buf[:n]); err != nil {
			return fmt.Errorf("scene: %w", err)
		}
		left -= int64(n)
	}
	if err := ww.Close(); err != nil {
		return fmt.Errorf("scene: %w", err)
	}
	if c := s.Clipped() + ww.Clipped(); c > 0 {
		return fmt.Errorf("scene: %d samples clipped at full scale; lower the sensitivity (now %g dBFS) or the levels",
			c, s.cfg.SensitivityDBFS)
	}
	return nil
}
