package buffer

import (
	"fmt"
	"math/bits"
	"strings"
)

// Kind identifies a record type. Its numeric value is part of the file format and never changes.
type Kind uint8

// The record kinds. Each is one Go type in this package.
const (
	KindSecond      Kind = 1 // *Second: one-second results
	KindMinute      Kind = 2 // *Minute: one-minute statistics
	KindEvent       Kind = 3 // *Event: a noise event
	KindCalibration Kind = 4 // *Calibration: a calibrator check
	KindHealth      Kind = 5 // *Health: a health snapshot
	KindGap         Kind = 6 // *Gap: a period without data and why
	KindAnnotation  Kind = 7 // *Annotation: flags learnt later for a time range
	KindSession     Kind = 8 // *Session: settings that affect the numbers
)

// Kinds lists every kind in numeric order.
func Kinds() []Kind {
	return []Kind{KindSecond, KindMinute, KindEvent, KindCalibration, KindHealth, KindGap, KindAnnotation, KindSession}
}

var kindNames = [...]string{
	KindSecond: "second", KindMinute: "minute", KindEvent: "event", KindCalibration: "calibration",
	KindHealth: "health", KindGap: "gap", KindAnnotation: "annotation", KindSession: "session",
}

// String returns the kind's name as the commands spell it ("second", "minute", ...).
func (k Kind) String() string {
	if k.Valid() {
		return kindNames[k]
	}
	return fmt.Sprintf("kind(%d)", uint8(k))
}

// Valid reports whether k is one of the kinds this build knows.
func (k Kind) Valid() bool { return k >= KindSecond && k <= KindSession }

// ParseKind returns the kind named s, as printed by Kind.String.
func ParseKind(s string) (Kind, error) {
	for _, k := range Kinds() {
		if kindNames[k] == s {
			return k, nil
		}
	}
	return 0, fmt.Errorf("unknown record kind %q: use one of %s", s, strings.Join(kindNames[1:], ", "))
}

// Flags is a set of conditions that qualify a record. The bit positions are part of the file
// format and never change; new flags take new bits.
type Flags uint32

// The flags shared by all records.
const (
	Overload      Flags = 1 << iota // the signal exceeded the upper limit of the measuring range
	UnderRange                      // the level was below the lower limit of the measuring range
	Clipped                         // samples reached digital full scale
	Dropped                         // samples were lost (see the record's dropped-sample count)
	Calibrating                     // a calibrator was on the microphone
	Settling                        // filters and detectors were still settling after a start
	ClockUnsynced                   // the wall clock was not synchronised
	Suspect                         // the result is doubtful (for example after calibration drift)
	Excluded                        // excluded from indicators by the user
	// Health flags, set on health snapshots (and where they apply on seconds).
	DigitalSilence // the input was digital silence for longer than the health limit
	StuckInput     // the input repeated one value for longer than the health limit (dead converter)
	DCOffset       // the input carried a DC offset above the health limit
	MicFault       // the microphone failed a check (e.g. a calibration beyond the allowed adjustment)
	ChainFault     // the self-verification of the digital measurement chain failed
)

var flagNames = [...]string{
	"overload", "under-range", "clipped", "dropped", "calibrating", "settling",
	"clock-unsynced", "suspect", "excluded", "digital-silence", "stuck-input", "dc-offset",
	"mic-fault", "chain-fault",
}

// Has reports whether every flag of g is set in f.
func (f Flags) Has(g Flags) bool { return f&g == g }

// Names returns the names of the flags set in f, in bit order. A bit this build has no name for
// is named "bitN".
func (f Flags) Names() []string {
	var out []string
	for v := uint32(f); v != 0; v &= v - 1 {
		i := bits.TrailingZeros32(v)
		if i < len(flagNames) {
			out = append(out, flagNames[i])
		} else {
			out = append(out, fmt.Sprintf("bit%d", i))
		}
	}
	return out
}

// String lists the names of the set flags separated by "|", or "" when none is set.
func (f Flags) String() string { return strings.Join(f.Names(), "|") }

// ParseFlags parses names separated by "|" or "," as printed by Flags.String.
func ParseFlags(s string) (Flags, error) {
	var f Flags
	for _, name := range strings.FieldsFunc(s, func(r rune) bool { return r == '|' || r == ',' }) {
		name = strings.TrimSpace(name)
		found := false
		for i, n := range flagNames {
			if n == name {
				f |= 1 << i
				found = true
				break
			}
		}
		if !found {
			var bit int
			if _, err := fmt.Sscanf(name, "bit%d", &bit); err == nil && bit >= 0 && bit < 32 {
				f |= 1 << bit
				continue
			}
			return 0, fmt.Errorf("unknown flag %q: use one of %s", name, strings.Join(flagNames[:], ", "))
		}
	}
	return f, nil
}
