// Package scene synthesises a deterministic street scene, the sound a noise monitoring node
// would hear, for the demo and for tests.
//
// The setting is invented: Harrowby Lane in the invented town of Wendle Cross, a two-lane
// residential street with a bus route. A node sits on a lamp post beside the lane. It hears
//
//   - a quiet background of distant traffic: pink-ish noise (equal energy per octave between
//     about 20 Hz and 5 kHz) at a settable A-weighted level, 42 dB by default;
//   - passing cars: broadband tyre and engine noise from a point source that drives past on a
//     straight line at distance d and speed v, so its power follows d²/(d² + v²t²) (the
//     spherical spreading of a moving point source, common practice); closest-approach levels
//     of 65 to 75 dB(A), the main rise and fall lasting a few seconds;
//   - a bus on a timetable: louder (76 to 82 dB(A)), slower and richer in low frequencies, with
//     the firing tone of its diesel engine and its harmonics;
//   - birds: songs of short chirps gliding between 2 and 6 kHz;
//   - optionally, a sound calibrator on the microphone at start-up: a sine (1 kHz, 94 dB SPL by
//     default) held steady for a settable time, with short raised-cosine fades, while the street
//     is shut out by the calibrator's coupler.
//
// Levels become samples through the microphone's sensitivity S, the level in dBFS (AES17: a
// full-scale sine reads 0 dBFS) that a 94 dB SPL sine at 1 kHz produces, as MEMS microphone
// data sheets state it: a sound of level L dB SPL has mean square 10^((L - 94 + S)/10) / 2 in
// samples scaled to full scale ±1.0. The converter clips at full scale; Clipped counts it.
//
// The scene is deterministic: for a given Config the samples do not depend on how they are cut
// into Read calls. Events are planned per minute of scene time from random streams seeded with
// the seed and the minute's index, so the schedule of any period can be listed without
// rendering it (Events); the three noise sources share one stream, drawn once per sample.
// With Config.Start set, traffic, buses and birds follow the hour of the day (quiet nights, a
// dawn chorus), which gives day, evening and night indicators something to show.
//
// The numbers are a plausible invention, not a model of any real place: use them to exercise
// the measurement chain, never as evidence about real streets.
package scene
