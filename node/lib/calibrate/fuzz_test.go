package calibrate

import (
	"math"
	"os"
	"path/filepath"
	"testing"
)

// FuzzLoadState: any bytes in the state file give a state that passes validation or an error,
// never a panic, and a valid state survives a save and a load unchanged.
func FuzzLoadState(f *testing.F) {
	f.Add([]byte(`{"sensitivity_dBFS": -25.4, "nominal_dBFS": -26, "at": "2026-06-04T07:30:00Z", "reference_dB": 94, "frequency_hz": 1000.02}`))
	f.Add([]byte(`{"sensitivity_dBFS": 3}`))
	f.Add([]byte(`{"sensitivity_dBFS": "x"}`))
	f.Add([]byte(`null`))
	f.Add([]byte{})
	f.Fuzz(func(t *testing.T, data []byte) {
		dir := t.TempDir()
		if err := os.WriteFile(filepath.Join(dir, StateFile), data, 0o644); err != nil {
			t.Fatal(err)
		}
		s, err := LoadState(dir)
		if err != nil {
			return
		}
		if math.IsNaN(s.SensitivityDBFS) || s.SensitivityDBFS > 0 || s.SensitivityDBFS < -100 {
			t.Fatalf("invalid state loaded: %+v", s)
		}
		if err := SaveState(dir, *s); err != nil {
			t.Fatalf("a loaded state cannot be saved: %v", err)
		}
		again, err := LoadState(dir)
		if err != nil || !again.At.Equal(s.At) || again.SensitivityDBFS != s.SensitivityDBFS {
			t.Fatalf("round trip: %+v, %v; want %+v", again, err, s)
		}
	})
}
