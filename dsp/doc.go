// Package dsp turns blocks of audio samples into the standard indicators of sound level
// measurement: frequency-weighted (A, C, Z) and time-weighted (Fast, Slow, Impulse) levels,
// equivalent continuous levels (Leq) and sound exposure levels (LAE), C- and Z-weighted peak
// levels, percentile levels from a mergeable level histogram, and octave and one-third-octave
// band levels.
//
// The model is a streaming meter. Samples arrive as float32 blocks of any length; every filter
// keeps its state in float64 second-order sections between blocks, so the results of a run do not
// depend on how the samples were cut into blocks. A caller closes measurement intervals at sample
// positions of its choosing and reads the interval's results; filter state runs on across
// interval boundaries, as in an integrating-averaging sound level meter.
//
// Levels are in decibels re 20 µPa. The link from digital samples to sound pressure is the
// microphone's sensitivity: the level in dBFS (AES17: a full-scale sine reads 0 dBFS) that a
// 1 kHz sine of 94 dB SPL produces at the converter, as MEMS microphone data sheets state it.
//
// The package is pure computation: it does no I/O, starts no goroutines and allocates nothing
// per audio block once a Meter is built. Filters start from rest (zero state) and are never
// primed with the signal, but no level reports their start-up: minima and band levels count only
// once their detector or filter has settled (see Meter); callers still flag the first seconds of
// a run as settling.
//
// The published check values used by the tests and by the self-verification command live in
// the sub-package reference, with their sources.
package dsp
