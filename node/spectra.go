package node

import (
	"math"
	"time"

	"github.com/leqnode/leqnode/node/internal/when"
)

// spectrumHistory keeps the band levels of the most recent seconds, so that an event's
// spectrum can be computed when the event ends without a second filter bank running beside the
// meter's: the energy mean of the seconds the event overlaps, each weighted by the overlap. The
// spectrum thus covers whole-second edges of the event, a fraction of a second more than the
// event itself at each end.
type spectrumHistory struct {
	secs [spectrumSeconds]spectrumSecond
	next int
	n    int
}

// spectrumSeconds bounds the longest event whose spectrum is kept whole: events.max_duration_s
// is at most 86400, but the default 300 s plus the hold fit.
const spectrumSeconds = 600

type spectrumSecond struct {
	start time.Time
	dur   float64
	e     []float64 // band energies, 10^(L/10); NaN levels as 0
}

func (h *spectrumHistory) add(start time.Time, dur float64, levels []float64) {
	s := &h.secs[h.next]
	s.start, s.dur = start, dur
	s.e = s.e[:0]
	for _, l := range levels {
		e := 0.0
		if !math.IsNaN(l) && !math.IsInf(l, 0) {
			e = math.Pow(10, l/10)
		}
		s.e = append(s.e, e)
	}
	h.next = (h.next + 1) % spectrumSeconds
	h.n = min(h.n+1, spectrumSeconds)
}

// over returns the band levels LZeq over [from, to), or nil when no stored second overlaps it.
func (h *spectrumHistory) over(from, to time.Time) []float64 {
	var sum []float64
	var wsum float64
	for i := range h.n {
		s := &h.secs[(h.next-1-i+spectrumSeconds)%spectrumSeconds]
		end := s.start.Add(time.Duration(s.dur * 1e9))
		lo, hi := when.Later(s.start, from), when.Earlier(end, to)
		w := hi.Sub(lo).Seconds()
		if w <= 0 {
			continue
		}
		if sum == nil {
			sum = make([]float64, len(s.e))
		}
		for j := range min(len(sum), len(s.e)) {
			sum[j] += w * s.e[j]
		}
		wsum += w
	}
	if wsum == 0 {
		return nil
	}
	for j := range sum {
		sum[j] = 10 * math.Log10(sum[j]/wsum)
	}
	return sum
}
