package calibrate

import (
	"math"
	"testing"
	"time"

	"github.com/leqnode/leqnode/buffer/record"
)

func TestMatchReference(t *testing.T) {
	for _, tc := range []struct {
		read, want float64
		ok         bool
	}{
		{94.1, 94, true}, {113.2, 114, true}, {103.9, 94, false}, {104.1, 114, false},
		{99.5, 94, true}, {70, 94, false}, {121, 114, false},
	} {
		// A tone the node read at `read` dB with S = -26 has read - 94 - 26 dBFS (AN-1112).
		got, ok := MatchReference(tc.read-94-26, -26, nil, 0)
		if got != tc.want || ok != tc.ok {
			t.Errorf("read %g dB: %g, %v; want %g, %v", tc.read, got, ok, tc.want, tc.ok)
		}
	}
}

// TestHandle: a detected 114 dB calibrator marks its seconds calibrating (with the 2 s
// margin) and stores the check; a 1 kHz tone at 70 dB is not a check and stores nothing.
func TestHandle(t *testing.T) {
	t0 := time.Date(2026, 6, 5, 10, 0, 0, 0, time.UTC)
	s := openStore(t, t0.Add(time.Hour))
	for i := range 30 {
		s.Append(&record.Second{Start: t0.Add(time.Duration(i) * time.Second), Duration: time.Second, LAeq: 60})
	}
	det := detection(114.2, -26)
	rec, dr, err := Handle(s, Observed{Detection: det, ToneFrom: t0.Add(10 * time.Second), End: t0.Add(18 * time.Second)}, -26, HandleOptions{})
	if err != nil || rec == nil || dr.Previous != nil {
		t.Fatalf("rec %+v, drift %+v, err %v", rec, dr, err)
	}
	if rec.Reference != 114 || math.Abs(rec.Deviation-0.2) > 1e-9 || !rec.OK {
		t.Errorf("check %+v", rec)
	}
	rec, _, err = Handle(s, Observed{Detection: detection(70, -26), ToneFrom: t0.Add(25 * time.Second), End: t0.Add(29 * time.Second)}, -26, HandleOptions{})
	if err != nil || rec != nil {
		t.Errorf("70 dB tone: %+v, %v", rec, err)
	}
	var marked []int
	s.Range(record.KindSecond, t0, t0.Add(time.Minute), func(r record.Record) error {
		if sec := r.(*record.Second); sec.Flags.Has(record.Calibrating) {
			marked = append(marked, int(sec.Start.Sub(t0)/time.Second))
		}
		return nil
	})
	if len(marked) != 12 || marked[0] != 8 || marked[11] != 19 {
		t.Errorf("calibrating seconds %v, want 8 to 19", marked)
	}
	if n := s.LastSeq(record.KindCalibration); n != 1 {
		t.Errorf("%d checks stored, want 1", n)
	}
}
