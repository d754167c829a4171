package indicator

import (
	"math"

	"github.com/leqnode/leqnode/dsp"
)

// Composite returns the whole-day indicator of period levels with penalties, weighted by the
// periods' lengths:
//
//	L = 10 lg{ Σ Ti · 10^((Li + Pi)/10) / Σ Ti }
//
// With the day, evening and night levels, penalties 0, 5 and 10 dB and lengths 12, 4 and 8 hours
// this is Lden of Directive 2002/49/EC, Annex I, section 1 (also ISO 1996-1:2016 Annex C.2);
// with 15 and 9 hours and penalties 0 and 10 dB it is the day-night level Ldn. A NaN level (no
// data) gives NaN: a whole-day indicator needs every period.
func Composite(levels, hours, penalties []float64) float64 {
	var e, t float64
	for i, l := range levels {
		if math.IsNaN(l) || math.IsInf(l, 0) {
			return math.NaN()
		}
		e += hours[i] * math.Pow(10, (l+penalties[i])/10)
		t += hours[i]
	}
	if t == 0 {
		return math.NaN()
	}
	return 10 * math.Log10(e/t)
}

// Tonality margins of the one-third-octave screen, by band: a band is a tone candidate when its
// level exceeds both neighbours by at least 15 dB from 25 to 125 Hz, 8 dB from 160 to 400 Hz and
// 5 dB from 500 Hz to 10 kHz (ISO 1996-2:2007 Annex K (from memory)). Outside 25 Hz to 10 kHz
// the screen says nothing.
func TonalMargin(x int) (margin float64, ok bool) {
	switch {
	case x >= -16 && x <= -9: // 25 to 125 Hz
		return 15, true
	case x >= -8 && x <= -4: // 160 to 400 Hz
		return 8, true
	case x >= -3 && x <= 10: // 500 Hz to 10 kHz
		return 5, true
	}
	return 0, false
}

// TonalBand is a one-third-octave band that the tonality screen picked out.
type TonalBand struct {
	X       int     // IEC 61260-1 band number (0 is 1 kHz)
	Nominal string  // nominal midband frequency, "1000"
	Level   float64 // the band's level, dB
	Above   float64 // by how much it exceeds the louder of its two neighbours, dB
	Margin  float64 // the margin it had to reach, dB
}

// Tonal screens a one-third-octave spectrum for prominent tones in the manner of ISO 1996-2:
// levels[i] is the level of band first+i (IEC 61260-1 band numbers). It returns the bands that
// exceed both neighbours by their TonalMargin. A screen, not an assessment: a candidate calls
// for a narrow-band analysis (ISO 1996-2:2007 Annex K (from memory)).
func Tonal(first int, levels []float64) []TonalBand {
	var out []TonalBand
	for i := 1; i+1 < len(levels); i++ {
		x := first + i
		m, ok := TonalMargin(x)
		if !ok {
			continue
		}
		l, lo, hi := levels[i], levels[i-1], levels[i+1]
		if math.IsNaN(l) || math.IsNaN(lo) || math.IsNaN(hi) || math.IsInf(l, -1) {
			continue
		}
		above := l - max(lo, hi)
		if above >= m {
			out = append(out, TonalBand{X: x, Nominal: Nominal(x), Level: l, Above: above, Margin: m})
		}
	}
	return out
}

// Nominal returns the nominal midband frequency of one-third-octave band x (IEC 61260-1:2014
// Annex E), or "" outside 12.5 Hz to 40 kHz.
func Nominal(x int) string {
	for _, b := range dsp.Bands(dsp.Third, 96000) {
		if b.X == x {
			return b.Nominal
		}
	}
	return ""
}
