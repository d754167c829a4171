package scene

import (
	"math"
	"testing"
	"time"
)

// FuzzConfig: any configuration is either refused with an error or gives finite samples within
// full scale, whatever the numbers (NaN, infinities, extremes included).
func FuzzConfig(f *testing.F) {
	f.Add(48000, int64(1), -26.0, 5.0, 94.0, 1000.0, 42.0, 3.0, int64(12*time.Minute), 1.5, int64(0))
	f.Add(8000, int64(-3), -80.0, 1e-9, 140.0, 3599.0, 100.0, 120.0, int64(2*time.Minute), 60.0, int64(1<<40))
	f.Add(192000, int64(7), -0.5, 0.0001, 1e-3, 1.0, 1e-3, -1.0, int64(-1), -1.0, int64(-1<<50))
	f.Add(44100, int64(0), math.NaN(), math.Inf(1), 94.0, 1000.0, 42.0, math.Inf(-1), int64(0), math.NaN(), int64(0))
	f.Fuzz(func(t *testing.T, rate int, seed int64, sens, calS, calL, calF, bg, cars float64, bus int64, birds float64, start int64) {
		c := Config{SampleRate: rate, Seed: seed, SensitivityDBFS: sens, CalibratorSeconds: calS,
			CalibratorLevel: calL, CalibratorFrequency: calF, BackgroundLevel: bg, CarsPerMinute: cars,
			BusInterval: time.Duration(bus), BirdSongsPerMinute: birds}
		if start != 0 {
			c.Start = time.Unix(start%(1<<40), 0)
		}
		s, err := New(c)
		if err != nil {
			return
		}
		buf := make([]float32, 4096)
		for i := 0; i < 4; i++ {
			s.Read(buf)
			for j, v := range buf {
				if math.IsNaN(float64(v)) || v > 1 || v < -1 {
					t.Fatalf("sample %d: %v", i*len(buf)+j, v)
				}
			}
		}
		_ = s.Events(0, int64(s.SampleRate())*120)
	})
}
