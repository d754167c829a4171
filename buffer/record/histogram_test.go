package record

import (
	"slices"
	"testing"
)

// TestMinuteV1HistogramConverted: a minute record of version 1 stored its level histogram in
// bins [k/10, (k+1)/10) dB; version 2 centres the bins on the 0.1 dB grid ([k/10 - 0.05,
// k/10 + 0.05), as decided for percentiles: a steady level reads itself). Reading a version 1
// record splits each old bin evenly over the two new bins it straddles, keeping the total.
func TestMinuteV1HistogramConverted(t *testing.T) {
	m := &Minute{Start: t0, LAeq: 45, ValidSeconds: 60, Histogram: LevelHistogram{First: 450, Counts: []uint32{10, 0, 3}}}
	b, err := m.AppendBinary(nil)
	if err != nil {
		t.Fatal(err)
	}
	if b[0] != 2 {
		t.Fatalf("minute records are written as version %d, want 2", b[0])
	}
	var now Minute
	if err := now.UnmarshalBinary(b); err != nil {
		t.Fatal(err)
	}
	if now.Histogram.First != 450 || !slices.Equal(now.Histogram.Counts, []uint32{10, 0, 3}) {
		t.Errorf("version 2 round trip: %+v", now.Histogram)
	}
	// The same bytes as version 1 wrote them: the bins' meaning differs, and version 1 ends
	// before the left-out and bound counts and the valid duration (1+6+2+1 one-byte uvarints here).
	b = append([]byte{1}, b[1:len(b)-(1+int(NumReasons)-1+2+1)]...)
	var old Minute
	if err := old.UnmarshalBinary(b); err != nil {
		t.Fatal(err)
	}
	if old.Histogram.First != 450 || !slices.Equal(old.Histogram.Counts, []uint32{5, 5, 1, 2}) {
		t.Errorf("version 1 converted to %d %v, want 450 [5 5 1 2]", old.Histogram.First, old.Histogram.Counts)
	}
	if old.Histogram.Total() != m.Histogram.Total() {
		t.Errorf("total %d, want %d", old.Histogram.Total(), m.Histogram.Total())
	}
}
