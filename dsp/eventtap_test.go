package dsp

import (
	"math"
	"testing"
)

func TestEventDetectorThroughMeterTap(t *testing.T) {
	// An event detector fed by a meter's Tap finds the same events, with the same levels, as one
	// that filters the samples itself: both use the same weighting designs.
	x := make([]float32, 12*48000)
	for i := range x {
		l := 50.0
		if s := i / 48000; s >= 3 && s < 6 || s >= 8 && s < 9 {
			l = 82
		}
		x[i] = float32(ampFor(l, -26) * math.Sin(2*math.Pi*1000*float64(i)/testFS))
	}
	cfg := DefaultEventConfig(-26)
	cfg.Bands = 0
	own, err := NewEventDetector(cfg, testFS)
	if err != nil {
		t.Fatal(err)
	}
	tapped, _ := NewEventDetector(cfg, testFS)
	m, err := NewMeter(MeterConfig{SampleRate: testFS, SensitivityDBFS: -26, Tap: tapped.ProcessWeighted})
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < len(x); i += 1000 {
		blk := x[i:min(i+1000, len(x))]
		own.Process(blk)
		m.Process(blk)
	}
	own.Flush()
	tapped.Flush()
	var a, b Event
	n := 0
	for own.Next(&a) {
		if !tapped.Next(&b) {
			t.Fatal("the tapped detector found fewer events")
		}
		n++
		if a.Start != b.Start || a.End != b.End || math.Abs(a.LAeq-b.LAeq) > 1e-9 || math.Abs(a.LCpeak-b.LCpeak) > 1e-9 {
			t.Errorf("event %d: own %+v, tapped %+v", n, a, b)
		}
	}
	if tapped.Next(&b) || n != 2 {
		t.Errorf("%d events by the detector's own chain, want 2, and the same through the tap", n)
	}
	var r Result
	if allocs := testing.AllocsPerRun(10, func() { m.Process(x[:4800]); m.Take(&r) }); allocs != 0 {
		t.Errorf("meter with a tap allocates %v times", allocs)
	}
}
