// Package recordtest gives tests of the record model and of stores the same material: a
// sample record of every kind, with every field set (NaN levels included), and a comparison
// that treats NaN as equal to NaN and ignores the last bits that the stored 0.01 dB steps lose.
package recordtest

import (
	"math"
	"reflect"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

// T0 is the start time of the sample records.
var T0 = time.Date(2026, 5, 4, 12, 0, 0, 0, time.UTC)

// ThirdOctave returns n band levels starting at 12.5 Hz (IEC 61260-1 band number -19); 33 bands
// reach 20 kHz (band 13).
func ThirdOctave(n int, base float64) []float64 {
	s := make([]float64, n)
	for i := range s {
		s[i] = base + float64(i)*0.37
	}
	return s
}

// Samples returns one record of every kind, with every field set.
func Samples() []record.Record {
	nan := math.NaN()
	return []record.Record{
		&record.Second{Start: T0, Duration: time.Second, LAeq: 54.31, LCeq: 61.02, LZeq: 66.9, LAFmax: 58.77, LAFmin: 49.1,
			LASmax: 56.2, LASmin: 51.3, LAImax: 60.05, LCpeak: 80.44, LZpeak: 82.1, LAE: 54.31,
			Spectrum: ThirdOctave(36, 20), FirstBand: -19, Flags: record.Dropped | record.Settling, DroppedSamples: 480},
		&record.Second{Start: T0.Add(1500 * time.Millisecond), Duration: 999979167 * time.Nanosecond, LAeq: nan, LCeq: nan,
			LZeq: nan, LAFmax: nan, LAFmin: nan, LASmax: nan, LASmin: nan, LAImax: nan, LCpeak: nan, LZpeak: nan, LAE: nan},
		&record.Minute{Start: T0, LAeq: 55, LCeq: 62, LZeq: 67, LAFmax: 71.2, LAFmin: 44.4, LAF1: 68, LAF5: 64, LAF10: 61,
			LAF50: 53, LAF90: 47.25, LAF95: 46.1, LAF99: 45, LAE: 72.78, LCpeak: 90.1, LAImax: 74.2,
			Spectrum: ThirdOctave(33, 10), FirstBand: -16,
			Histogram:    record.LevelHistogram{First: 440, Counts: []uint32{0, 0, 3, 7, 0, 0, 0, 0, 1, 600, 2, 0, 0}},
			ValidSeconds: 59, Flags: record.ClockUnsynced},
		&record.Minute{Start: T0.Add(time.Minute), LAeq: nan, LCeq: nan, LZeq: nan, LAFmax: nan, LAFmin: nan, LAF1: nan,
			LAF5: nan, LAF10: nan, LAF50: nan, LAF90: nan, LAF95: nan, LAF99: nan, LAE: nan, LCpeak: nan, LAImax: nan},
		&record.Event{Start: T0.Add(3 * time.Second), End: T0.Add(9*time.Second + 250*time.Millisecond), LAFmax: 88.8,
			LAeq: 80.1, LAE: 88.06, LCpeak: 101.3, Spectrum: ThirdOctave(36, 30), FirstBand: -19, Flags: record.Overload},
		&record.Calibration{At: T0, Reference: 94, Measured: 93.87, Deviation: -0.13, Frequency: 1000.2, Stability: 0.03,
			SensitivityBefore: -26.13, SensitivityAfter: -26, Applied: true, OK: true, Flags: record.Calibrating},
		&record.Health{At: T0, Flags: record.Clipped, Clipped: 12, DCOffset: 0.004, Silent: false, Stuck: true, UnderRangeSeconds: 3,
			DroppedSamples: 960, QueueOverflows: 2, CPU: 12.5, MemoryMB: 31.2, DiskFreeMB: 2048, StoreBytes: 1 << 28,
			ClockSynced: true, ClockErrorMs: 0.8, TemperatureC: nan},
		&record.Gap{From: T0, To: T0.Add(47 * time.Second), Reason: "audio device lost"},
		&record.Annotation{From: T0, To: T0.Add(time.Hour), Flags: record.Suspect | record.Excluded, Reason: "calibrator drift 0.9 dB found at the next check"},
		&record.Session{At: T0, SoftwareVersion: "0.1.0", ConfigHash: "sha256:5be1", SensitivityDBFS: -26.0, SampleRate: 48000,
			Device: "hw:CARD=Array,DEV=0", TimeZone: "Europe/Berlin", NodeID: "wendle-cross-03",
			Site: "Harrowby Lane, Wendle Cross", Latitude: 52.41, Longitude: -1.52},
	}
}

// Same compares two records field by field, treating NaN as equal to NaN.
func Same(a, b record.Record) bool {
	return reflect.DeepEqual(nanToSentinel(a), nanToSentinel(b))
}

func nanToSentinel(r record.Record) any {
	v := reflect.ValueOf(r).Elem()
	c := reflect.New(v.Type()).Elem()
	c.Set(v)
	for i := 0; i < c.NumField(); i++ {
		f := c.Field(i)
		switch f.Kind() {
		case reflect.Float64:
			f.SetFloat(canon(f.Float()))
		case reflect.Slice:
			if f.Type().Elem().Kind() == reflect.Float64 && f.Len() > 0 {
				s := make([]float64, f.Len())
				for j := range s {
					s[j] = canon(f.Index(j).Float())
				}
				f.Set(reflect.ValueOf(s))
			}
		}
	}
	return c.Interface()
}

// canon maps NaN to a sentinel and rounds away the last bits that decimal levels lose in the
// int16 centi-dB form (24.44 may come back as 24.439999999999998).
func canon(x float64) float64 {
	if math.IsNaN(x) {
		return -1e300
	}
	return math.Round(x*1e9) / 1e9
}
