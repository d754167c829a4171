package record_test

import (
	"errors"
	"testing"

	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/buffer/record/recordtest"
)

func TestRecordRoundTrip(t *testing.T) {
	for _, r := range recordtest.Samples() {
		t.Run(r.Kind().String(), func(t *testing.T) {
			b, err := r.AppendBinary(nil)
			if err != nil {
				t.Fatal(err)
			}
			got, err := record.Decode(r.Kind(), b)
			if err != nil {
				t.Fatal(err)
			}
			if m, ok := r.(*record.Minute); ok {
				// Stored with trimmed zero ends.
				w := *m
				w.Histogram = w.Histogram.Merge(record.LevelHistogram{})
				if len(w.Histogram.Counts) > 0 {
					w.Histogram = trimmed(w.Histogram)
				}
				r = &w
			}
			if !recordtest.Same(r, got) {
				t.Errorf("round trip changed the record:\n got %+v\nwant %+v", got, r)
			}
			if got.Time() != r.Time() || got.Kind() != r.Kind() {
				t.Errorf("Time/record.Kind changed")
			}
		})
	}
}

func trimmed(h record.LevelHistogram) record.LevelHistogram {
	c, f := h.Counts, h.First
	for len(c) > 0 && c[0] == 0 {
		c, f = c[1:], f+1
	}
	for len(c) > 0 && c[len(c)-1] == 0 {
		c = c[:len(c)-1]
	}
	return record.LevelHistogram{First: f, Counts: c}
}

func TestNewerVersionRefused(t *testing.T) {
	for _, r := range recordtest.Samples() {
		b, _ := r.AppendBinary(nil)
		b[0]++
		_, err := record.Decode(r.Kind(), b)
		if !errors.Is(err, record.ErrNewerRecord) {
			t.Errorf("%s: newer version gave %v, want record.ErrNewerRecord", r.Kind(), err)
		}
	}
}

func TestTruncatedRecordsFail(t *testing.T) {
	for _, r := range recordtest.Samples() {
		b, _ := r.AppendBinary(nil)
		for n := 0; n < len(b); n++ {
			if _, err := record.Decode(r.Kind(), b[:n]); err == nil {
				t.Errorf("%s truncated to %d of %d bytes decoded without error", r.Kind(), n, len(b))
			}
		}
		if _, err := record.Decode(r.Kind(), append(b, 0)); err == nil {
			t.Errorf("%s with a trailing byte decoded without error", r.Kind())
		}
	}
}

func TestRecordSizes(t *testing.T) {
	for _, r := range recordtest.Samples()[:1] {
		b, _ := r.AppendBinary(nil)
		// Eleven levels, 36 bands, times and counters: well under 128 bytes.
		if len(b) > 128 {
			t.Errorf("second record with spectrum takes %d bytes", len(b))
		}
	}
	m := &record.Minute{Start: recordtest.T0}
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
