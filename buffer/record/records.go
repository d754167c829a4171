package record

import (
	"fmt"
	"time"
)

// Record is one stored result. The concrete types are *Second, *Minute, *Event, *Calibration,
// *Health, *Gap, *Annotation and *Session; the set is closed (a new kind is one type, one encoder
// and one decoder in this package).
type Record interface {
	// Kind returns the record's kind.
	Kind() Kind
	// Seq returns the record's sequence number within its kind, or 0 before Append.
	Seq() uint64
	// Time returns the time the record is indexed under: the start of the interval it covers,
	// or the moment it describes.
	Time() time.Time
	// AppendBinary appends the record's encoding (version byte first) to b.
	AppendBinary(b []byte) ([]byte, error)

	// SetSeq sets the sequence number. It is for stores: Append and the readers set it;
	// anyone else who calls it breaks the link between a record and its stored copy.
	SetSeq(uint64)
}

// header holds the sequence number that a store assigns; every record type embeds it.
type header struct{ seq uint64 }

func (h *header) Seq() uint64     { return h.seq }
func (h *header) SetSeq(s uint64) { h.seq = s }
func checkTime(t time.Time) error {
	if y := t.Year(); y < 1970 || y > 2200 {
		return fmt.Errorf("time %s outside the years 1970 to 2200", t.Format(time.RFC3339))
	}
	return nil
}

// Second holds the results of one measurement interval, normally one second. Levels are in
// decibels; NaN means no level (digital silence, or not measured). Stored levels keep 0.01 dB
// resolution.
type Second struct {
	header
	Start    time.Time     // start of the interval (stored in UTC, microsecond resolution)
	Duration time.Duration // length of the interval: its sample count divided by the sample rate

	LAeq, LCeq, LZeq float64
	LAFmax, LAFmin   float64
	LASmax, LASmin   float64
	LAImax           float64
	LCpeak, LZpeak   float64
	LAE              float64

	// Spectrum holds one-third-octave band levels LZeq; Spectrum[i] is the band with IEC
	// 61260-1 band number FirstBand+i (band 0 is 1 kHz, band -19 is 12.5 Hz). Nil when the
	// node does not compute spectra.
	Spectrum  []float64
	FirstBand int

	Flags          Flags
	DroppedSamples uint64 // samples lost in the interval (see the Dropped flag)
}

// Minute holds the statistics of one minute built from its Fast level samples.
type Minute struct {
	header
	Start time.Time

	LAeq, LCeq, LZeq float64
	LAFmax, LAFmin   float64
	// LAF1 ... LAF99: the A-weighted Fast level exceeded for N % of the minute.
	LAF1, LAF5, LAF10, LAF50, LAF90, LAF95, LAF99 float64
	LAE                                           float64
	LCpeak                                        float64
	LAImax                                        float64

	Spectrum  []float64 // one-third-octave LZeq over the minute, as in Second
	FirstBand int

	// Histogram counts the minute's A-weighted Fast level samples in 0.1 dB bins, so that
	// percentile levels over any period merge exactly.
	Histogram LevelHistogram

	// ValidSeconds counts the second records whose levels are in the minute: the seconds the
	// validity rule (package record) counts. Every level, the histogram and the spectrum come
	// from these seconds alone.
	ValidSeconds int
	// ValidDuration is the length of those seconds: ValidSeconds whole seconds, less what the
	// first and last second of a run lack (a run starts and ends between two UTC seconds). The
	// minute's energy is 10^(LAeq/10) · ValidDuration. Zero in records of format version 1.
	ValidDuration time.Duration
	// LeftOut counts the second records the rule left out, by reason (LeftOut[Counted]
	// is unused). All zero in records of format version 1, which did not keep them.
	LeftOut [NumReasons]int
	// OverloadSeconds and UnderRangeSeconds count the valid seconds flagged overload (the
	// minute's levels are lower bounds) and under-range (upper bounds).
	OverloadSeconds, UnderRangeSeconds int
	// Flags are the bound flags of the valid seconds (Overload, UnderRange) and the conditions
	// of the minute (Clipped, ClockUnsynced); a left-out flag here comes from an annotation
	// covering the whole minute when the store is read, or from a version 1 record, and
	// leaves the whole minute out.
	Flags Flags
}

// Tally returns the minute's seconds by what the validity rule made of them.
func (r *Minute) Tally() Tally {
	t := Tally{Counted: float64(r.ValidSeconds), Overload: float64(r.OverloadSeconds), UnderRange: float64(r.UnderRangeSeconds)}
	if r.ValidDuration > 0 {
		t.Counted = r.ValidDuration.Seconds()
	}
	for i, n := range r.LeftOut {
		t.LeftOut[i] = float64(n)
	}
	return t
}

// LevelHistogram counts level samples in 0.1 dB bins centred on the 0.1 dB grid: Counts[i] is the
// number of samples with levels in [k/10 - 0.05, k/10 + 0.05) dB, where k = First + i (the layout
// of dsp.Histogram). It is stored with its zero ends trimmed and runs of empty bins compressed.
//
// Minute records of version 1 held bins [k/10, (k+1)/10); reading one converts it: each old bin
// straddles the new bins k and k+1, so its count is split evenly between them (the odd sample to
// k+1), which keeps the total and the mean level. Percentiles of such a record may read 0.1 dB
// apart from what the same samples give in the new layout.
type LevelHistogram struct {
	First  int32
	Counts []uint32
}

// Total returns the number of samples counted.
func (h LevelHistogram) Total() uint64 {
	var n uint64
	for _, c := range h.Counts {
		n += uint64(c)
	}
	return n
}

// Merge returns the bin-by-bin sum of h and o (exact: percentiles of the merged histogram are
// those of the pooled samples, to the bin).
func (h LevelHistogram) Merge(o LevelHistogram) LevelHistogram {
	if len(o.Counts) == 0 {
		return LevelHistogram{First: h.First, Counts: append([]uint32(nil), h.Counts...)}
	}
	if len(h.Counts) == 0 {
		return LevelHistogram{First: o.First, Counts: append([]uint32(nil), o.Counts...)}
	}
	lo := min(int64(h.First), int64(o.First))
	hi := max(int64(h.First)+int64(len(h.Counts)), int64(o.First)+int64(len(o.Counts)))
	out := LevelHistogram{First: int32(lo), Counts: make([]uint32, hi-lo)}
	for i, c := range h.Counts {
		out.Counts[int64(h.First)-lo+int64(i)] += c
	}
	for i, c := range o.Counts {
		out.Counts[int64(o.First)-lo+int64(i)] += c
	}
	return out
}

// Event describes a noise event: a period in which the level passed the node's event trigger.
type Event struct {
	header
	Start, End time.Time
	LAFmax     float64
	LAeq       float64
	LAE        float64
	LCpeak     float64
	Spectrum   []float64 // one-third-octave LZeq over the event, as in Second
	FirstBand  int
	Flags      Flags
}

// Calibration records one check against a sound calibrator.
type Calibration struct {
	header
	At                time.Time // when the check ended
	Reference         float64   // the calibrator's stated level, dB
	Measured          float64   // the level measured with the sensitivity in use before the check, dB
	Deviation         float64   // Measured - Reference, dB
	Frequency         float64   // the detected tone frequency, Hz
	Stability         float64   // spread of the level during the check, dB
	SensitivityBefore float64   // microphone sensitivity in use before the check, dBFS at 94 dB
	SensitivityAfter  float64   // sensitivity in use after the check, dBFS at 94 dB
	Applied           bool      // whether the new sensitivity was put into use
	OK                bool      // whether the check passed
	Flags             Flags
}

// Health is a snapshot of the node's condition. Float fields are NaN when not measured.
// New fields may be added in later versions without breaking older files or older readers (the
// encoding is tagged; unknown tags are skipped).
type Health struct {
	header
	At                time.Time // when the snapshot was taken
	Flags             Flags
	Clipped           uint64  // clipped samples since the previous snapshot
	DCOffset          float64 // DC offset as a fraction of full scale
	Silent            bool    // the input was digital silence
	Stuck             bool    // the input repeated one value
	UnderRangeSeconds uint64  // seconds under the measuring range since the previous snapshot
	DroppedSamples    uint64  // samples lost since the previous snapshot
	QueueOverflows    uint64  // audio blocks lost to a full queue since the previous snapshot
	CPU               float64 // process CPU use, percent of one core
	MemoryMB          float64 // resident memory, MB
	DiskFreeMB        float64 // free space on the store's file system, MB
	StoreBytes        uint64  // size of the store file
	ClockSynced       bool    // the system clock reports synchronisation
	ClockErrorMs      float64 // estimated clock error, ms
	TemperatureC      float64 // board temperature, °C
	// SelfTestChecks and SelfTestFailed report a self-verification of the digital chain run
	// since the previous snapshot (leqnode verify): the checks run and those that failed; both
	// 0 when none ran.
	SelfTestChecks uint64
	SelfTestFailed uint64
}

// Gap states that no data exists from From to To, and why (device lost, start after a crash,
// clock step, ...), so that a report can tell silence from missing data.
type Gap struct {
	header
	From, To time.Time
	Reason   string
}

// Annotation records something learnt after the fact about the time range [From, To): the
// flags apply, when reading, to every second, minute and event record overlapping the range.
type Annotation struct {
	header
	From, To time.Time
	Flags    Flags
	Reason   string
}

// Session is written at every start and at every change of a setting that affects the numbers.
type Session struct {
	header
	At              time.Time // when the session started or its settings changed
	SoftwareVersion string
	ConfigHash      string
	SensitivityDBFS float64 // microphone sensitivity in use: dBFS for 94 dB at 1 kHz
	SampleRate      int     // Hz
	Device          string
	TimeZone        string // IANA name of the node's configured zone, e.g. "Europe/Paris"
	// FirstSeq holds, per kind, the first sequence number the node's store assigns in this run
	// of the node (Store.FirstSeq): numbers skipped just before it were never committed (a
	// crash), not lost. Zero in records of format version 1.
	FirstSeq [KindSession + 1]uint64
	// NodeID and Site name the node and its measurement site (the configuration's node.id and
	// node.site), so that a store or a report read away from its node still says whose it is.
	// Empty in records of format versions 1 and 2.
	NodeID, Site string
	// Latitude and Longitude place the node in decimal degrees (WGS 84), already rounded to
	// the configuration's node.location_decimals; both zero means no position is configured
	// (the configuration's own rule), as in records of format versions 1 and 2.
	Latitude, Longitude float64
}

// HasLocation says whether the session carries a position.
func (r *Session) HasLocation() bool { return r.Latitude != 0 || r.Longitude != 0 }

func (*Second) Kind() Kind      { return KindSecond }
func (*Minute) Kind() Kind      { return KindMinute }
func (*Event) Kind() Kind       { return KindEvent }
func (*Calibration) Kind() Kind { return KindCalibration }
func (*Health) Kind() Kind      { return KindHealth }
func (*Gap) Kind() Kind         { return KindGap }
func (*Annotation) Kind() Kind  { return KindAnnotation }
func (*Session) Kind() Kind     { return KindSession }

func (r *Second) Time() time.Time      { return r.Start }
func (r *Minute) Time() time.Time      { return r.Start }
func (r *Event) Time() time.Time       { return r.Start }
func (r *Calibration) Time() time.Time { return r.At }
func (r *Health) Time() time.Time      { return r.At }
func (r *Gap) Time() time.Time         { return r.From }
func (r *Annotation) Time() time.Time  { return r.From }
func (r *Session) Time() time.Time     { return r.At }

// NewRecord returns a new zero record of kind k.
func NewRecord(k Kind) (Record, error) {
	switch k {
	case KindSecond:
		return new(Second), nil
	case KindMinute:
		return new(Minute), nil
	case KindEvent:
		return new(Event), nil
	case KindCalibration:
		return new(Calibration), nil
	case KindHealth:
		return new(Health), nil
	case KindGap:
		return new(Gap), nil
	case KindAnnotation:
		return new(Annotation), nil
	case KindSession:
		return new(Session), nil
	}
	return nil, fmt.Errorf("unknown record kind %d", uint8(k))
}

// Decode decodes a record of kind k from data (as written by AppendBinary). A truncated or
// garbled value gives an error wrapping ErrCorruptRecord; a value from a newer format version
// gives an error wrapping ErrNewerRecord.
func Decode(k Kind, data []byte) (Record, error) {
	r, err := NewRecord(k)
	if err != nil {
		return nil, err
	}
	if err := r.(interface{ UnmarshalBinary([]byte) error }).UnmarshalBinary(data); err != nil {
		return nil, err
	}
	return r, nil
}

func checkSpectrum(first int, s []float64) error {
	if len(s) > 1000 {
		return fmt.Errorf("spectrum of %d bands is too long (at most 1000)", len(s))
	}
	if first < -1000 || first > 1000 {
		return fmt.Errorf("first band number %d out of range", first)
	}
	return nil
}

// Format versions of the record encodings.
const (
	secondVersion      = 1
	minuteVersion      = 2 // 2: histogram bins centred on the 0.1 dB grid (see LevelHistogram), left-out and bound counts
	eventVersion       = 1
	calibrationVersion = 1
	healthVersion      = 1
	gapVersion         = 1
	annotationVersion  = 1
	sessionVersion     = 3 // 2 adds the run's first sequence numbers; 3 the node id, site and position
)

// DecodeTime returns the time an encoded record of kind k is indexed under (Record.Time),
// decoding only what precedes it: a store indexes records by it without decoding them whole.
func DecodeTime(k Kind, v []byte) (time.Time, error) {
	d := dec{b: v, what: k.String()}
	var max byte
	switch k {
	case KindSecond:
		max = secondVersion
	case KindMinute:
		max = minuteVersion
	case KindEvent:
		max = eventVersion
	case KindCalibration:
		max = calibrationVersion
	case KindHealth:
		max = healthVersion
	case KindGap:
		max = gapVersion
	case KindAnnotation:
		max = annotationVersion
	case KindSession:
		max = sessionVersion
	default:
		return time.Time{}, fmt.Errorf("unknown record kind %d", uint8(k))
	}
	d.version(max)
	switch k {
	case KindSecond, KindMinute, KindEvent, KindCalibration, KindAnnotation:
		d.flags()
	}
	t := d.time()
	if d.err != nil {
		return time.Time{}, d.err
	}
	return t, nil
}
