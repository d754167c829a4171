package calibrate

import (
	"fmt"
	"math"

	"github.com/leqnode/leqnode/dsp"
)

// The plausible range of a measuring chain's sensitivity, dBFS for a 1 kHz sine of 94 dB SPL,
// used when no nominal sensitivity is known (common practice, from what microphones are sold
// with): digital MEMS microphones are specified near -26 dBFS, which puts full scale at
// 120 dB SPL ("Understanding Microphone Sensitivity", Analog Dialogue: S = -26 dBFS gives a
// full-scale sine of 120 dB SPL), and analog microphones behind a sound card's preamplifier
// land between about -50 and -30 dBFS with the gain. Above -15 dBFS full scale lies below
// 109 dB SPL: a 114 dB calibrator would clip, and so would much ordinary loud sound, so such a
// reading nearly always means a calibrator 20 dB louder than the stated level given (the level
// switch on 114 dB). Below -60 dBFS a 16-bit converter's own noise (near -98 dBFS) would sit
// above 56 dB SPL, too loud for a noise monitor to measure a quiet night.
const (
	PlausibleSensitivityMin = -60.0
	PlausibleSensitivityMax = -15.0
)

// commonReferences are the two stated levels of the common two-level calibrator, dB (1 Pa and
// 10 Pa): a result that misses is compared with the other one to name a level switch on the
// wrong setting.
var commonReferences = []float64{94, 114}

// Nominal is the sensitivity a check is judged against, and where it came from.
type Nominal struct {
	DBFS   float64
	Source string // e.g. "--sensitivity" or "the configuration /etc/leqnode/leqnode.toml"
}

// Judgement is the verdict on a check of a recording: OK says whether its sensitivity may be
// used; Reason says why, in one sentence, whether or not it is OK.
type Judgement struct {
	OK     bool
	Reason string
}

// Judge decides whether the result of a recording's check may be used: the tone must not
// clip, its frequency must lie within the class's limit (IEC 60942:2017 Table 4), and the
// sensitivity it implies must lie within rangeDB (DefaultAdjustRange when 0) of the nominal,
// or, with no nominal (nil), within the plausible range PlausibleSensitivityMin to
// PlausibleSensitivityMax. When the sensitivity misses, and the tone fits another common
// calibrator level, the reason names that level: the usual field mistake is a calibrator's
// level switch on 114 dB while the check says 94.
func Judge(r *Result, nominal *Nominal, rangeDB float64, class dsp.CalibratorClass) Judgement {
	if rangeDB == 0 {
		rangeDB = DefaultAdjustRange
	}
	d := r.Detection
	if d.Clipped > 0 {
		return Judgement{Reason: fmt.Sprintf("the tone clipped (%d samples at full scale), so its level is wrong: use the calibrator's 94 dB setting or lower the input gain", d.Clipped)}
	}
	tol := dsp.CalibratorTolerances(class)
	if !r.FrequencyPlausible {
		return Judgement{Reason: fmt.Sprintf("the tone at %.2f Hz is more than %.1f %% from 1 kHz, outside the limit for a class %s calibrator (IEC 60942:2017 Table 4): check the calibrator, or the converter's sample rate",
			d.FrequencyHz, 100*tol.Frequency, class)}
	}
	s := r.SensitivityDBFS
	fits := func(ok func(float64) bool) string {
		for _, alt := range commonReferences {
			if alt != r.Reference && ok(Sensitivity(d.LevelDBFS, alt)) {
				return fmt.Sprintf("; the tone fits a %g dB calibrator instead: if its level switch is on %g dB, give --reference %g", alt, alt, alt)
			}
		}
		return ""
	}
	if nominal != nil {
		if _, err := Adjust(nominal.DBFS, s, rangeDB); err != nil {
			near := func(v float64) bool { return math.Abs(v-nominal.DBFS) <= rangeDB }
			return Judgement{Reason: fmt.Sprintf("the sensitivity %.2f dBFS lies %+.2f dB from the nominal %.2f dBFS (%s), beyond ±%g dB (a microphone fault, or the wrong stated level): check the microphone, its port and its wiring%s",
				s, s-nominal.DBFS, nominal.DBFS, nominal.Source, rangeDB, fits(near))}
		}
		return Judgement{OK: true, Reason: fmt.Sprintf("the sensitivity %.2f dBFS lies within ±%g dB of the nominal %.2f dBFS (%s)", s, rangeDB, nominal.DBFS, nominal.Source)}
	}
	plausible := func(v float64) bool { return v >= PlausibleSensitivityMin && v <= PlausibleSensitivityMax }
	if !plausible(s) {
		return Judgement{Reason: fmt.Sprintf("the sensitivity %.2f dBFS is outside the range microphones have (%g to %g dBFS; common practice)%s; give the data-sheet sensitivity with --sensitivity or the node's --config",
			s, PlausibleSensitivityMin, PlausibleSensitivityMax, fits(plausible))}
	}
	return Judgement{OK: true, Reason: fmt.Sprintf("no nominal sensitivity given (--sensitivity or --config): only the plausible range %g to %g dBFS was checked", PlausibleSensitivityMin, PlausibleSensitivityMax)}
}
