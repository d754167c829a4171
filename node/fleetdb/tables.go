package fleetdb

import (
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"github.com/leqnode/leqnode/dsp/reference"
)

// colType says how a payload value becomes a column value.
type colType int

const (
	cReal     colType = iota // level or other float, null allowed (real)
	cDouble                  // float, null allowed (double precision)
	cInt                     // integer (bigint or integer)
	cText                    // string
	cBool                    // boolean
	cTime                    // Unix milliseconds in KEY_ms, stored as timestamptz
	cFlags                   // array of flag names (text[])
	cSpectrum                // one-third-octave spectrum: third_octave_first and third_octave_LZeq
	cDate                    // "YYYY-MM-DD"
	cFirstSeq                // the keys KEY<kind> gathered into one JSON object {"second": 4097, ...}
)

type column struct {
	name string // column name in the table
	key  string // key in the payload (or in "columns" for second records)
	typ  colType
}

// table is one record kind's table: the common columns (store_id, seq, node_id, start_time),
// then its own columns, then delivery.
type table struct {
	kind      string
	name      string
	partition string // "day", "month" or "" (a plain table)
	cols      []column
}

func levels(names ...string) []column {
	out := make([]column, len(names))
	for i, n := range names {
		out[i] = column{n, n, cReal}
	}
	return out
}

func cols(groups ...[]column) []column {
	var out []column
	for _, g := range groups {
		out = append(out, g...)
	}
	return out
}

// countedSeconds are the columns of minutes and periods that say which seconds count (see
// docs/measuring.md, "Which seconds count").
var countedSeconds = []column{{"bound", "bound", cText}, {"overload_seconds", "overload_seconds", cInt},
	{"calibrating_seconds", "calibrating_seconds", cInt}, {"settling_seconds", "settling_seconds", cInt},
	{"excluded_seconds", "excluded_seconds", cInt}, {"suspect_seconds", "suspect_seconds", cInt},
	{"no_data_seconds", "no_data_seconds", cInt}, {"digital_silence_seconds", "digital_silence_seconds", cInt},
	{"under_range_seconds", "under_range_seconds", cInt}}

// tables lists the record kinds in the order they are written.
var tables = []table{
	{"second", "seconds", "day", cols([]column{{"duration_s", "duration_s", cReal}},
		levels("LAeq", "LCeq", "LZeq", "LAFmax", "LAFmin", "LASmax", "LASmin", "LAImax", "LCpeak", "LZpeak", "LAE"),
		[]column{{"flags", "flags", cFlags}, {"dropped_samples", "dropped_samples", cInt}, {"third_octave", "third_octave_LZeq", cSpectrum}})},
	{"minute", "minutes", "month", cols(
		levels("LAeq", "LCeq", "LZeq", "LAFmax", "LAFmin", "LAF1", "LAF5", "LAF10", "LAF50", "LAF90", "LAF95", "LAF99", "LAE", "LCpeak", "LAImax"),
		[]column{{"valid_seconds", "valid_seconds", cInt}, {"flags", "flags", cFlags}, {"third_octave", "third_octave_LZeq", cSpectrum},
			{"valid_duration_s", "valid_duration_s", cReal}}, countedSeconds)},
	{"event", "events", "month", cols([]column{{"end_time", "end_ms", cTime}, {"duration_s", "duration_s", cReal}},
		levels("LAFmax", "LAeq", "LAE", "LCpeak"),
		[]column{{"flags", "flags", cFlags}, {"third_octave", "third_octave_LZeq", cSpectrum}})},
	{"health", "health", "month", []column{{"flags", "flags", cFlags},
		{"clipped_samples", "clipped_samples", cInt}, {"under_range_seconds", "under_range_seconds", cInt},
		{"dropped_samples", "dropped_samples", cInt}, {"queue_overflows", "queue_overflows", cInt},
		{"store_bytes", "store_bytes", cInt}, {"self_test_checks", "self_test_checks", cInt},
		{"self_test_failed", "self_test_failed", cInt}, {"silent", "silent", cBool}, {"stuck", "stuck", cBool},
		{"clock_synced", "clock_synced", cBool}, {"dc_offset", "dc_offset", cDouble}, {"cpu_percent", "cpu_percent", cReal},
		{"memory_mb", "memory_mb", cReal}, {"disk_free_mb", "disk_free_mb", cReal},
		{"clock_error_ms", "clock_error_ms", cReal}, {"temperature_c", "temperature_c", cReal}}},
	{"calibration", "calibrations", "", []column{{"reference_dB", "reference_dB", cReal}, {"measured_dB", "measured_dB", cReal},
		{"deviation_dB", "deviation_dB", cReal}, {"frequency_hz", "frequency_hz", cReal}, {"stability_dB", "stability_dB", cReal},
		{"sensitivity_before_dBFS", "sensitivity_before_dBFS", cReal}, {"sensitivity_after_dBFS", "sensitivity_after_dBFS", cReal},
		{"applied", "applied", cBool}, {"passed", "passed", cBool}, {"flags", "flags", cFlags}}},
	{"gap", "gaps", "", []column{{"end_time", "end_ms", cTime}, {"reason", "reason", cText}, {"duration_s", "duration_s", cReal}}},
	{"annotation", "annotations", "", []column{{"end_time", "end_ms", cTime}, {"flags", "flags", cFlags}, {"reason", "reason", cText}}},
	{"session", "sessions", "", []column{{"software_version", "software_version", cText}, {"config_hash", "config_hash", cText},
		{"sensitivity_dBFS", "sensitivity_dBFS", cReal}, {"sample_rate_hz", "sample_rate_hz", cInt},
		{"device", "device", cText}, {"time_zone", "time_zone", cText}, {"first_seq", "first_seq_", cFirstSeq},
		{"stated_node_id", "node_id", cText}, {"site", "site", cText}, {"latitude", "latitude", cDouble},
		{"longitude", "longitude", cDouble}}},
}

// periodTable is the table of period indicators (no sequence number; see migrations).
var periodTable = table{"period", "periods", "", cols([]column{{"profile", "profile", cText}, {"period", "period", cText},
	{"day", "day", cDate}, {"zone", "zone", cText}, {"end_time", "end_ms", cTime}, {"hours", "hours", cReal},
	{"penalty_dB", "penalty_dB", cReal}, {"LAeq", "LAeq", cReal}, {"LCeq", "LCeq", cReal}, {"LAF10", "LAF10", cReal},
	{"LAF90", "LAF90", cReal}, {"LAFmax", "LAFmax", cReal}, {"events", "events", cInt}, {"limit_dB", "limit_dB", cReal},
	{"exceeds", "exceeds", cBool}, {"coverage", "coverage", cReal}, {"coverage_low", "coverage_low", cBool},
	{"valid_seconds", "valid_seconds", cInt}}, countedSeconds)}

func tableOf(kind string) *table {
	if kind == periodTable.kind {
		return &periodTable
	}
	for i := range tables {
		if tables[i].kind == kind {
			return &tables[i]
		}
	}
	return nil
}

// columnNames returns the table's column names in the order of a Row's values.
func (t *table) columnNames() []string {
	var out []string
	if t.kind == periodTable.kind {
		out = []string{"store_id", "node_id", "start_time"}
	} else {
		out = []string{"store_id", "seq", "node_id", "start_time"}
	}
	for _, c := range t.cols {
		if c.typ == cSpectrum {
			out = append(out, "third_octave_first", "third_octave_lzeq")
			continue
		}
		out = append(out, strings.ToLower(c.name)) // as PostgreSQL folds the unquoted names
	}
	if t.kind != periodTable.kind {
		out = append(out, "delivery")
	}
	return out
}

// bandIndex maps nominal one-third-octave midband frequencies ("12.5", "1000") to band
// numbers (0 is 1 kHz), as package reference names them.
func bandIndex() map[string]int {
	m := map[string]int{}
	for x := -40; x <= 20; x++ {
		m[reference.NominalMidband(3, x)] = x
	}
	return m
}

// value converts one payload value to a column value; nil stays nil (SQL null).
func value(typ colType, v any) (any, error) {
	if v == nil {
		return nil, nil
	}
	switch typ {
	case cReal, cDouble:
		n, ok := v.(json.Number)
		if !ok {
			return nil, fmt.Errorf("%v is not a number", v)
		}
		f, err := n.Float64()
		if err != nil || math.IsInf(f, 0) {
			return nil, fmt.Errorf("number %s out of range", n)
		}
		if typ == cReal {
			if math.Abs(f) > math.MaxFloat32 {
				return nil, fmt.Errorf("number %s out of range", n)
			}
			return float32(f), nil
		}
		return f, nil
	case cInt:
		n, ok := v.(json.Number)
		if !ok {
			return nil, fmt.Errorf("%v is not a number", v)
		}
		i, err := strconv.ParseInt(string(n), 10, 64)
		if err != nil {
			return nil, fmt.Errorf("integer %s out of range", n)
		}
		return i, nil
	case cText:
		s, ok := v.(string)
		if !ok {
			return nil, fmt.Errorf("%v is not a string", v)
		}
		return s, nil
	case cBool:
		b, ok := v.(bool)
		if !ok {
			return nil, fmt.Errorf("%v is not a boolean", v)
		}
		return b, nil
	case cTime:
		ms, err := value(cInt, v)
		if err != nil {
			return nil, err
		}
		return time.UnixMilli(ms.(int64)).UTC(), nil
	case cDate:
		s, _ := v.(string)
		d, err := time.Parse(time.DateOnly, s)
		if err != nil {
			return nil, fmt.Errorf("%q is not a date", s)
		}
		return d, nil
	case cFlags:
		a, ok := v.([]any)
		if !ok {
			return nil, fmt.Errorf("flags %v are not an array", v)
		}
		out := make([]string, len(a))
		for i, f := range a {
			if out[i], ok = f.(string); !ok {
				return nil, fmt.Errorf("flag %v is not a string", f)
			}
		}
		return out, nil
	}
	return nil, fmt.Errorf("column type %d", typ)
}
