package record

import (
	"fmt"
	"math/bits"
	"strings"
)

// Flags is a set of conditions that qualify a record. The bit positions are part of the store's
// file format and of every published payload, and never change; new flags take new bits.
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
	StoreFault     // the store could not write (a full disk, an I/O error): records held in memory
	DeviceFault    // the capture device misbehaves (delivers audio faster or slower than its rate)
	Synthetic      // made from the synthetic scene, not from a microphone
)

// flagInfo names and explains every flag, in bit order: the one table that docs/measuring.md, the
// JSON Schemas and every output take their flag names from.
var flagInfo = [...]struct{ name, meaning string }{
	{"overload", "the signal exceeded the upper limit of the measuring range; levels are lower bounds"},
	{"under-range", "the level was below the lower limit of the measuring range; levels are upper bounds"},
	{"clipped", "samples reached digital full scale"},
	{"dropped", "samples were lost; the second is left out as no data"},
	{"calibrating", "a calibrator was on the microphone; left out"},
	{"settling", "filters and detectors were still settling after a start; left out"},
	{"clock-unsynced", "the wall clock was not synchronised"},
	{"suspect", "doubtful, for example after calibration drift; left out"},
	{"excluded", "excluded by the user; left out"},
	{"digital-silence", "the input was digital silence"},
	{"stuck-input", "the input repeated one value (dead converter)"},
	{"dc-offset", "the input carried a DC offset above the health limit"},
	{"mic-fault", "the microphone failed a check"},
	{"chain-fault", "the self-verification of the digital measurement chain failed"},
	{"store-fault", "the store could not write (full disk, I/O error); records held in memory until it can"},
	{"device-fault", "the capture device delivers audio faster or slower than its stated rate"},
	{"synthetic", "made from the synthetic demo scene, not from a microphone: not a measurement"},
}

// FlagNames returns the name of every flag this build knows, in bit order.
func FlagNames() []string {
	out := make([]string, len(flagInfo))
	for i, f := range flagInfo {
		out[i] = f.name
	}
	return out
}

// FlagMeaning returns the one-line meaning of the flag named name, or "" for an unknown name.
func FlagMeaning(name string) string {
	for _, f := range flagInfo {
		if f.name == name {
			return f.meaning
		}
	}
	return ""
}

// Has reports whether every flag of g is set in f.
func (f Flags) Has(g Flags) bool { return f&g == g }

// Names returns the names of the flags set in f, in bit order; never nil, so that it encodes
// as a JSON array. A bit this build has no name for is named "bitN".
func (f Flags) Names() []string {
	out := []string{}
	for v := uint32(f); v != 0; v &= v - 1 {
		i := bits.TrailingZeros32(v)
		if i < len(flagInfo) {
			out = append(out, flagInfo[i].name)
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
		for i, n := range flagInfo {
			if n.name == name {
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
			return 0, fmt.Errorf("unknown flag %q: use one of %s", name, strings.Join(FlagNames(), ", "))
		}
	}
	return f, nil
}
