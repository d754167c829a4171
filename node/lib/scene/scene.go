package scene

import (
	"fmt"
	"math"
	"math/rand/v2"
	"time"
)

// Config describes a scene. The zero value of every field except Seed selects its default, so
// Config{Seed: 1} is the default street. Rates take a negative value to switch a source off.
type Config struct {
	// SampleRate in Hz, 8000 to 192000; 0 means 48000.
	SampleRate int
	// Seed selects the scene: the same Config always gives the same samples.
	Seed int64
	// SensitivityDBFS is the microphone's sensitivity: the level in dBFS (AES17) that a 1 kHz
	// sine of 94 dB SPL produces. 0 means -26 (a common MEMS value). A higher sensitivity
	// (closer to 0) makes the loud events clip sooner; see Scene.Clipped.
	SensitivityDBFS float64
	// CalibratorSeconds is how long a calibrator tone sounds at the start, fades included;
	// 0 means no calibrator. While it sounds the street is shut out.
	CalibratorSeconds float64
	// CalibratorLevel is the tone's sound pressure level in dB re 20 µPa; 0 means 94.
	CalibratorLevel float64
	// CalibratorFrequency is the tone's frequency in Hz; 0 means 1000. It must lie below
	// 0.45 times the sample rate.
	CalibratorFrequency float64
	// BackgroundLevel is the A-weighted equivalent level of the background alone in dB;
	// 0 means 42.
	BackgroundLevel float64
	// CarsPerMinute is the mean number of cars passing per minute (a Poisson process); 0 means 3.
	CarsPerMinute float64
	// BusInterval is the bus timetable's headway; 0 means 12 minutes. The first bus passes
	// 30 s after the calibrator ends (or after the start).
	BusInterval time.Duration
	// BirdSongsPerMinute is the mean number of bird songs per minute; 0 means 1.5.
	BirdSongsPerMinute float64
	// Start, when not zero, is the wall-clock time of the first sample. Traffic, buses and birds
	// then follow the hour of the day in Start's location (a quiet night with no buses from
	// 00:00 to 05:00, rush hours, a dawn chorus). When zero, every minute is a daytime minute.
	Start time.Time
}

// withDefaults returns c with its zero fields replaced by their defaults, or an error naming
// the first field out of range.
func (c Config) withDefaults() (Config, error) {
	def := func(v *float64, d float64) {
		if *v == 0 {
			*v = d
		}
	}
	if c.SampleRate == 0 {
		c.SampleRate = 48000
	}
	def(&c.SensitivityDBFS, -26)
	def(&c.CalibratorLevel, 94)
	def(&c.CalibratorFrequency, 1000)
	def(&c.BackgroundLevel, 42)
	def(&c.CarsPerMinute, 3)
	def(&c.BirdSongsPerMinute, 1.5)
	if c.BusInterval == 0 {
		c.BusInterval = 12 * time.Minute
	}
	switch {
	case c.SampleRate < 8000 || c.SampleRate > 192000:
		return c, fmt.Errorf("scene: sample rate %d Hz out of range (8000 to 192000)", c.SampleRate)
	case !(c.SensitivityDBFS >= -80 && c.SensitivityDBFS < 0):
		return c, fmt.Errorf("scene: sensitivity %g dBFS out of range (-80 to below 0)", c.SensitivityDBFS)
	case !(c.CalibratorSeconds >= 0 && c.CalibratorSeconds <= 3600):
		return c, fmt.Errorf("scene: calibrator duration %g s out of range (0 to 3600)", c.CalibratorSeconds)
	case !(c.CalibratorLevel > 0 && c.CalibratorLevel <= 140):
		return c, fmt.Errorf("scene: calibrator level %g dB out of range (above 0 to 140)", c.CalibratorLevel)
	case !(c.CalibratorFrequency > 0 && c.CalibratorFrequency < 0.45*float64(c.SampleRate)):
		return c, fmt.Errorf("scene: calibrator frequency %g Hz must lie between 0 and 0.45 times the sample rate", c.CalibratorFrequency)
	case !(c.BackgroundLevel > 0 && c.BackgroundLevel <= 100):
		return c, fmt.Errorf("scene: background level %g dB out of range (above 0 to 100)", c.BackgroundLevel)
	case !(c.CarsPerMinute <= 120) || math.IsNaN(c.CarsPerMinute):
		return c, fmt.Errorf("scene: %g cars per minute is too many (at most 120)", c.CarsPerMinute)
	case !(c.BirdSongsPerMinute <= 60) || math.IsNaN(c.BirdSongsPerMinute):
		return c, fmt.Errorf("scene: %g bird songs per minute is too many (at most 60)", c.BirdSongsPerMinute)
	case c.BusInterval > 0 && c.BusInterval < 2*time.Minute:
		return c, fmt.Errorf("scene: bus interval %v is too short (at least 2m)", c.BusInterval)
	}
	return c, nil
}

// Kind is the kind of a scheduled event.
type Kind int

// The kinds of events.
const (
	Calibrator Kind = iota + 1 // the calibrator tone at start-up
	Car                        // a passing car
	Bus                        // a passing bus
	BirdSong                   // a bird's song of a few chirps
)

func (k Kind) String() string {
	switch k {
	case Calibrator:
		return "calibrator"
	case Car:
		return "car"
	case Bus:
		return "bus"
	case BirdSong:
		return "bird song"
	}
	return fmt.Sprintf("Kind(%d)", int(k))
}

// Event is one scheduled sound. Positions are sample indices counted from the scene's first
// sample.
type Event struct {
	Kind Kind
	// Start and End bound the samples the event touches: [Start, End).
	Start, End int64
	// Peak is the loudest moment: a vehicle's closest approach, a song's first chirp's middle,
	// the start of the calibrator's steady tone.
	Peak int64
	// Level is the event's own level at Peak in dB re 20 µPa, background excluded: for vehicles
	// and birds A-weighted (for a vehicle the level at closest approach, which its LAFmax
	// approaches within a few tenths of a decibel), for the calibrator unweighted.
	Level float64
	// Distance (m) and Speed (m/s) of a vehicle's straight path past the microphone.
	Distance, Speed float64
	// Frequency in Hz: the calibrator's tone, a bus engine's firing frequency, the start of a
	// bird's glide.
	Frequency float64

	// rendering parameters
	tau        float64 // Distance/Speed in seconds
	half       float64 // seconds from Peak to Start/End
	ampT, ampE float64 // tyre and engine bed amplitudes at Peak
	tones      [6]float64
	chirps     int64 // bird: number of chirps, chirp length, spacing in samples
	chirpLen   int64
	spacing    int64
	f1         float64 // bird: end of glide
	amp        float64 // bird: chirp amplitude
}

// Scene is a running synthetic street scene. It is not safe for concurrent use.
type Scene struct {
	cfg      Config
	fs       float64
	slotLen  int64
	pos      int64
	clipped  int64
	msPerPa2 float64 // mean square of a level L is msPerPa2 · 10^(L/10)

	noise            *rand.PCG // one draw per sample feeds the three noise beds
	bg, tyre, eng    chain
	gBg, kTyre, kEng float64

	calEnd, calFade int64
	calPeak         float64

	sched  scheduler
	slot   int64   // slot whose events are in window, -1 before the first
	window []Event // events of slots slot-1, slot, slot+1
	active []int   // indices into window of the events that touch the current chunk
}

// chunkLen is the most samples rendered with one list of active events.
const chunkLen = 256

// New returns the scene described by cfg, positioned at its first sample.
func New(cfg Config) (*Scene, error) {
	c, err := cfg.withDefaults()
	if err != nil {
		return nil, err
	}
	fs := float64(c.SampleRate)
	s := &Scene{
		cfg:     c,
		fs:      fs,
		slotLen: int64(c.SampleRate) * 60,
		slot:    -1,
		// A sound of level L dB SPL reads L - 94 + S dBFS; a sine of x dBFS has peak 10^(x/20)
		// (AES17) and mean square 10^(x/10)/2.
		msPerPa2: math.Pow(10, (-94+c.SensitivityDBFS)/10) / 2,
	}
	s.noise = rand.NewPCG(uint64(c.Seed), 0xB6B6_7E7E_E1E1)
	lim := func(f float64) float64 { return math.Min(f, 0.4*fs) }

	// Background: pink-ish from five pole-zero pairs two octaves apart (each pair falls by
	// 6 dB over one octave, so the cascade averages -3 dB per octave, common practice), between
	// a 15 Hz high-pass and a 5 kHz low-pass.
	s.bg = chain{bilinear1(0, lim(15), fs)}
	for p := 20.0; p < 6000 && 2*p < 0.4*fs; p *= 4 {
		s.bg = append(s.bg, bilinear1(2*p, p, fs))
	}
	s.bg = append(s.bg, bilinear1(-1, lim(5000), fs))
	// Tyre and road noise: a broad band around 1 kHz. Engine: below about 200 Hz.
	s.tyre = chain{bandpass2(lim(1000), 0.6, fs), bilinear1(0, lim(60), fs)}
	s.eng = chain{lowpass2(lim(200), 0.8, fs), bilinear1(0, lim(25), fs)}

	s.gBg = math.Sqrt(s.ms(c.BackgroundLevel) / s.bg.weightedPower(fs, true))
	s.kTyre = 1 / math.Sqrt(s.tyre.weightedPower(fs, true))
	s.kEng = 1 / math.Sqrt(s.eng.weightedPower(fs, true))

	if c.CalibratorSeconds > 0 {
		s.calEnd = int64(math.Round(c.CalibratorSeconds * fs))
		s.calFade = min(int64(math.Round(0.25*fs)), s.calEnd/4)
		s.calPeak = math.Sqrt(2 * s.ms(c.CalibratorLevel))
	}
	s.sched = newScheduler(s)
	s.window = make([]Event, 0, 3*(2*s.sched.perSlot+3)+1)
	s.active = make([]int, 0, cap(s.window))
	return s, nil
}

// ms returns the mean square, in samples scaled to full scale ±1.0, of a sound of level L dB.
func (s *Scene) ms(level float64) float64 { return s.msPerPa2 * math.Pow(10, level/10) }

// Config returns the configuration with defaults filled in.
func (s *Scene) Config() Config { return s.cfg }

// SampleRate returns the sample rate in Hz.
func (s *Scene) SampleRate() int { return s.cfg.SampleRate }

// Position returns the number of samples read so far.
func (s *Scene) Position() int64 { return s.pos }

// Clipped returns the number of samples so far that exceeded full scale and were clipped to
// ±1.0, as the converter of a real node would.
func (s *Scene) Clipped() int64 { return s.clipped }

// CalibratorEnd returns the index of the first sample after the calibrator tone (0 without one).
func (s *Scene) CalibratorEnd() int64 { return s.calEnd }

// Read fills dst with the next len(dst) mono samples, scaled so that full scale is ±1.0, and
// returns len(dst). The scene never ends. Read allocates nothing.
func (s *Scene) Read(dst []float32) int {
	for i := 0; i < len(dst); {
		n0 := s.pos
		slot := n0 / s.slotLen
		if slot != s.slot {
			s.loadWindow(slot)
		}
		// A chunk stays inside one slot; the events that touch it are listed once. Events that
		// do not touch a sample add nothing to it, so the samples do not depend on the chunks.
		k := int(min(int64(len(dst)-i), chunkLen, (slot+1)*s.slotLen-n0))
		n1 := n0 + int64(k)
		s.active = s.active[:0]
		for j := range s.window {
			if ev := &s.window[j]; ev.Start < n1 && ev.End > n0 {
				s.active = append(s.active, j)
			}
		}
		for j := range dst[i : i+k] {
			dst[i+j] = s.sample(n0 + int64(j))
		}
		s.pos = n1
		i += k
	}
	return len(dst)
}

// loadWindow plans the events of slots slot-1 to slot+1.
func (s *Scene) loadWindow(slot int64) {
	s.window = s.window[:0]
	if s.calEnd > 0 {
		s.window = append(s.window, s.sched.calibrator())
	}
	for k := slot - 1; k <= slot+1; k++ {
		s.window = s.sched.plan(s.window, k)
	}
	s.slot = slot
}

// white21 maps 21 random bits to a uniform value of unit variance: (2u - 1)·√3 with u the
// bits' midpoint in [0, 1).
func white21(b uint64) float64 {
	const scale = 1.0 / (1 << 21)
	return ((float64(b&(1<<21-1))+0.5)*scale*2 - 1) * math.Sqrt(3)
}

// sample computes sample n (n is the next sample: the noise generators advance).
func (s *Scene) sample(n int64) float32 {
	r := s.noise.Uint64()
	bg := s.gBg * s.bg.step(white21(r))
	ty := s.kTyre * s.tyre.step(white21(r>>21))
	en := s.kEng * s.eng.step(white21(r>>42))

	var pT, pE, tones, birds, cal float64
	for _, i := range s.active {
		ev := &s.window[i]
		if n < ev.Start || n >= ev.End {
			continue
		}
		switch ev.Kind {
		case Car, Bus:
			t := float64(n-ev.Peak) / s.fs
			u := t / ev.tau
			p := 1 / (1 + u*u) // d²/(d² + v²t²)
			// Raised-cosine taper over the outer 30 % of the pass, so that the cut is silent.
			if a := math.Abs(t) / ev.half; a > 0.7 {
				w := 0.5 * (1 + math.Cos(math.Pi*(a-0.7)/0.3))
				p *= w * w
			}
			pT += ev.ampT * ev.ampT * p
			pE += ev.ampE * ev.ampE * p
			if ev.Kind == Bus {
				// Harmonics by the recurrence sin((k+1)φ) = 2 cos φ sin kφ - sin((k-1)φ).
				sin1, cos1 := math.Sincos(2 * math.Pi * ev.Frequency * float64(n-ev.Start) / s.fs)
				prev, cur := 0.0, sin1
				var x float64
				for _, a := range ev.tones {
					x += a * cur
					prev, cur = cur, 2*cos1*cur-prev
				}
				tones += math.Sqrt(p) * x
			}
		case BirdSong:
			tau := n - ev.Start
			j := tau / ev.spacing
			w := tau - j*ev.spacing
			if j >= ev.chirps || w >= ev.chirpLen {
				continue
			}
			x := float64(w) / float64(ev.chirpLen)
			env := 0.5 * (1 - math.Cos(2*math.Pi*x))
			fa, fb := ev.Frequency, ev.f1
			if j%2 == 1 {
				fa, fb = fb, fa // alternate rising and falling glides
			}
			T := float64(ev.chirpLen) / s.fs
			t := float64(w) / s.fs
			birds += ev.amp * env * math.Sin(2*math.Pi*(fa*t+(fb-fa)*t*t/(2*T)))
		case Calibrator:
			var env float64
			switch {
			case n < s.calFade:
				env = 0.5 * (1 - math.Cos(math.Pi*float64(n)/float64(s.calFade)))
			case n < s.calEnd-s.calFade:
				env = 1
			default:
				env = 0.5 * (1 + math.Cos(math.Pi*float64(n-(s.calEnd-s.calFade))/float64(s.calFade)))
			}
			cal = s.calPeak * env * math.Sin(2*math.Pi*s.cfg.CalibratorFrequency*float64(n)/s.fs)
		}
	}
	street := bg + ty*math.Sqrt(pT) + en*math.Sqrt(pE) + tones + birds
	if s.calEnd > 0 && n < s.calEnd {
		// The coupler shuts the street out; it comes back as the calibrator is taken off.
		g := 0.0
		if k := n - (s.calEnd - s.calFade); k >= 0 {
			g = 0.5 * (1 - math.Cos(math.Pi*float64(k)/float64(s.calFade)))
		}
		street *= g
	}
	x := street + cal
	switch {
	case x >= 1:
		s.clipped++
		return 1
	case x <= -1:
		s.clipped++
		return -1
	}
	return float32(x)
}

// Events returns the events that touch samples [from, to), ordered by Start. It plans them
// afresh (without disturbing Read) and allocates its result.
func (s *Scene) Events(from, to int64) []Event {
	sch := newScheduler(s)
	var all []Event
	if s.calEnd > 0 {
		all = append(all, sch.calibrator())
	}
	for k := max(0, from/s.slotLen-1); k <= to/s.slotLen+1; k++ {
		all = sch.plan(all, k)
	}
	var out []Event
	for _, ev := range all {
		if ev.Start < to && ev.End > from {
			out = append(out, ev)
		}
	}
	sortEvents(out)
	return out
}

func sortEvents(ev []Event) {
	for i := 1; i < len(ev); i++ { // insertion sort: short lists, stable
		for j := i; j > 0 && ev[j].Start < ev[j-1].Start; j-- {
			ev[j], ev[j-1] = ev[j-1], ev[j]
		}
	}
}
