package dsp

import (
	"errors"
	"fmt"
	"math"
)

// Noise events. An event is a stretch of time in which a time-weighted A level passes a
// threshold: a vehicle pass-by, an aircraft overflight, a shout. The detector works on the
// samples through its own short chain (DC blocker, C and A weighting, Fast and Slow time
// weighting, C-weighted peak between samples and, optionally, a band filter bank on the
// Z-weighted signal), so it needs nothing from a Meter and its results do not depend on how
// the samples were cut into blocks.
//
// The rule, with L the detection level (LAF, or LAS when EventConfig.Slow is set):
//
//   - an event starts at the first sample at which L reaches Threshold;
//   - it lasts while L stays at or above Threshold - Hysteresis;
//   - a dip below that level shorter than Hold does not end it; a dip that lasts Hold ends the
//     event at the sample where the dip began, so the event never contains its closing hold;
//   - an event shorter than MinDuration is dropped (and counted);
//   - an event that reaches MaxDuration is closed there and marked Truncated, and no new event
//     starts until L has fallen below Threshold - Hysteresis, so a steady loud source gives one
//     truncated event, not a train of them;
//   - while the caller says a calibrator tone is present (SetSuppressed), no event starts, and
//     an event in progress when the tone appears is dropped (and counted).
//
// Over the samples [Start, End) of each event the detector computes LAeq, LAE, LAFmax, LASmax,
// LCpeak and, with a filter bank, the band levels LZeq. An event is delivered (Next) once it has
// ended, that is up to Hold seconds after End.

// EventConfig sets up an EventDetector.
type EventConfig struct {
	// SensitivityDBFS is the microphone sensitivity, as in MeterConfig: use the meter's value.
	SensitivityDBFS float64

	// Threshold is the level, in dB, at which an event starts. Too low a threshold turns the
	// background into one endless event (see MaxDuration); too high misses the events that
	// matter. Set it some 10 dB above the usual background (common practice).
	Threshold float64

	// Hysteresis, in dB (≥ 0), lowers the level below which an event ends to
	// Threshold - Hysteresis, so that a level hovering at the threshold does not split one
	// event into many. 0 ends events at the threshold itself.
	Hysteresis float64

	// Hold, in seconds (≥ 0), bridges dips: an event ends only when the level has stayed below
	// Threshold - Hysteresis for Hold seconds. A longer hold merges close events (two vehicles
	// in a row become one) and delays delivery of every event by Hold.
	Hold float64

	// MinDuration, in seconds (≥ 0), drops shorter events: door slams and clicks are kept
	// with 0, while 1 to 3 s keeps only pass-bys (common practice).
	MinDuration float64

	// MaxDuration, in seconds (> 0), closes an event that lasts this long; the event is marked
	// Truncated. The detector keeps no more than the running sums of an open event, so a long
	// limit costs nothing, but an event is delivered only when it ends: with a limit of hours,
	// a steady loud source keeps its event unseen for hours.
	MaxDuration float64

	// Slow detects on LAS instead of LAF. LAS smooths short peaks (impulsive sounds may stay
	// under the threshold) and lengthens every event by the slower decay.
	Slow bool

	// Bands selects the filter bank for the event spectrum: 0 (no spectrum), Octave or Third.
	// The bank runs beside the meter's own bank, so a one-third-octave event spectrum roughly
	// doubles the per-sample cost of band analysis.
	Bands BandSet
}

// DefaultEventConfig returns a configuration for street traffic: threshold 70 dB, hysteresis
// 3 dB, hold 1 s, events from 1 s to 5 min, detection on LAF, one-third-octave spectrum.
// The threshold is site-specific: set it from the site's background level.
func DefaultEventConfig(sensitivityDBFS float64) EventConfig {
	return EventConfig{
		SensitivityDBFS: sensitivityDBFS,
		Threshold:       70,
		Hysteresis:      3,
		Hold:            1,
		MinDuration:     1,
		MaxDuration:     300,
		Bands:           Third,
	}
}

// Event holds the results of one event. Levels are in dB re 20 µPa.
type Event struct {
	// Start and End are sample positions counted from the detector's first sample: the event
	// covers samples [Start, End). The caller maps them to wall time with its sample clock.
	Start, End int64
	Duration   float64 // seconds: (End - Start) / sample rate

	LAFmax, LASmax float64 // maxima of the Fast and Slow A levels over the event
	// LAeq is the A-weighted equivalent continuous level over the event (ISO 1996-1:2016,
	// 3.1.7): LAeq,T = 10 lg((1/T) ∫ pA² dt / p0²).
	LAeq float64
	// LAE is the sound exposure level of the event (ISO 1996-1:2016, 3.1.8):
	// LAE = LAeq,T + 10 lg(T / 1 s).
	LAE float64
	// LCpeak is the C-weighted peak level, between samples (IEC 61672-1:2013, 3.19).
	LCpeak float64
	// Bands holds the band levels LZeq over the event, in the order of EventDetector.Bands;
	// nil without a filter bank. A band filter delays its output by its group delay, so the
	// lowest bands of a short event read a little of the sound just before it and miss a
	// little of its end.
	Bands []float64

	// Truncated marks an event closed by MaxDuration or by Flush, not by the level falling.
	Truncated bool
}

// EventStats counts events that were not delivered.
type EventStats struct {
	Short      int64 // shorter than MinDuration
	Suppressed int64 // dropped because a calibrator tone appeared during them
	Overflowed int64 // lost because the caller did not take events with Next in time
}

// eventQueue is the number of ended events the detector holds until the caller takes them.
const eventQueue = 16

// Detector states.
const (
	evIdle   = iota // waiting for the level to reach the threshold
	evActive        // in an event, level at or above the lower level
	evHold          // in an event, level below the lower level for less than Hold
	evRearm         // after truncation or suppression: waiting for the level to fall
)

// eventSums are the running sums of a stretch of samples.
type eventSums struct {
	n          int64
	sumA       float64 // Σ a²
	maxF, maxS float64 // largest Fast and Slow mean squares
	peakC      float64 // largest C magnitude between samples
	bandE      []float64
}

func (s *eventSums) reset() {
	s.n, s.sumA, s.maxF, s.maxS, s.peakC = 0, 0, 0, 0, 0
	clear(s.bandE)
}

func (s *eventSums) merge(o *eventSums) {
	s.n += o.n
	s.sumA += o.sumA
	s.maxF = max(s.maxF, o.maxF)
	s.maxS = max(s.maxS, o.maxS)
	s.peakC = max(s.peakC, o.peakC)
	for i, e := range o.bandE {
		s.bandE[i] += e
	}
}

// EventDetector finds events in a stream of samples; see EventConfig for the rule. It is pure
// computation: Process allocates nothing. An EventDetector is not safe for concurrent use.
type EventDetector struct {
	cfg    EventConfig
	fs     float64
	offset float64

	dc, cw, aw *Cascade
	bank       *FilterBank
	peak       peakDetector
	z, c, a    [chunk]float64

	kF, kS        float64
	f, s          float64
	on, off       float64 // threshold and lower level as mean squares
	holdN, minN   int64
	maxN          int64
	pos           int64 // samples processed
	state         int
	suppressed    bool
	start, holdAt int64
	segFrom       int64 // first sample of the stretch not yet flushed
	seg, ev, pend eventSums
	scratch       []float64
	queue         [eventQueue]Event
	qHead, qLen   int
	stats         EventStats
}

// NewEventDetector returns a detector at rest for samples at rate fs (Hz).
func NewEventDetector(cfg EventConfig, fs float64) (*EventDetector, error) {
	if !(fs >= 8000 && fs <= 192000) {
		return nil, fmt.Errorf("dsp: event detector: sample rate %g Hz out of range: use 8000 to 192000 Hz", fs)
	}
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	switch {
	case !finite(cfg.SensitivityDBFS):
		return nil, errors.New("dsp: event detector: microphone sensitivity is not a number: give it in dBFS, e.g. -26")
	case !finite(cfg.Threshold):
		return nil, errors.New("dsp: event detector: threshold is not a number: give it in dB, e.g. 70")
	case !finite(cfg.Hysteresis) || cfg.Hysteresis < 0:
		return nil, fmt.Errorf("dsp: event detector: hysteresis %g dB: give 0 or more", cfg.Hysteresis)
	case !finite(cfg.Hold) || cfg.Hold < 0:
		return nil, fmt.Errorf("dsp: event detector: hold %g s: give 0 or more seconds", cfg.Hold)
	case !finite(cfg.MinDuration) || cfg.MinDuration < 0:
		return nil, fmt.Errorf("dsp: event detector: minimum duration %g s: give 0 or more seconds", cfg.MinDuration)
	case !finite(cfg.MaxDuration) || cfg.MaxDuration <= 0:
		return nil, fmt.Errorf("dsp: event detector: maximum duration %g s: give a positive number of seconds", cfg.MaxDuration)
	case cfg.MaxDuration < cfg.MinDuration:
		return nil, fmt.Errorf("dsp: event detector: maximum duration %g s is below the minimum %g s: raise it", cfg.MaxDuration, cfg.MinDuration)
	}
	cs, err := CSections(fs)
	if err != nil {
		return nil, err
	}
	as, err := AFromCSections(fs)
	if err != nil {
		return nil, err
	}
	d := &EventDetector{
		cfg:    cfg,
		fs:     fs,
		offset: LevelOffset(cfg.SensitivityDBFS),
		dc:     NewCascade(DCBlockSections(fs)...),
		cw:     NewCascade(cs...),
		aw:     NewCascade(as...),
		peak:   newPeakDetector(),
		kF:     -math.Expm1(-1 / (fs * TauFast)),
		kS:     -math.Expm1(-1 / (fs * TauSlow)),
		holdN:  int64(math.Round(cfg.Hold * fs)),
		minN:   int64(math.Round(cfg.MinDuration * fs)),
		maxN:   max(1, int64(math.Round(cfg.MaxDuration*fs))),
	}
	d.on = math.Pow(10, (cfg.Threshold-d.offset)/10)
	d.off = math.Pow(10, (cfg.Threshold-cfg.Hysteresis-d.offset)/10)
	if cfg.Bands != 0 {
		if d.bank, err = NewFilterBank(cfg.Bands, fs); err != nil {
			return nil, err
		}
		nb := len(d.bank.Bands())
		d.scratch = make([]float64, nb)
		d.seg.bandE = make([]float64, nb)
		d.ev.bandE = make([]float64, nb)
		d.pend.bandE = make([]float64, nb)
		for i := range d.queue {
			d.queue[i].Bands = make([]float64, nb)
		}
	}
	return d, nil
}

// SampleRate returns the sample rate in Hz.
func (d *EventDetector) SampleRate() float64 { return d.fs }

// Config returns the detector's configuration.
func (d *EventDetector) Config() EventConfig { return d.cfg }

// Bands returns the bands of Event.Bands, or nil without a filter bank.
func (d *EventDetector) Bands() []Band {
	if d.bank == nil {
		return nil
	}
	return d.bank.Bands()
}

// Position returns the number of samples processed so far: the position of the next sample.
func (d *EventDetector) Position() int64 { return d.pos }

// Stats returns the counts of events not delivered.
func (d *EventDetector) Stats() EventStats { return d.stats }

// Open reports whether an event is in progress and, if so, the sample it started at. A caller
// that keeps audio clips of events (a privacy matter: off by default, kept on the node only)
// starts saving samples from here and cuts the clip to [Start, End) when the event arrives.
func (d *EventDetector) Open() (start int64, open bool) {
	if d.state == evActive || d.state == evHold {
		return d.start, true
	}
	return 0, false
}

// SetSuppressed tells the detector whether a calibrator tone is present on the microphone. While
// it is, no event starts; an event in progress is dropped and counted in Stats().Suppressed.
// When the tone goes away, a new event starts only after the level has fallen below
// Threshold - Hysteresis once (fitting and removing the calibrator is not an event).
func (d *EventDetector) SetSuppressed(on bool) {
	if on == d.suppressed {
		return
	}
	d.suppressed = on
	if on && (d.state == evActive || d.state == evHold) {
		d.stats.Suppressed++
	}
	// Everything up to pos has passed through the bank and the peak detector: restart the sums.
	d.flush(d.pos, nil)
	d.ev.reset()
	d.pend.reset()
	d.state = evRearm
}

// Process feeds samples (full scale ±1.0, one channel) to the detector. Events that end are
// queued for Next. It allocates nothing.
func (d *EventDetector) Process(x []float32) {
	for len(x) > 0 {
		n := min(len(x), chunk)
		d.processChunk(x[:n])
		x = x[n:]
	}
}

func (d *EventDetector) processChunk(x []float32) {
	n := len(x)
	z, c, a := d.z[:n], d.c[:n], d.a[:n]
	for i, v := range x {
		z[i] = float64(v)
	}
	d.dc.Process(z)
	copy(c, z)
	d.cw.Process(c)
	copy(a, c)
	d.aw.Process(a)
	d.analyse(z, c, a)
}

// ProcessWeighted feeds the detector with signals a Meter has already filtered: z the
// DC-blocked (Z-weighted) samples, c and a the C- and A-weighted ones, all of one length. It
// saves the detector its own weighting filters; give it the samples of a Meter of the same
// sample rate, through MeterConfig.Tap, and do not also call Process. It allocates nothing.
func (d *EventDetector) ProcessWeighted(z, c, a []float64) {
	for len(z) > 0 {
		n := min(len(z), chunk)
		d.analyse(z[:n], c[:n], a[:n])
		z, c, a = z[n:], c[n:], a[n:]
	}
}

// analyse runs the time weightings and the event rule over one chunk of weighted samples.
func (d *EventDetector) analyse(z, c, a []float64) {
	n := len(z)
	base := d.pos // position of z[0]
	done := 0     // samples of this chunk already fed to the bank and the peak detector
	f, s := d.f, d.s
	slow := d.cfg.Slow
	for i := range n {
		a2 := a[i] * a[i]
		f += d.kF * (a2 - f)
		s += d.kS * (a2 - s)
		l := f
		if slow {
			l = s
		}
		p := base + int64(i)
		if d.transition(l, p) {
			d.feed(z[done:i], c[done:i])
			done = i
			d.step(l, p)
		}
		d.seg.sumA += a2
		d.seg.maxF = max(d.seg.maxF, f)
		d.seg.maxS = max(d.seg.maxS, s)
	}
	d.feed(z[done:], c[done:])
	d.f, d.s = f, s
	d.pos = base + int64(n)
}

func (d *EventDetector) feed(z, c []float64) {
	if len(z) == 0 {
		return
	}
	if d.bank != nil {
		d.bank.Process(z)
	}
	d.peak.process(c)
}

// transition reports whether sample p, with detection level l (a mean square), changes the state.
func (d *EventDetector) transition(l float64, p int64) bool {
	switch d.state {
	case evIdle:
		return !d.suppressed && l >= d.on
	case evActive:
		return l < d.off || p-d.start >= d.maxN
	case evHold:
		return l >= d.off || p-d.holdAt >= d.holdN || p-d.start >= d.maxN
	case evRearm:
		return !d.suppressed && l < d.off
	}
	return false
}

// step changes the state at sample p; the stretch before p has been fed.
func (d *EventDetector) step(l float64, p int64) {
	switch d.state {
	case evIdle:
		d.flush(p, nil)
		d.ev.reset()
		d.pend.reset()
		d.start = p
		d.state = evActive
	case evActive:
		d.flush(p, &d.ev)
		if p-d.start >= d.maxN {
			d.emit(p, true)
			d.state = evRearm
			return
		}
		d.holdAt = p
		d.state = evHold
		if d.holdN == 0 {
			d.emit(p, false)
			d.state = evIdle
		}
	case evHold:
		d.flush(p, &d.pend)
		if l >= d.off && p-d.start < d.maxN {
			d.ev.merge(&d.pend)
			d.pend.reset()
			d.state = evActive
			return
		}
		d.pend.reset()
		d.emit(d.holdAt, false)
		d.state = evIdle
		if !d.suppressed && l >= d.on {
			// Cannot happen while l < off ≤ on, except when max duration ended the event
			// at a loud sample: start the next one here.
			d.start = p
			d.ev.reset()
			d.state = evActive
		}
	case evRearm:
		d.flush(p, nil)
		d.state = evIdle
	}
}

// flush closes the stretch [segFrom, p): its sums go to dst (or are dropped) and restart.
func (d *EventDetector) flush(p int64, dst *eventSums) {
	n := p - d.segFrom
	d.seg.n = n
	d.seg.peakC = d.peak.take()
	if d.bank != nil {
		d.scratch = d.bank.MeanSquare(d.scratch)
		if dst != nil {
			for i, ms := range d.scratch {
				if ms == ms {
					d.seg.bandE[i] = ms * float64(n)
				}
			}
		}
	}
	if dst != nil {
		dst.merge(&d.seg)
	}
	d.seg.reset()
	d.segFrom = p
}

// emit queues the event [start, end) built from d.ev.
func (d *EventDetector) emit(end int64, truncated bool) {
	ev := &d.ev
	n := end - d.start
	if n <= 0 || n < d.minN {
		d.stats.Short++
		ev.reset()
		return
	}
	if d.qLen == eventQueue {
		d.qHead = (d.qHead + 1) % eventQueue
		d.qLen--
		d.stats.Overflowed++
	}
	e := &d.queue[(d.qHead+d.qLen)%eventQueue]
	d.qLen++
	off := d.offset
	e.Start, e.End = d.start, end
	e.Duration = float64(n) / d.fs
	e.LAeq = PowerLevel(ev.sumA/float64(n), off)
	e.LAE = ExposureLevel(e.LAeq, e.Duration)
	e.LAFmax = PowerLevel(ev.maxF, off)
	e.LASmax = PowerLevel(ev.maxS, off)
	e.LCpeak = PowerLevel(ev.peakC*ev.peakC, off)
	for i := range e.Bands {
		e.Bands[i] = PowerLevel(ev.bandE[i]/float64(n), off)
	}
	e.Truncated = truncated
	ev.reset()
}

// Next moves the oldest ended event into e (reusing e.Bands when it has room) and reports
// whether there was one. Call it after each Process until it returns false.
func (d *EventDetector) Next(e *Event) bool {
	if d.qLen == 0 {
		return false
	}
	q := &d.queue[d.qHead]
	bands := e.Bands[:0]
	*e = *q
	if q.Bands == nil {
		e.Bands = nil
	} else {
		e.Bands = append(bands, q.Bands...)
	}
	d.qHead = (d.qHead + 1) % eventQueue
	d.qLen--
	return true
}

// Flush ends an event in progress at the current position (marked Truncated), as at the end of
// a recording or before the detector is dropped. An event in its hold ends where the hold began.
func (d *EventDetector) Flush() {
	switch d.state {
	case evActive:
		d.flush(d.pos, &d.ev)
		d.emit(d.pos, true)
	case evHold:
		d.flush(d.pos, nil)
		d.emit(d.holdAt, false)
	default:
		return
	}
	d.pend.reset()
	d.state = evIdle
}
