package record

import (
	"fmt"
	"math"
	"time"
)

// AppendBinary encodes r: version, flags, start, duration, the eleven levels (int16 centi-dB),
// dropped samples, spectrum.
func (r *Second) AppendBinary(b []byte) ([]byte, error) {
	if err := checkTime(r.Start); err != nil {
		return b, fmt.Errorf("second record: %w", err)
	}
	if err := checkSpectrum(r.FirstBand, r.Spectrum); err != nil {
		return b, fmt.Errorf("second record: %w", err)
	}
	e := enc{b}
	e.byte1(secondVersion)
	e.flags(r.Flags)
	e.time(r.Start)
	e.dur(r.Duration)
	for _, l := range [...]float64{r.LAeq, r.LCeq, r.LZeq, r.LAFmax, r.LAFmin, r.LASmax, r.LASmin, r.LAImax, r.LCpeak, r.LZpeak, r.LAE} {
		e.level(l)
	}
	e.uvarint(r.DroppedSamples)
	e.spectrum(r.FirstBand, r.Spectrum)
	return e.b, nil
}

// UnmarshalBinary decodes what AppendBinary wrote, of this or an older version.
func (r *Second) UnmarshalBinary(data []byte) error {
	d := dec{b: data, what: "second"}
	d.version(secondVersion)
	*r = Second{header: r.header}
	r.Flags = d.flags()
	r.Start = d.time()
	r.Duration = d.dur()
	for _, p := range [...]*float64{&r.LAeq, &r.LCeq, &r.LZeq, &r.LAFmax, &r.LAFmin, &r.LASmax, &r.LASmin, &r.LAImax, &r.LCpeak, &r.LZpeak, &r.LAE} {
		*p = d.level()
	}
	r.DroppedSamples = d.uvarint()
	r.FirstBand, r.Spectrum = d.spectrum()
	return d.end()
}

func (r *Minute) levels() [15]*float64 {
	return [...]*float64{&r.LAeq, &r.LCeq, &r.LZeq, &r.LAFmax, &r.LAFmin, &r.LAF1, &r.LAF5, &r.LAF10,
		&r.LAF50, &r.LAF90, &r.LAF95, &r.LAF99, &r.LAE, &r.LCpeak, &r.LAImax}
}

// maxHistogramBins bounds a stored histogram: 0.1 dB bins over the whole storable level range.
const maxHistogramBins = 2 * math.MaxInt16 / 10

// AppendBinary encodes r: version, flags, start, valid seconds, fifteen levels, spectrum, then
// the histogram with zero ends trimmed: first bin, bin count, and a run-length stream in which
// uvarint(c<<1) is one bin of count c > 0 and uvarint(n<<1|1) is n empty bins.
func (r *Minute) AppendBinary(b []byte) ([]byte, error) {
	if err := checkTime(r.Start); err != nil {
		return b, fmt.Errorf("minute record: %w", err)
	}
	if err := checkSpectrum(r.FirstBand, r.Spectrum); err != nil {
		return b, fmt.Errorf("minute record: %w", err)
	}
	for _, n := range append([]int{r.ValidSeconds, r.OverloadSeconds, r.UnderRangeSeconds}, r.LeftOut[:]...) {
		if n < 0 || n > 1<<20 {
			return b, fmt.Errorf("minute record: second count %d out of range", n)
		}
	}
	counts, first := r.Histogram.Counts, int64(r.Histogram.First)
	for len(counts) > 0 && counts[0] == 0 {
		counts, first = counts[1:], first+1
	}
	for len(counts) > 0 && counts[len(counts)-1] == 0 {
		counts = counts[:len(counts)-1]
	}
	if len(counts) > maxHistogramBins {
		return b, fmt.Errorf("minute record: histogram of %d bins is too wide (at most %d)", len(counts), maxHistogramBins)
	}
	if len(counts) == 0 {
		first = 0
	}
	e := enc{b}
	e.byte1(minuteVersion)
	e.flags(r.Flags)
	e.time(r.Start)
	e.uvarint(uint64(r.ValidSeconds))
	for _, p := range r.levels() {
		e.level(*p)
	}
	e.spectrum(r.FirstBand, r.Spectrum)
	e.varint(first)
	e.uvarint(uint64(len(counts)))
	for i := 0; i < len(counts); {
		if counts[i] != 0 {
			e.uvarint(uint64(counts[i]) << 1)
			i++
			continue
		}
		j := i
		for j < len(counts) && counts[j] == 0 {
			j++
		}
		e.uvarint(uint64(j-i)<<1 | 1)
		i = j
	}
	e.uvarint(uint64(len(r.LeftOut) - 1))
	for _, n := range r.LeftOut[1:] {
		e.uvarint(uint64(n))
	}
	e.uvarint(uint64(r.OverloadSeconds))
	e.uvarint(uint64(r.UnderRangeSeconds))
	e.uvarint(uint64(max(r.ValidDuration, 0) / time.Microsecond))
	return e.b, nil
}

// UnmarshalBinary decodes what AppendBinary wrote, of this or an older version.
func (r *Minute) UnmarshalBinary(data []byte) error {
	d := dec{b: data, what: "minute"}
	v := d.version(minuteVersion)
	*r = Minute{header: r.header}
	r.Flags = d.flags()
	r.Start = d.time()
	r.ValidSeconds = int(d.uvarint())
	if r.ValidSeconds > 1<<20 {
		d.fail("valid seconds out of range")
	}
	for _, p := range r.levels() {
		*p = d.level()
	}
	r.FirstBand, r.Spectrum = d.spectrum()
	first := d.varint()
	n := d.uvarint()
	if d.err == nil && (n > maxHistogramBins || first < math.MinInt32 || first+int64(n) > math.MaxInt32) {
		d.fail("histogram bounds out of range")
	}
	if d.err == nil && n > 0 {
		r.Histogram.First = int32(first)
		r.Histogram.Counts = make([]uint32, n)
		for i := uint64(0); i < n && d.err == nil; {
			v := d.uvarint()
			if v&1 == 0 {
				if v>>1 > math.MaxUint32 || v == 0 {
					d.fail("bad histogram count")
					break
				}
				r.Histogram.Counts[i] = uint32(v >> 1)
				i++
				continue
			}
			run := v >> 1
			if run == 0 || run > n-i {
				d.fail("bad histogram run")
				break
			}
			i += run
		}
		if v == 1 {
			r.Histogram.Counts = centreBins(r.Histogram.Counts)
		}
	}
	if v >= 2 {
		n := d.uvarint()
		for i := uint64(0); i < n && d.err == nil; i++ {
			c := d.uvarint()
			if c > 1<<20 {
				d.fail("left-out count out of range")
			}
			if int(i)+1 < len(r.LeftOut) {
				r.LeftOut[i+1] = int(c) // reasons a newer build adds are skipped
			}
		}
		for _, p := range [...]*int{&r.OverloadSeconds, &r.UnderRangeSeconds} {
			c := d.uvarint()
			if c > 1<<20 {
				d.fail("bound count out of range")
			}
			*p = int(c)
		}
		us := d.uvarint()
		if us > uint64(1<<20)*1e6 {
			d.fail("valid duration out of range")
		}
		r.ValidDuration = time.Duration(us) * time.Microsecond
	}
	return d.end()
}

// centreBins converts the counts of version 1 bins, [k/10, (k+1)/10) dB, to bins centred on the
// 0.1 dB grid, [k/10 - 0.05, k/10 + 0.05): old bin k is split evenly between new bins k and k+1,
// the odd sample to k+1. The first bin number stays; the result has one bin more.
func centreBins(old []uint32) []uint32 {
	out := make([]uint32, len(old)+1)
	for i, c := range old {
		out[i] += c / 2
		out[i+1] += c - c/2
	}
	return out
}

// AppendBinary encodes r: version, flags, start, length, four levels, spectrum.
func (r *Event) AppendBinary(b []byte) ([]byte, error) {
	if err := checkTime(r.Start); err != nil {
		return b, fmt.Errorf("event record: %w", err)
	}
	if err := checkSpectrum(r.FirstBand, r.Spectrum); err != nil {
		return b, fmt.Errorf("event record: %w", err)
	}
	if r.End.Before(r.Start) {
		return b, fmt.Errorf("event record: end %s before start %s", r.End.Format(time.RFC3339Nano), r.Start.Format(time.RFC3339Nano))
	}
	e := enc{b}
	e.byte1(eventVersion)
	e.flags(r.Flags)
	e.time(r.Start)
	e.varint(r.End.UnixMicro() - r.Start.UnixMicro())
	e.level(r.LAFmax)
	e.level(r.LAeq)
	e.level(r.LAE)
	e.level(r.LCpeak)
	e.spectrum(r.FirstBand, r.Spectrum)
	return e.b, nil
}

// UnmarshalBinary decodes what AppendBinary wrote, of this or an older version.
func (r *Event) UnmarshalBinary(data []byte) error {
	d := dec{b: data, what: "event"}
	d.version(eventVersion)
	*r = Event{header: r.header}
	r.Flags = d.flags()
	start := d.varint()
	length := d.varint()
	if d.err == nil && (length < 0 || start > math.MaxInt64-length) {
		d.fail("bad event length")
	}
	r.Start, r.End = time.UnixMicro(start).UTC(), time.UnixMicro(start+length).UTC()
	r.LAFmax = d.level()
	r.LAeq = d.level()
	r.LAE = d.level()
	r.LCpeak = d.level()
	r.FirstBand, r.Spectrum = d.spectrum()
	return d.end()
}

// AppendBinary encodes r: version, flags, time, eight float64 values, a byte of booleans.
func (r *Calibration) AppendBinary(b []byte) ([]byte, error) {
	if err := checkTime(r.At); err != nil {
		return b, fmt.Errorf("calibration record: %w", err)
	}
	e := enc{b}
	e.byte1(calibrationVersion)
	e.flags(r.Flags)
	e.time(r.At)
	for _, v := range [...]float64{r.Reference, r.Measured, r.Deviation, r.Frequency, r.Stability, r.SensitivityBefore, r.SensitivityAfter} {
		e.float(v)
	}
	var bools byte
	if r.Applied {
		bools |= 1
	}
	if r.OK {
		bools |= 2
	}
	e.byte1(bools)
	return e.b, nil
}

// UnmarshalBinary decodes what AppendBinary wrote, of this or an older version.
func (r *Calibration) UnmarshalBinary(data []byte) error {
	d := dec{b: data, what: "calibration"}
	d.version(calibrationVersion)
	*r = Calibration{header: r.header}
	r.Flags = d.flags()
	r.At = d.time()
	for _, p := range [...]*float64{&r.Reference, &r.Measured, &r.Deviation, &r.Frequency, &r.Stability, &r.SensitivityBefore, &r.SensitivityAfter} {
		*p = d.float()
	}
	bools := d.byte1()
	if bools > 3 {
		d.fail("bad boolean byte")
	}
	r.Applied, r.OK = bools&1 != 0, bools&2 != 0
	return d.end()
}

// Health fields are tagged: each is uvarint(tag<<3 | wire) followed by its value, wire 0 a
// uvarint and wire 1 a little-endian float64. Tags never change meaning; readers skip tags they
// do not know, so a field added later is backward and forward compatible.
const (
	wireVarint = 0
	wireFloat  = 1
)

// Health tags. Append only.
const (
	tagFlags = 1 + iota
	tagClipped
	tagDCOffset
	tagSilent
	tagStuck
	tagUnderRange
	tagDropped
	tagQueueOverflows
	tagCPU
	tagMemory
	tagDiskFree
	tagStoreBytes
	tagClockSynced
	tagClockError
	tagTemperature
	tagSelfTestChecks
	tagSelfTestFailed
)

func (r *Health) fields() (ints map[uint64]*uint64, bools map[uint64]*bool, floats map[uint64]*float64) {
	return map[uint64]*uint64{tagClipped: &r.Clipped, tagUnderRange: &r.UnderRangeSeconds, tagDropped: &r.DroppedSamples,
			tagQueueOverflows: &r.QueueOverflows, tagStoreBytes: &r.StoreBytes,
			tagSelfTestChecks: &r.SelfTestChecks, tagSelfTestFailed: &r.SelfTestFailed},
		map[uint64]*bool{tagSilent: &r.Silent, tagStuck: &r.Stuck, tagClockSynced: &r.ClockSynced},
		map[uint64]*float64{tagDCOffset: &r.DCOffset, tagCPU: &r.CPU, tagMemory: &r.MemoryMB, tagDiskFree: &r.DiskFreeMB,
			tagClockError: &r.ClockErrorMs, tagTemperature: &r.TemperatureC}
}

// AppendBinary encodes r: version, time, the number of fields, then the tagged fields in tag
// order; zero counts, false booleans and NaN floats are left out.
func (r *Health) AppendBinary(b []byte) ([]byte, error) {
	if err := checkTime(r.At); err != nil {
		return b, fmt.Errorf("health record: %w", err)
	}
	f := enc{}
	n := 0
	ints, bools, floats := r.fields()
	for tag := uint64(1); tag <= tagSelfTestFailed; tag++ {
		switch {
		case tag == tagFlags:
			if r.Flags != 0 {
				f.uvarint(tag<<3 | wireVarint)
				f.uvarint(uint64(r.Flags))
				n++
			}
		case ints[tag] != nil:
			if *ints[tag] != 0 {
				f.uvarint(tag<<3 | wireVarint)
				f.uvarint(*ints[tag])
				n++
			}
		case bools[tag] != nil:
			if *bools[tag] {
				f.uvarint(tag<<3 | wireVarint)
				f.uvarint(1)
				n++
			}
		case floats[tag] != nil:
			if !math.IsNaN(*floats[tag]) {
				f.uvarint(tag<<3 | wireFloat)
				f.float(*floats[tag])
				n++
			}
		}
	}
	e := enc{b}
	e.byte1(healthVersion)
	e.time(r.At)
	e.uvarint(uint64(n))
	e.b = append(e.b, f.b...)
	return e.b, nil
}

// UnmarshalBinary decodes what AppendBinary wrote, of this or an older version; fields it does
// not know are skipped, fields absent from the value are zero (NaN for floats).
func (r *Health) UnmarshalBinary(data []byte) error {
	d := dec{b: data, what: "health"}
	d.version(healthVersion)
	*r = Health{header: r.header}
	r.At = d.time()
	ints, bools, floats := r.fields()
	for _, p := range floats {
		*p = math.NaN()
	}
	n := d.count(2)
	for i := 0; i < n && d.err == nil; i++ {
		key := d.uvarint()
		tag, wire := key>>3, key&7
		switch wire {
		case wireVarint:
			v := d.uvarint()
			switch {
			case tag == tagFlags:
				if v > math.MaxUint32 {
					d.fail("flags out of range")
				}
				r.Flags = Flags(v)
			case ints[tag] != nil:
				*ints[tag] = v
			case bools[tag] != nil:
				*bools[tag] = v != 0
			case floats[tag] != nil:
				d.fail("field %d has the wrong type", tag)
			}
		case wireFloat:
			v := d.float()
			if floats[tag] != nil {
				*floats[tag] = v
			} else if ints[tag] != nil || bools[tag] != nil || tag == tagFlags {
				d.fail("field %d has the wrong type", tag)
			}
		default:
			d.fail("unknown wire type %d", wire)
		}
	}
	return d.end()
}

// AppendBinary encodes r: version, from, length, reason.
func (r *Gap) AppendBinary(b []byte) ([]byte, error) {
	if err := checkRange("gap", r.From, r.To); err != nil {
		return b, err
	}
	e := enc{b}
	e.byte1(gapVersion)
	e.time(r.From)
	e.time(r.To)
	e.str(r.Reason)
	return e.b, nil
}

func checkRange(what string, from, to time.Time) error {
	if err := checkTime(from); err != nil {
		return fmt.Errorf("%s record: %w", what, err)
	}
	if err := checkTime(to); err != nil {
		return fmt.Errorf("%s record: %w", what, err)
	}
	if to.Before(from) {
		return fmt.Errorf("%s record: end %s before start %s", what, to.Format(time.RFC3339Nano), from.Format(time.RFC3339Nano))
	}
	return nil
}

// UnmarshalBinary decodes what AppendBinary wrote, of this or an older version.
func (r *Gap) UnmarshalBinary(data []byte) error {
	d := dec{b: data, what: "gap"}
	d.version(gapVersion)
	*r = Gap{header: r.header}
	r.From = d.time()
	r.To = d.time()
	r.Reason = d.str()
	return d.end()
}

// AppendBinary encodes r: version, flags, from, to, reason.
func (r *Annotation) AppendBinary(b []byte) ([]byte, error) {
	if err := checkRange("annotation", r.From, r.To); err != nil {
		return b, err
	}
	e := enc{b}
	e.byte1(annotationVersion)
	e.flags(r.Flags)
	e.time(r.From)
	e.time(r.To)
	e.str(r.Reason)
	return e.b, nil
}

// UnmarshalBinary decodes what AppendBinary wrote, of this or an older version.
func (r *Annotation) UnmarshalBinary(data []byte) error {
	d := dec{b: data, what: "annotation"}
	d.version(annotationVersion)
	*r = Annotation{header: r.header}
	r.Flags = d.flags()
	r.From = d.time()
	r.To = d.time()
	r.Reason = d.str()
	return d.end()
}

// AppendBinary encodes r: version, time, software version, config hash, sensitivity (float64),
// sample rate, device, time zone, the first sequence numbers (version 2), node id, site,
// latitude and longitude (float64, version 3).
func (r *Session) AppendBinary(b []byte) ([]byte, error) {
	if err := checkTime(r.At); err != nil {
		return b, fmt.Errorf("session record: %w", err)
	}
	if r.SampleRate < 0 {
		return b, fmt.Errorf("session record: negative sample rate %d", r.SampleRate)
	}
	e := enc{b}
	e.byte1(sessionVersion)
	e.time(r.At)
	e.str(r.SoftwareVersion)
	e.str(r.ConfigHash)
	e.float(r.SensitivityDBFS)
	e.uvarint(uint64(r.SampleRate))
	e.str(r.Device)
	e.str(r.TimeZone)
	e.uvarint(uint64(len(r.FirstSeq) - 1))
	for _, v := range r.FirstSeq[1:] {
		e.uvarint(v)
	}
	e.str(r.NodeID)
	e.str(r.Site)
	e.float(r.Latitude)
	e.float(r.Longitude)
	return e.b, nil
}

// UnmarshalBinary decodes what AppendBinary wrote, of this or an older version.
func (r *Session) UnmarshalBinary(data []byte) error {
	d := dec{b: data, what: "session"}
	v := d.version(sessionVersion)
	*r = Session{header: r.header}
	r.At = d.time()
	r.SoftwareVersion = d.str()
	r.ConfigHash = d.str()
	r.SensitivityDBFS = d.float()
	rate := d.uvarint()
	if rate > math.MaxInt32 {
		d.fail("sample rate out of range")
	}
	r.SampleRate = int(rate)
	r.Device = d.str()
	r.TimeZone = d.str()
	if v >= 2 {
		n := d.uvarint()
		if n > 255 {
			d.fail("too many first sequence numbers")
		}
		for i := uint64(0); i < n && d.err == nil; i++ {
			seq := d.uvarint()
			if int(i)+1 < len(r.FirstSeq) {
				r.FirstSeq[i+1] = seq // kinds a newer build adds are skipped
			}
		}
	}
	if v >= 3 {
		r.NodeID = d.str()
		r.Site = d.str()
		r.Latitude = d.float()
		r.Longitude = d.float()
	}
	return d.end()
}
