package record

import (
	"fmt"
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
