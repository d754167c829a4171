package dsp

import "math"

// ReferencePressure is p0 = 20 µPa, the reference sound pressure of sound pressure levels in air
// (ISO 1996-1:2016, 3.1.1).
const ReferencePressure = 20e-6

// ReferenceLevel is the level of the sound calibrator's reference pressure: 94 dB re 20 µPa,
// which is 1.0024 Pa (about 1 Pa); microphone sensitivities are stated at this level and 1 kHz.
const ReferenceLevel = 94.0

// sineFullScaleDB is 10 lg 2: a full-scale sine (peak 1.0) has mean square 1/2 and reads
// 0 dBFS per AES17, so a mean square ms reads 10 lg(ms) + 10 lg 2 dBFS.
const sineFullScaleDB = 3.010299956639812

// LevelOffset returns the decibels to add to 10 lg(ms), where ms is a mean square of samples
// scaled to ±1.0 full scale, to obtain the sound pressure level in dB re 20 µPa, for a
// microphone of the given sensitivity.
//
// The sensitivity S is the level in dBFS (AES17: a full-scale sine is 0 dBFS) that a 1 kHz sine
// of 94 dB SPL produces, as MEMS microphone data sheets state it. Then
//
//	L = LdBFS - S + 94 = 10 lg(ms) + 10 lg 2 - S + 94.
//
// For S = -26 dBFS a full-scale sine reads 120 dB SPL.
func LevelOffset(sensitivityDBFS float64) float64 {
	return sineFullScaleDB - sensitivityDBFS + ReferenceLevel
}

// PowerLevel returns 10 lg(ms) + offset, the level of a mean square (or, with a squared peak,
// a peak level). A zero mean square gives -Inf; a NaN stays NaN.
func PowerLevel(ms, offset float64) float64 {
	return 10*math.Log10(ms) + offset
}

// DBFS returns the level in dBFS (AES17) of a mean square of samples scaled to ±1.0 full scale.
func DBFS(ms float64) float64 { return 10*math.Log10(ms) + sineFullScaleDB }

// EnergyMean returns the energy (power) mean of levels in dB: 10 lg((1/N) Σ 10^(Li/10)),
// the equivalent continuous level of N equal-length intervals (ISO 1996-1:2016, 3.1.7).
// It returns NaN for no levels.
func EnergyMean(levels ...float64) float64 {
	if len(levels) == 0 {
		return math.NaN()
	}
	var s float64
	for _, l := range levels {
		s += math.Pow(10, l/10)
	}
	return 10 * math.Log10(s/float64(len(levels)))
}

// ExposureLevel returns the sound exposure level LE = Leq,T + 10 lg(T / T0), T0 = 1 s, of an
// interval of T seconds with equivalent continuous level leq (ISO 1996-1:2016, 3.1.8;
// IEC 61672-1:2013, clause 3).
func ExposureLevel(leq, seconds float64) float64 {
	return leq + 10*math.Log10(seconds)
}
