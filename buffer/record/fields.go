package record

import (
	"math"
	"time"
)

// FieldType says how a field's value is written.
type FieldType uint8

// The field types.
const (
	LevelField  FieldType = iota // a level in dB, float64 rounded to Decimals; NaN is null
	NumberField                  // a float64 rounded to Decimals; NaN is null
	CountField                   // a uint64
	BoolField                    // a bool
	TextField                    // a string
	TimeField                    // a time.Time, written in UTC as RFC 3339 with milliseconds
	FlagsField                   // Flags, written as an array of names (CSV: joined by "|")
)

// Field describes one field of a record kind as every output writes it: MQTT payloads, export
// (CSV and JSON lines), the status page's JSON and the control socket. It is the one table of
// names, units and rounding; the JSON Schemas in configs/schema list the same names (a test
// holds them to it).
type Field struct {
	Name     string // the one name of the field, in every output
	Type     FieldType
	Unit     string // "dB", "dBFS", "s", "Hz", "%", "MB", "ms", "°C" or "" for none
	Decimals int    // decimals kept by LevelField and NumberField
	Meaning  string
	get      func(Record) any
}

// Value returns the field's value in r, rounded as the field says: float64 (NaN for none) for
// LevelField and NumberField, uint64, bool, string, time.Time or Flags.
func (f Field) Value(r Record) any {
	v := f.get(r)
	if x, ok := v.(float64); ok {
		return Round(x, f.Decimals)
	}
	return v
}

// Fields returns the fields of kind k after the ones every record has (store, kind, seq and
// the record's time, named "start"), in the order outputs write them. The second kind's
// fields are the levels of `leqnode analyze`; spectra and histograms are written apart.
func Fields(k Kind) []Field {
	switch k {
	case KindSecond:
		return secondFields
	case KindMinute:
		return minuteFields
	case KindEvent:
		return eventFields
	case KindCalibration:
		return calibrationFields
	case KindHealth:
		return healthFields
	case KindGap:
		return gapFields
	case KindAnnotation:
		return annotationFields
	case KindSession:
		return sessionFields
	}
	return nil
}

func lvl(name, meaning string, get func(Record) float64) Field {
	return Field{Name: name, Type: LevelField, Unit: "dB", Decimals: 2, Meaning: meaning, get: func(r Record) any { return get(r) }}
}

func num(name, unit string, dec int, meaning string, get func(Record) float64) Field {
	return Field{Name: name, Type: NumberField, Unit: unit, Decimals: dec, Meaning: meaning, get: func(r Record) any { return get(r) }}
}

func count(name, unit, meaning string, get func(Record) uint64) Field {
	return Field{Name: name, Type: CountField, Unit: unit, Meaning: meaning, get: func(r Record) any { return get(r) }}
}

func boolean(name, meaning string, get func(Record) bool) Field {
	return Field{Name: name, Type: BoolField, Meaning: meaning, get: func(r Record) any { return get(r) }}
}

func text(name, meaning string, get func(Record) string) Field {
	return Field{Name: name, Type: TextField, Meaning: meaning, get: func(r Record) any { return get(r) }}
}

func stamp(name, meaning string, get func(Record) time.Time) Field {
	return Field{Name: name, Type: TimeField, Meaning: meaning, get: func(r Record) any { return get(r) }}
}

func flagsOf(get func(Record) Flags) Field {
	return Field{Name: "flags", Type: FlagsField, Meaning: "conditions that qualify the record (package record)", get: func(r Record) any { return get(r) }}
}

func sec(r Record) *Second            { return r.(*Second) }
func mnt(r Record) *Minute            { return r.(*Minute) }
func evt(r Record) *Event             { return r.(*Event) }
func cal(r Record) *Calibration       { return r.(*Calibration) }
func hlt(r Record) *Health            { return r.(*Health) }
func gapOf(r Record) *Gap             { return r.(*Gap) }
func annotation(r Record) *Annotation { return r.(*Annotation) }
func session(r Record) *Session       { return r.(*Session) }

var secondFields = []Field{
	num("duration_s", "s", 6, "length of the interval: its sample count divided by the sample rate", func(r Record) float64 { return sec(r).Duration.Seconds() }),
	lvl("LAeq", "A-weighted equivalent continuous level", func(r Record) float64 { return sec(r).LAeq }),
	lvl("LCeq", "C-weighted equivalent continuous level", func(r Record) float64 { return sec(r).LCeq }),
	lvl("LZeq", "Z-weighted equivalent continuous level", func(r Record) float64 { return sec(r).LZeq }),
	lvl("LAFmax", "largest A-weighted Fast level", func(r Record) float64 { return sec(r).LAFmax }),
	lvl("LAFmin", "smallest A-weighted Fast level", func(r Record) float64 { return sec(r).LAFmin }),
	lvl("LASmax", "largest A-weighted Slow level", func(r Record) float64 { return sec(r).LASmax }),
	lvl("LASmin", "smallest A-weighted Slow level", func(r Record) float64 { return sec(r).LASmin }),
	lvl("LAImax", "largest A-weighted Impulse level", func(r Record) float64 { return sec(r).LAImax }),
	lvl("LCpeak", "C-weighted peak level", func(r Record) float64 { return sec(r).LCpeak }),
	lvl("LZpeak", "Z-weighted peak level", func(r Record) float64 { return sec(r).LZpeak }),
	lvl("LAE", "A-weighted sound exposure level", func(r Record) float64 { return sec(r).LAE }),
	flagsOf(func(r Record) Flags { return sec(r).Flags }),
	count("dropped_samples", "", "samples lost in the interval", func(r Record) uint64 { return sec(r).DroppedSamples }),
}

var minuteFields = func() []Field {
	f := []Field{
		lvl("LAeq", "A-weighted equivalent continuous level of the valid seconds", func(r Record) float64 { return mnt(r).LAeq }),
		lvl("LCeq", "C-weighted equivalent continuous level of the valid seconds", func(r Record) float64 { return mnt(r).LCeq }),
		lvl("LZeq", "Z-weighted equivalent continuous level of the valid seconds", func(r Record) float64 { return mnt(r).LZeq }),
		lvl("LAFmax", "largest A-weighted Fast level of the valid seconds", func(r Record) float64 { return mnt(r).LAFmax }),
		lvl("LAFmin", "smallest A-weighted Fast level of the valid seconds", func(r Record) float64 { return mnt(r).LAFmin }),
		lvl("LAF1", "A-weighted Fast level exceeded for 1 % of the valid seconds", func(r Record) float64 { return mnt(r).LAF1 }),
		lvl("LAF5", "exceeded for 5 %", func(r Record) float64 { return mnt(r).LAF5 }),
		lvl("LAF10", "exceeded for 10 %", func(r Record) float64 { return mnt(r).LAF10 }),
		lvl("LAF50", "exceeded for 50 %", func(r Record) float64 { return mnt(r).LAF50 }),
		lvl("LAF90", "exceeded for 90 %", func(r Record) float64 { return mnt(r).LAF90 }),
		lvl("LAF95", "exceeded for 95 %", func(r Record) float64 { return mnt(r).LAF95 }),
		lvl("LAF99", "exceeded for 99 %", func(r Record) float64 { return mnt(r).LAF99 }),
		lvl("LAE", "A-weighted sound exposure level of the valid seconds", func(r Record) float64 { return mnt(r).LAE }),
		lvl("LCpeak", "C-weighted peak level of the valid seconds", func(r Record) float64 { return mnt(r).LCpeak }),
		lvl("LAImax", "largest A-weighted Impulse level of the valid seconds", func(r Record) float64 { return mnt(r).LAImax }),
		count("valid_seconds", "s", "seconds whose levels are in the minute (the validity rule)", func(r Record) uint64 { return uint64(mnt(r).ValidSeconds) }),
		num("valid_duration_s", "s", 3, "their length: the minute's energy is 10^(LAeq/10) times this", func(r Record) float64 { return mnt(r).ValidDuration.Seconds() }),
		count("overload_seconds", "s", "valid seconds flagged overload: the levels are lower bounds", func(r Record) uint64 { return uint64(mnt(r).OverloadSeconds) }),
		count("under_range_seconds", "s", "valid seconds under the measuring range: the levels are upper bounds", func(r Record) uint64 { return uint64(mnt(r).UnderRangeSeconds) }),
	}
	for why := ReasonCalibrating; why < NumReasons; why++ {
		f = append(f, count(why.String()+"_seconds", "s", "seconds left out: "+why.String(), func(r Record) uint64 { return uint64(mnt(r).LeftOut[why]) }))
	}
	f = append(f, text("bound", "which way the levels may be off: exact, lower (overload) or upper (under range)", func(r Record) string { return mnt(r).Tally().Bound().String() }),
		flagsOf(func(r Record) Flags { return mnt(r).Flags }))
	return f
}()

var eventFields = []Field{
	stamp("end", "end of the event", func(r Record) time.Time { return evt(r).End }),
	num("duration_s", "s", 3, "length of the event", func(r Record) float64 { return evt(r).End.Sub(evt(r).Start).Seconds() }),
	lvl("LAFmax", "largest A-weighted Fast level", func(r Record) float64 { return evt(r).LAFmax }),
	lvl("LAeq", "A-weighted equivalent continuous level over the event", func(r Record) float64 { return evt(r).LAeq }),
	lvl("LAE", "sound exposure level of the event", func(r Record) float64 { return evt(r).LAE }),
	lvl("LCpeak", "C-weighted peak level", func(r Record) float64 { return evt(r).LCpeak }),
	flagsOf(func(r Record) Flags { return evt(r).Flags }),
}

var calibrationFields = []Field{
	num("reference_dB", "dB", 2, "the calibrator's stated level", func(r Record) float64 { return cal(r).Reference }),
	num("measured_dB", "dB", 2, "the level measured with the sensitivity in use before the check", func(r Record) float64 { return cal(r).Measured }),
	num("deviation_dB", "dB", 2, "measured minus stated level", func(r Record) float64 { return cal(r).Deviation }),
	num("frequency_hz", "Hz", 1, "the tone's frequency", func(r Record) float64 { return cal(r).Frequency }),
	num("stability_dB", "dB", 2, "spread of the level during the check", func(r Record) float64 { return cal(r).Stability }),
	num("sensitivity_before_dBFS", "dBFS", 2, "sensitivity in use before the check, dBFS at 94 dB", func(r Record) float64 { return cal(r).SensitivityBefore }),
	num("sensitivity_after_dBFS", "dBFS", 2, "sensitivity in use after the check", func(r Record) float64 { return cal(r).SensitivityAfter }),
	boolean("applied", "the new sensitivity was put into use", func(r Record) bool { return cal(r).Applied }),
	boolean("passed", "the check passed", func(r Record) bool { return cal(r).OK }),
	flagsOf(func(r Record) Flags { return cal(r).Flags }),
}

var healthFields = []Field{
	flagsOf(func(r Record) Flags { return hlt(r).Flags }),
	count("clipped_samples", "", "clipped samples since the previous snapshot", func(r Record) uint64 { return hlt(r).Clipped }),
	count("under_range_seconds", "s", "seconds under the measuring range since the previous snapshot", func(r Record) uint64 { return hlt(r).UnderRangeSeconds }),
	count("dropped_samples", "", "samples lost since the previous snapshot", func(r Record) uint64 { return hlt(r).DroppedSamples }),
	count("queue_overflows", "", "audio blocks lost to a full queue since the previous snapshot", func(r Record) uint64 { return hlt(r).QueueOverflows }),
	count("store_bytes", "B", "size of the store file", func(r Record) uint64 { return hlt(r).StoreBytes }),
	count("self_test_checks", "", "checks of a self-verification run since the previous snapshot", func(r Record) uint64 { return hlt(r).SelfTestChecks }),
	count("self_test_failed", "", "of them, failed", func(r Record) uint64 { return hlt(r).SelfTestFailed }),
	boolean("silent", "the input was digital silence", func(r Record) bool { return hlt(r).Silent }),
	boolean("stuck", "the input repeated one value", func(r Record) bool { return hlt(r).Stuck }),
	boolean("clock_synced", "the system clock reports synchronisation", func(r Record) bool { return hlt(r).ClockSynced }),
	num("dc_offset", "", 6, "DC offset as a fraction of full scale", func(r Record) float64 { return hlt(r).DCOffset }),
	num("cpu_percent", "%", 1, "process CPU use, percent of one core", func(r Record) float64 { return hlt(r).CPU }),
	num("memory_mb", "MB", 1, "resident memory", func(r Record) float64 { return hlt(r).MemoryMB }),
	num("disk_free_mb", "MB", 1, "free space on the store's file system", func(r Record) float64 { return hlt(r).DiskFreeMB }),
	num("clock_error_ms", "ms", 3, "estimated clock error", func(r Record) float64 { return hlt(r).ClockErrorMs }),
	num("temperature_c", "°C", 1, "board temperature", func(r Record) float64 { return hlt(r).TemperatureC }),
}

var gapFields = []Field{
	stamp("end", "end of the gap", func(r Record) time.Time { return gapOf(r).To }),
	num("duration_s", "s", 3, "length of the gap", func(r Record) float64 { return gapOf(r).To.Sub(gapOf(r).From).Seconds() }),
	text("reason", "why there is no data", func(r Record) string { return gapOf(r).Reason }),
}

var annotationFields = []Field{
	stamp("end", "end of the annotated range", func(r Record) time.Time { return annotation(r).To }),
	flagsOf(func(r Record) Flags { return annotation(r).Flags }),
	text("reason", "why the range is annotated", func(r Record) string { return annotation(r).Reason }),
}

var sessionFields = func() []Field {
	f := []Field{
		text("software_version", "leqnode's version", func(r Record) string { return session(r).SoftwareVersion }),
		text("config_hash", "hash of the settings that affect the numbers", func(r Record) string { return session(r).ConfigHash }),
		num("sensitivity_dBFS", "dBFS", 3, "microphone sensitivity in use: dBFS for 94 dB at 1 kHz", func(r Record) float64 { return session(r).SensitivityDBFS }),
		count("sample_rate_hz", "Hz", "sample rate", func(r Record) uint64 { return uint64(session(r).SampleRate) }),
		text("device", "the capture source", func(r Record) string { return session(r).Device }),
		text("time_zone", "IANA name of the node's configured time zone", func(r Record) string { return session(r).TimeZone }),
		text("node_id", "the node's configured id (node.id); empty from nodes that do not say", func(r Record) string { return session(r).NodeID }),
		text("site", "the node's configured measurement site (node.site); empty from nodes that do not say", func(r Record) string { return session(r).Site }),
		num("latitude", "°", 5, "the node's latitude, WGS 84, rounded as configured; 0 with longitude 0: no position", func(r Record) float64 { return session(r).Latitude }),
		num("longitude", "°", 5, "the node's longitude, WGS 84, rounded as configured; 0 with latitude 0: no position", func(r Record) float64 { return session(r).Longitude }),
	}
	// first_seq_<kind>: the first sequence number of each kind in this run of the node.
	for _, k := range Kinds() {
		f = append(f, count("first_seq_"+k.String(), "",
			"the first "+k.String()+" sequence number of this run: numbers skipped just before it were never committed (a restart), not lost",
			func(r Record) uint64 { return session(r).FirstSeq[k] }))
	}
	return f
}()

// FieldMap returns r's fields (Fields) as a map ready for encoding/json: NaN numbers as nil,
// flags as their names.
func FieldMap(r Record) map[string]any {
	fs := Fields(r.Kind())
	m := make(map[string]any, len(fs))
	for _, f := range fs {
		v := f.Value(r)
		switch x := v.(type) {
		case float64:
			if math.IsNaN(x) || math.IsInf(x, 0) {
				v = nil
			}
		case Flags:
			v = x.Names()
		}
		m[f.Name] = v
	}
	return m
}
