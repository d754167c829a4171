package record

import (
	"errors"
	"math"
	"math/rand/v2"
	"reflect"
	"testing"
	"time"
)

var t0 = time.Date(2026, 5, 4, 12, 0, 0, 0, time.UTC)

// thirdOctave returns n band levels starting at 12.5 Hz (IEC 61260-1 band number -19); 33 bands
// reach 20 kHz (band 13).
func thirdOctave(n int, base float64) []float64 {
	s := make([]float64, n)
	for i := range s {
		s[i] = base + float64(i)*0.37
	}
	return s
}

func sampleRecords() []Record {
	nan := math.NaN()
	return []Record{
		&Second{Start: t0, Duration: time.Second, LAeq: 54.31, LCeq: 61.02, LZeq: 66.9, LAFmax: 58.77, LAFmin: 49.1,
			LASmax: 56.2, LASmin: 51.3, LAImax: 60.05, LCpeak: 80.44, LZpeak: 82.1, LAE: 54.31,
			Spectrum: thirdOctave(36, 20), FirstBand: -19, Flags: Dropped | Settling, DroppedSamples: 480},
		&Second{Start: t0.Add(1500 * time.Millisecond), Duration: 999979167 * time.Nanosecond, LAeq: nan, LCeq: nan,
			LZeq: nan, LAFmax: nan, LAFmin: nan, LASmax: nan, LASmin: nan, LAImax: nan, LCpeak: nan, LZpeak: nan, LAE: nan},
		&Minute{Start: t0, LAeq: 55, LCeq: 62, LZeq: 67, LAFmax: 71.2, LAFmin: 44.4, LAF1: 68, LAF5: 64, LAF10: 61,
			LAF50: 53, LAF90: 47.25, LAF95: 46.1, LAF99: 45, LAE: 72.78, LCpeak: 90.1, LAImax: 74.2,
			Spectrum: thirdOctave(33, 10), FirstBand: -16,
			Histogram:    LevelHistogram{First: 440, Counts: []uint32{0, 0, 3, 7, 0, 0, 0, 0, 1, 600, 2, 0, 0}},
			ValidSeconds: 59, Flags: ClockUnsynced},
		&Minute{Start: t0.Add(time.Minute), LAeq: nan, LCeq: nan, LZeq: nan, LAFmax: nan, LAFmin: nan, LAF1: nan,
			LAF5: nan, LAF10: nan, LAF50: nan, LAF90: nan, LAF95: nan, LAF99: nan, LAE: nan, LCpeak: nan, LAImax: nan},
		&Event{Start: t0.Add(3 * time.Second), End: t0.Add(9*time.Second + 250*time.Millisecond), LAFmax: 88.8,
			LAeq: 80.1, LAE: 88.06, LCpeak: 101.3, Spectrum: thirdOctave(36, 30), FirstBand: -19, Flags: Overload},
		&Calibration{At: t0, Reference: 94, Measured: 93.87, Deviation: -0.13, Frequency: 1000.2, Stability: 0.03,
			SensitivityBefore: -26.13, SensitivityAfter: -26, Applied: true, OK: true, Flags: Calibrating},
		&Health{At: t0, Flags: Clipped, Clipped: 12, DCOffset: 0.004, Silent: false, Stuck: true, UnderRangeSeconds: 3,
			DroppedSamples: 960, QueueOverflows: 2, CPU: 12.5, MemoryMB: 31.2, DiskFreeMB: 2048, StoreBytes: 1 << 28,
			ClockSynced: true, ClockErrorMs: 0.8, TemperatureC: nan},
		&Gap{From: t0, To: t0.Add(47 * time.Second), Reason: "audio device lost"},
		&Annotation{From: t0, To: t0.Add(time.Hour), Flags: Suspect | Excluded, Reason: "calibrator drift 0.9 dB found at the next check"},
		&Session{At: t0, SoftwareVersion: "0.1.0", ConfigHash: "sha256:5be1", SensitivityDBFS: -26.0, SampleRate: 48000,
			Device: "hw:CARD=Array,DEV=0", TimeZone: "Europe/Berlin", NodeID: "wendle-cross-03",
			Site: "Harrowby Lane, Wendle Cross", Latitude: 52.41, Longitude: -1.52},
	}
}

// sameRecord compares two records field by field, treating NaN as equal to NaN.
func sameRecord(a, b Record) bool {
	return reflect.DeepEqual(nanToSentinel(a), nanToSentinel(b))
}

func nanToSentinel(r Record) any {
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

func TestRecordRoundTrip(t *testing.T) {
	for _, r := range sampleRecords() {
		t.Run(r.Kind().String(), func(t *testing.T) {
			b, err := r.AppendBinary(nil)
			if err != nil {
				t.Fatal(err)
			}
			got, err := Decode(r.Kind(), b)
			if err != nil {
				t.Fatal(err)
			}
			if m, ok := r.(*Minute); ok {
				// Stored with trimmed zero ends.
				w := *m
				w.Histogram = w.Histogram.Merge(LevelHistogram{})
				if len(w.Histogram.Counts) > 0 {
					w.Histogram = trimmed(w.Histogram)
				}
				r = &w
			}
			if !sameRecord(r, got) {
				t.Errorf("round trip changed the record:\n got %+v\nwant %+v", got, r)
			}
			if got.Time() != r.Time() || got.Kind() != r.Kind() {
				t.Errorf("Time/Kind changed")
			}
		})
	}
}

func trimmed(h LevelHistogram) LevelHistogram {
	c, f := h.Counts, h.First
	for len(c) > 0 && c[0] == 0 {
		c, f = c[1:], f+1
	}
	for len(c) > 0 && c[len(c)-1] == 0 {
		c = c[:len(c)-1]
	}
	return LevelHistogram{First: f, Counts: c}
}

// The stored resolution must keep a level within 0.005 dB (half of the 0.01 dB step). The
// display resolution of IEC 61672-1:2013 (5.15) is 0.1 dB; the store keeps ten times finer.
func TestLevelQuantisation(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for range 100000 {
		l := rng.Float64()*400 - 200
		got := levelValue(levelCode(l))
		if math.Abs(got-l) > 0.005+1e-12 {
			t.Fatalf("level %.6f stored as %.6f", l, got)
		}
	}
	for _, tc := range []struct{ in, want float64 }{
		{math.NaN(), math.NaN()},
		{math.Inf(-1), math.NaN()},
		{math.Inf(1), MaxStoredLevel},
		{1000, MaxStoredLevel},
		{-1000, MinStoredLevel},
		{0, 0},
		{-0.004, 0},
		{94.005, 94.01},
	} {
		got := levelValue(levelCode(tc.in))
		if !(got == tc.want || math.IsNaN(got) && math.IsNaN(tc.want)) {
			t.Errorf("level %v stored as %v, want %v", tc.in, got, tc.want)
		}
	}
}

func TestNewerVersionRefused(t *testing.T) {
	for _, r := range sampleRecords() {
		b, _ := r.AppendBinary(nil)
		b[0]++
		_, err := Decode(r.Kind(), b)
		if !errors.Is(err, ErrNewerRecord) {
			t.Errorf("%s: newer version gave %v, want ErrNewerRecord", r.Kind(), err)
		}
	}
}

func TestTruncatedRecordsFail(t *testing.T) {
	for _, r := range sampleRecords() {
		b, _ := r.AppendBinary(nil)
		for n := 0; n < len(b); n++ {
			if _, err := Decode(r.Kind(), b[:n]); err == nil {
				t.Errorf("%s truncated to %d of %d bytes decoded without error", r.Kind(), n, len(b))
			}
		}
		if _, err := Decode(r.Kind(), append(b, 0)); err == nil {
			t.Errorf("%s with a trailing byte decoded without error", r.Kind())
		}
	}
}

// A health record with a field this build does not know (tag 60, as a later version might add)
// still decodes: the encoding is meant to grow without a version change.
func TestHealthSkipsUnknownFields(t *testing.T) {
	nan := math.NaN()
	h := &Health{At: t0, CPU: 3.5, StoreBytes: 4096, DCOffset: nan, MemoryMB: nan, DiskFreeMB: nan, ClockErrorMs: nan, TemperatureC: nan}
	b, _ := h.AppendBinary(nil)
	// Raise the field count from 2 to 4 and add the two unknown fields.
	if b[9] != 2 {
		t.Fatalf("field count byte is %d", b[9])
	}
	b[9] = 4
	e := enc{b}
	e.uvarint(60<<3 | wireVarint)
	e.uvarint(12345)
	e.uvarint(61<<3 | wireFloat)
	e.float(2.5)
	got, err := Decode(KindHealth, e.b)
	if err != nil {
		t.Fatal(err)
	}
	g := got.(*Health)
	if g.CPU != 3.5 || g.StoreBytes != 4096 || !math.IsNaN(g.TemperatureC) || !g.At.Equal(t0) {
		t.Errorf("decoded %+v", g)
	}
}

func TestRecordSizes(t *testing.T) {
	for _, r := range sampleRecords()[:1] {
		b, _ := r.AppendBinary(nil)
		// Eleven levels, 36 bands, times and counters: well under 128 bytes.
		if len(b) > 128 {
			t.Errorf("second record with spectrum takes %d bytes", len(b))
		}
	}
	m := &Minute{Start: t0}
	m.Histogram.First = 400
	m.Histogram.Counts = make([]uint32, 300)
	for i := range m.Histogram.Counts {
		if i%3 != 0 {
			m.Histogram.Counts[i] = 20
		}
	}
	b, _ := m.AppendBinary(nil)
	if len(b) > 60+300 {
		t.Errorf("minute record with a 300-bin histogram takes %d bytes", len(b))
	}
}

func TestBadRecordsRefused(t *testing.T) {
	for _, r := range []Record{
		&Second{Start: time.Time{}},
		&Second{Start: t0, Spectrum: make([]float64, 5000)},
		&Event{Start: t0, End: t0.Add(-time.Second)},
		&Gap{From: t0, To: t0.Add(-time.Second)},
		&Minute{Start: t0, ValidSeconds: -1},
	} {
		if _, err := r.AppendBinary(nil); err == nil {
			t.Errorf("%s %+v encoded without error", r.Kind(), r)
		}
	}
}

func TestFlags(t *testing.T) {
	for _, tc := range []struct {
		f    Flags
		want string
	}{
		{0, ""},
		{Overload, "overload"},
		{Clipped | Excluded, "clipped|excluded"},
		{Suspect | 1<<20, "suspect|bit20"},
	} {
		if got := tc.f.String(); got != tc.want {
			t.Errorf("%#x: %q, want %q", uint32(tc.f), got, tc.want)
		}
		back, err := ParseFlags(tc.want)
		if err != nil || back != tc.f {
			t.Errorf("ParseFlags(%q) = %v, %v", tc.want, back, err)
		}
	}
	if _, err := ParseFlags("loud"); err == nil {
		t.Error("unknown flag accepted")
	}
}

func TestKinds(t *testing.T) {
	for _, k := range Kinds() {
		p, err := ParseKind(k.String())
		if err != nil || p != k {
			t.Errorf("ParseKind(%q) = %v, %v", k, p, err)
		}
		r, err := NewRecord(k)
		if err != nil || r.Kind() != k {
			t.Errorf("NewRecord(%v) = %v, %v", k, r, err)
		}
	}
	if _, err := ParseKind("hour"); err == nil {
		t.Error("unknown kind accepted")
	}
}

func TestHistogramMerge(t *testing.T) {
	a := LevelHistogram{First: 500, Counts: []uint32{1, 2, 3}}
	b := LevelHistogram{First: 498, Counts: []uint32{4, 0, 5}}
	got := a.Merge(b)
	want := LevelHistogram{First: 498, Counts: []uint32{4, 0, 6, 2, 3}}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("merge = %+v, want %+v", got, want)
	}
	if got.Total() != a.Total()+b.Total() {
		t.Errorf("total %d", got.Total())
	}
}
