package publish

import "time"

// bucket is a token bucket: rate tokens a second, at most a tenth of a second's worth (and at
// least one) saved, so a backlog starts without a burst. A rate of zero or less means no limit.
// Taking may leave it in debt, so a large message is never stuck.
type bucket struct {
	rate, tokens float64
	last         time.Time
}

func newBucket(rate float64, now time.Time) bucket {
	return bucket{rate: rate, tokens: burst(rate), last: now}
}

func burst(rate float64) float64 { return max(rate/10, 1) }

func (b *bucket) refill(now time.Time) {
	if b.rate <= 0 {
		return
	}
	b.tokens = min(burst(b.rate), b.tokens+b.rate*now.Sub(b.last).Seconds())
	b.last = now
}

// ready reports whether n tokens may be taken now, and otherwise how long to wait.
func (b *bucket) ready(now time.Time, n float64) (bool, time.Duration) {
	if b.rate <= 0 {
		return true, 0
	}
	b.refill(now)
	n = min(n, burst(b.rate))
	if b.tokens >= n {
		return true, 0
	}
	return false, time.Duration((n - b.tokens) / b.rate * float64(time.Second))
}

func (b *bucket) take(now time.Time, n float64) {
	if b.rate <= 0 {
		return
	}
	b.refill(now)
	b.tokens -= n
}

// rateLog lets a log line through at most once per period and counts what it held back.
type rateLog struct {
	every      time.Duration
	last       time.Time
	suppressed int
}

// allow reports whether to log now, and how many lines were held back since the last one.
func (r *rateLog) allow(now time.Time) (bool, int) {
	if !r.last.IsZero() && now.Sub(r.last) < r.every {
		r.suppressed++
		return false, 0
	}
	n := r.suppressed
	r.last, r.suppressed = now, 0
	return true, n
}
