// Package record is leqnode's record model, without the store: the kinds of record (Kind) and
// their Go types (Second, Minute, Event, Calibration, Health, Gap, Annotation, Session), their
// compact versioned binary encodings, the one field table per kind (Fields: name, unit, rounding)
// that every output writes, the flags that qualify a record and the validity rule that decides
// which seconds count in an aggregate. Pure code (indicators, payloads) imports it without
// linking the bbolt store (package buffer).
//
// # Encodings
//
// Each record encodes to a version byte followed by its fields (AppendBinary); Decode reads every
// older version and refuses a newer one with ErrNewerRecord, a damaged one with
// ErrCorruptRecord. Levels are kept as signed 16-bit hundredths of a decibel, so a level
// survives within 0.005 dB; NaN is "no level".
//
// # Who uses it
//
// The store (package buffer), the minute builder (package node), the indicators and reports,
// the MQTT payloads, export, the status page and the metrics all take their names, rounding and
// rule from here, so that an hour read from second records, from minute records, from a report,
// from MQTT or from the page shows one number.
//
// # The validity rule
//
// Every second is judged once, by Judge, on its flags (its own, ORed with those of any
// annotation that covers it):
//
//   - Left out of every level, and counted by reason (Reason): calibrating (a calibrator on the
//     microphone), settling (filters still settling after a start), excluded (by an
//     annotation), suspect (calibration drift over 0.5 dB between two checks), no data
//     (samples dropped) and digital silence (no level). Gaps are no data too; they have no
//     second records and are counted by the readers that see them.
//   - Kept, and the aggregate marked as a bound: overload (the true level was higher: the
//     aggregate is a lower bound, shown "≥") and under the measuring range (the true level was
//     lower: an upper bound, shown "≤"). IEC 61672-1:2013 requires an overload to be indicated
//     and latched for the measurement it spoils (clause 5.11 (from memory)); dropping the
//     overloaded seconds instead would bias the level low exactly when it matters. Where an
//     aggregate holds both, it is shown as a lower bound: the overloaded seconds carry far more
//     energy than the under-range ones (common practice).
//
// Which reasons leave a second out, and that nothing else does, is common practice where no
// standard speaks (ISO 1996-2 asks for the exclusion of measurement periods disturbed by the
// measurement itself, such as calibration, without a rule per flag (from memory)).
//
// A Tally carries, for any aggregate, the seconds it counted, the seconds it left out by
// reason, and how many of the counted seconds were overloaded or under range.
package record
