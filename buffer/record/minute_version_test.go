package record

import (
	"testing"
	"time"
)

func TestMinuteCountsRoundTrip(t *testing.T) {
	m := &Minute{Start: time.Date(2026, 5, 4, 7, 0, 0, 0, time.UTC), LAeq: 61.2, ValidSeconds: 41,
		OverloadSeconds: 5, UnderRangeSeconds: 1, Flags: Overload | UnderRange}
	m.LeftOut[ReasonCalibrating], m.LeftOut[ReasonSettling] = 16, 3
	b, err := m.AppendBinary(nil)
	if err != nil {
		t.Fatal(err)
	}
	back := new(Minute)
	if err := back.UnmarshalBinary(b); err != nil {
		t.Fatal(err)
	}
	if back.LeftOut != m.LeftOut || back.OverloadSeconds != 5 || back.UnderRangeSeconds != 1 || back.ValidSeconds != 41 {
		t.Errorf("read back %+v, wrote %+v", back, m)
	}
	if tl := back.Tally(); tl.Counted != 41 || tl.LeftOutTotal() != 19 || tl.Bound() != Lower {
		t.Errorf("tally %+v", tl)
	}
}

func TestMinuteVersion1StillReads(t *testing.T) {
	// A version 1 minute record (before the left-out counts): version byte 1, then the same
	// fields without the counts at the end. Files written by earlier builds must stay readable.
	m := &Minute{Start: time.Date(2026, 5, 4, 7, 0, 0, 0, time.UTC), LAeq: 61.2, ValidSeconds: 58, Flags: Calibrating}
	b, err := m.AppendBinary(nil)
	if err != nil {
		t.Fatal(err)
	}
	// The counts and the valid duration are the last 1+6+2+1 one-byte uvarints (all small).
	v1 := append([]byte{1}, b[1:len(b)-(1+int(NumReasons)-1+2+1)]...)
	back := new(Minute)
	if err := back.UnmarshalBinary(v1); err != nil {
		t.Fatalf("version 1 record: %v", err)
	}
	if back.ValidSeconds != 58 || back.LAeq != 61.2 || !back.Flags.Has(Calibrating) {
		t.Errorf("version 1 record read as %+v", back)
	}
}
