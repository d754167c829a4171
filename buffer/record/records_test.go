package record

import (
	"math"
	"math/rand/v2"
	"reflect"
	"testing"
	"time"
)

var t0 = time.Date(2026, 5, 4, 12, 0, 0, 0, time.UTC)

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
