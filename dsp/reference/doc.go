// Package reference holds the published check values that the measurement core is tested
// against and that the self-verification command re-runs on a deployed node: the frequency
// weighting design goals and acceptance limits, toneburst and C-weighted peak responses, level
// linearity limits and time-weighting constants of IEC 61672-1:2013, and the fractional-octave
// filter tables of IEC 61260-1:2014.
//
// The package is data, not code. Every table is returned by a function that builds a fresh
// slice on each call, so callers may modify what they get without affecting anyone else; there
// is no package-level mutable state.
//
// The standards were not read directly. Each table names the standard and its table or clause,
// and "via" the open-source copy from which the values were read. A value that could not be
// read from any source is marked "from memory" beside it. Limits are on the deviation of a
// measured response from its design goal, in decibels; a missing limit is math.Inf(-1) (no
// lower limit) or math.Inf(+1) (no upper limit). Passing these checks shows only that a digital
// chain meets the stated tolerance limits in electrical tests; it does not make an instrument
// type approved.
package reference
