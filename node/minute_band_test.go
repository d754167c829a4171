package node

import (
	"math"
	"testing"

	"github.com/leqnode/leqnode/buffer/record"
)

// TestMinuteSpectrumAtStreamEnd: a minute closed by the end of the stream, holding a loud
// burst, has in every one-third-octave band the energy mean of its counted seconds' band
// levels (ISO 1996-1:2016, 3.1.7, written out in energyMean). The seconds still waiting for
// their minute when the stream ends once shared the meter's last settled band times, so they
// dropped out of the band means and the burst counted some 0.8 dB too loud.
func TestMinuteSpectrumAtStreamEnd(t *testing.T) {
	const fs = 16000
	sig := func(i int64) float32 {
		v := 0.0027 * noise(i) // about 64 dB at -26 dBFS
		if t := float64(i) / fs; t >= 20 && t < 22 {
			v *= 30 // a burst some 30 dB up
		}
		return float32(v)
	}
	src := &fakeSource{fs: fs, signal: sig, total: 60 * fs, t0: t0}
	r := newRig(t, src, nil)
	r.run(t)
	mins := records[*record.Minute](t, r.store, record.KindMinute)
	secs := records[*record.Second](t, r.store, record.KindSecond)
	if len(mins) != 1 || len(secs) != 60 {
		t.Fatalf("%d minutes and %d seconds, want 1 and 60", len(mins), len(secs))
	}
	m := mins[0]
	checked := 0
	for k, got := range m.Spectrum {
		var levels []float64
		for _, s := range secs {
			if s.Flags&record.Settling != 0 {
				continue
			}
			if j := m.FirstBand + k - s.FirstBand; j >= 0 && j < len(s.Spectrum) && !math.IsNaN(s.Spectrum[j]) {
				levels = append(levels, s.Spectrum[j])
			}
		}
		if len(levels) != m.ValidSeconds || math.IsNaN(got) {
			continue // a band not settled in every second: its mean covers fewer seconds
		}
		checked++
		if want := energyMean(levels); math.Abs(got-want) > 0.02 {
			t.Errorf("band %d: minute %.2f dB, energy mean of its %d seconds %.2f dB", m.FirstBand+k, got, len(levels), want)
		}
	}
	if checked < 20 {
		t.Errorf("only %d bands checked", checked)
	}
}
