package scene

import (
	"math"
	"math/rand/v2"
	"time"
)

// trafficByHour and birdsByHour return relative rates for an hour of the day (0 to 23) when
// Config.Start is set. The shapes are an invention in the spirit of common urban patterns
// (common practice): quiet nights, morning and evening rush hours, a dawn chorus of birds.
func trafficByHour(h int) float64 {
	return [24]float64{0.15, 0.1, 0.07, 0.07, 0.1, 0.25, 0.6, 1.1, 1.2, 1, 0.9, 0.9,
		0.95, 0.95, 0.95, 1, 1.15, 1.2, 1, 0.8, 0.6, 0.5, 0.4, 0.25}[h]
}

func birdsByHour(h int) float64 {
	return [24]float64{0.05, 0.05, 0.05, 0.1, 2, 4, 4, 2.5, 1.5, 1, 1, 1,
		1, 1, 1, 1, 1, 1.2, 1.5, 1.5, 0.8, 0.2, 0.05, 0.05}[h]
}

// passCut is how far below its peak a vehicle's pass is cut off (with a taper), in dB.
const passCut = 25

// Salts of the random streams, so that cars, birds and buses of the same slot draw from
// independent streams.
const (
	saltCars  = 0xC0C0_0000_0000_0000
	saltBirds = 0xB0B0_0000_0000_0000
	saltBuses = 0xA0A0_0000_0000_0000
)

// scheduler plans the events of one-minute slots. Each slot's plan depends only on the
// configuration and the slot's index.
type scheduler struct {
	s       *Scene
	pcg     *rand.PCG
	rng     *rand.Rand
	perSlot int // most events of one kind in one slot
}

func newScheduler(s *Scene) scheduler {
	pcg := rand.NewPCG(0, 0)
	c := s.cfg
	peak := max(c.CarsPerMinute*1.2, c.BirdSongsPerMinute*4, 0)
	return scheduler{s: s, pcg: pcg, rng: rand.New(pcg), perSlot: int(math.Ceil(peak+8*math.Sqrt(peak))) + 16}
}

func (sc *scheduler) seed(salt uint64, k int64) {
	sc.pcg.Seed(uint64(sc.s.cfg.Seed), salt^uint64(k))
}

func (sc *scheduler) uniform(lo, hi float64) float64 { return lo + (hi-lo)*sc.rng.Float64() }

// hourFactor returns the rate factor of slot k from table, or 1 without a start time.
func (sc *scheduler) hourFactor(k int64, table func(int) float64) float64 {
	if sc.s.cfg.Start.IsZero() {
		return 1
	}
	return table(sc.s.cfg.Start.Add(time.Duration(k) * time.Minute).Hour())
}

func (sc *scheduler) calibrator() Event {
	s := sc.s
	return Event{Kind: Calibrator, Start: 0, End: s.calEnd, Peak: s.calFade,
		Level: s.cfg.CalibratorLevel, Frequency: s.cfg.CalibratorFrequency}
}

// plan appends the events of slot k to dst: vehicles whose closest approach, and bird songs
// whose start, falls in the slot.
func (sc *scheduler) plan(dst []Event, k int64) []Event {
	s := sc.s
	if k < 0 {
		return dst
	}
	slotStart := k * s.slotLen
	secs := func(t float64) int64 { return int64(math.Round(t * s.fs)) }

	// Cars: Poisson arrivals.
	if rate := s.cfg.CarsPerMinute * sc.hourFactor(k, trafficByHour); rate > 0 {
		sc.seed(saltCars, k)
		t := 0.0
		for n := 0; n < sc.perSlot; n++ {
			t += sc.rng.ExpFloat64() / rate * 60
			if t >= 60 {
				break
			}
			ev := Event{Kind: Car, Peak: slotStart + secs(t)}
			if sc.rng.Float64() < 0.5 { // near lane
				ev.Distance, ev.Level = sc.uniform(6, 8), sc.uniform(68, 75)
			} else {
				ev.Distance, ev.Level = sc.uniform(10, 12), sc.uniform(65, 71)
			}
			ev.Speed = sc.uniform(8, 14)
			sc.vehicle(&ev, 0.85, 0.15)
			if ev.Peak >= s.calEnd {
				dst = append(dst, ev)
			}
		}
	}

	// Buses: a timetable with jitter of up to 15 % of the headway.
	if iv := s.cfg.BusInterval; iv > 0 {
		step := iv.Seconds() * s.fs
		t0 := float64(s.calEnd) + 30*s.fs
		first := int64(math.Floor((float64(slotStart)-t0)/step)) - 1
		last := int64(math.Floor((float64(slotStart+s.slotLen)-t0)/step)) + 1
		for j := max(first, 0); j <= last; j++ {
			sc.seed(saltBuses, j)
			jitter := 0.0
			if j > 0 {
				jitter = sc.uniform(-0.15, 0.15) * step
			}
			peak := int64(math.Round(t0 + float64(j)*step + jitter))
			if peak < slotStart || peak >= slotStart+s.slotLen {
				continue
			}
			if h := s.cfg.Start; !h.IsZero() && h.Add(time.Duration(float64(peak)/s.fs*float64(time.Second))).Hour() < 5 {
				continue // no service at night
			}
			ev := Event{Kind: Bus, Peak: peak, Distance: sc.uniform(6, 8), Speed: sc.uniform(6, 9),
				Level: sc.uniform(76, 82), Frequency: sc.uniform(55, 75)}
			sc.vehicle(&ev, 0.65, 0.30)
			// Engine firing tone and harmonics, amplitudes 1/k, carrying the remaining 5 % of
			// the A-weighted power.
			var a2 float64
			for h := range ev.tones {
				if f := float64(h+1) * ev.Frequency; f < 0.45*s.fs {
					ev.tones[h] = 1 / float64(h+1)
					a2 += ev.tones[h] * ev.tones[h] / 2 * aPower(f)
				}
			}
			c := math.Sqrt(0.05 * s.ms(ev.Level) / a2)
			for h := range ev.tones {
				ev.tones[h] *= c
			}
			if ev.Peak >= s.calEnd {
				dst = append(dst, ev)
			}
		}
	}

	// Birds: Poisson arrivals of songs.
	if rate := s.cfg.BirdSongsPerMinute * sc.hourFactor(k, birdsByHour); rate > 0 {
		sc.seed(saltBirds, k)
		t := 0.0
		for n := 0; n < sc.perSlot; n++ {
			t += sc.rng.ExpFloat64() / rate * 60
			if t >= 60 {
				break
			}
			top := math.Min(6000, 0.4*s.fs)
			ev := Event{Kind: BirdSong, Start: slotStart + secs(t)}
			ev.chirps = 3 + sc.rng.Int64N(6)
			ev.chirpLen = secs(sc.uniform(0.06, 0.15))
			ev.spacing = ev.chirpLen + secs(sc.uniform(0.06, 0.2))
			ev.Frequency = math.Min(sc.uniform(2000, 4500), top)
			ev.f1 = math.Min(ev.Frequency*sc.uniform(1.15, 1.5), top)
			ev.Level = sc.uniform(48, 60)
			ev.amp = math.Sqrt(2 * s.ms(ev.Level) / aPower((ev.Frequency+ev.f1)/2))
			ev.Peak = ev.Start + ev.chirpLen/2
			ev.End = ev.Start + (ev.chirps-1)*ev.spacing + ev.chirpLen
			if ev.Start >= s.calEnd {
				dst = append(dst, ev)
			}
		}
	}
	return dst
}

// vehicle fills in a vehicle's extent and bed amplitudes: fractions tyre and engine of its
// A-weighted power at closest approach come from the tyre and engine noise beds.
func (sc *scheduler) vehicle(ev *Event, tyre, engine float64) {
	s := sc.s
	ev.tau = ev.Distance / ev.Speed
	// d²/(d² + v²t²) falls passCut dB below its peak at |t| = τ·sqrt(10^(passCut/10) - 1).
	ev.half = ev.tau * math.Sqrt(math.Pow(10, passCut/10.0)-1)
	h := int64(math.Round(ev.half * s.fs))
	ev.Start, ev.End = ev.Peak-h, ev.Peak+h+1
	ms := s.ms(ev.Level)
	ev.ampT, ev.ampE = math.Sqrt(tyre*ms), math.Sqrt(engine*ms)
}
